"""Survey design: the target from the model, the synthetic picks against the head-wave
formula, two layouts of which one is too short to see the target, bad input.

Small grids and ensembles of 3 members keep the whole module to seconds; what 8-member
designs say on the demo site is measured in the README (``tomo design``).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from helpers import head_wave_times, line_picks

from tomo.api import design, design_table_lines
from tomo.cli import main
from tomo.core.errors import InputError
from tomo.survey.model import Layer, Model, read_model
from tomo.survey.terrain import flat_terrain
from tomo.uncertainty.design import (
    RESOLVED_SHARE,
    SURFACE_STEP_M,
    assess_layout,
    cheapest,
    design_picks,
    model_surface,
    target_velocity,
)

SITE = """
[[layer]]
velocity = 500.0
gradient = 10.0
base = [[0.0, 7.0], [46.0, 9.0]]

[[layer]]
velocity = 2000.0

[terrain]
points = [[-40.0, 50.0], [90.0, 50.0]]
"""


def _layout(path, geophones, shots):
    rows = [f"{s:g},{g:g}" for s in shots for g in geophones if abs(g - s) > 1e-9]
    path.write_text("source_x,receiver_x\n" + "\n".join(rows) + "\n", encoding="utf-8")
    return path


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    folder = tmp_path_factory.mktemp("design")
    (folder / "site.toml").write_text(SITE, encoding="utf-8")
    # 24 geophones at 2 m, shots off both ends and through the spread: 46 m for a
    # target 7-9 m deep (spread 3-5 times the target depth: common practice)
    long = _layout(folder / "long.csv", np.arange(24) * 2.0, [-4.0, 0.0, 12.0, 23.0, 34.0, 46.0, 50.0])
    # 12 geophones at 1 m: 11 m of spread, under the crossover distance of the target's
    # head wave, x_c = 2H sqrt((V2 + V1)/(V2 - V1)) = 2 x 8 x sqrt(2580/1420) = 21.6 m
    # (Telford, Geldart & Sheriff 1990, sec. 4.3; H = 8 m, V1 = 580 m/s just above it)
    short = _layout(folder / "short.csv", 17.0 + np.arange(12), [16.0, 17.0, 22.5, 28.0, 29.0])
    return folder, short, long


@pytest.fixture(scope="module")
def result(files):
    folder, short, long = files
    return design(folder / "site.toml", [short, long], noise_ms=0.5, tolerance_m=2.0, members=3, seed=0, workers=1,
                  max_iterations=8)


def test_the_target_is_the_middle_of_the_deepest_step():
    model = Model((Layer(500.0, 10.0, np.array([[0.0, 7.0], [46.0, 9.0]])), Layer(2000.0)))
    value, text = target_velocity(model)
    # just above the interface 500 + 10 x depth, just below 2000 m/s; the geometric
    # mean at the two points (7 and 9 m) and their median (the mean of the two)
    expected = np.median([math.sqrt((500.0 + 10 * d) * 2000.0) for d in (7.0, 9.0)])
    assert value == pytest.approx(expected, abs=0.05) and "deepest interface" in text
    # the model's surface at that velocity is the interface, to the search step
    x = np.array([0.0, 23.0, 46.0])
    np.testing.assert_allclose(model_surface(model, x, value, 30.0), [7.0, 8.0, 9.0], atol=SURFACE_STEP_M + 1e-9)
    assert target_velocity(model, 1500.0)[0] == 1500.0
    with pytest.raises(InputError, match="one layer"):
        target_velocity(Model((Layer(800.0),)))


def test_synthetic_picks_follow_the_head_wave_formula():
    terrain = flat_terrain(-40.0, 90.0, 50.0)
    model = Model((Layer(500.0, 0.0, np.array([[0.0, 6.0]])), Layer(2000.0)), terrain=terrain)
    layout = line_picks(terrain, np.arange(24) * 2.0, [-4.0, 23.0, 50.0])
    picks = design_picks(model, layout, terrain, 1e-6, 0)
    # first arrivals over a flat layer (Telford, Geldart & Sheriff 1990, Applied
    # Geophysics, 2nd ed., sec. 4.3): within 1 %, the accuracy the default forward grid
    # (a quarter of the spacing per cell, refine 3) is measured to in tests/test_forward.py;
    # the design's grid is that fine (cells half the inversion's half-spacing cells)
    expected = head_wave_times(picks.offset, [500.0, 2000.0], [6.0])
    np.testing.assert_allclose(picks.time_s, expected, rtol=0.01)
    assert np.allclose(picks.sigma_s, 1e-9)


def test_the_short_layout_is_said_not_to_see_the_target_and_the_long_one_is_chosen(result):
    short, long = result.layouts
    assert (short.n_shots, short.n_geophones, long.n_shots, long.n_geophones) == (5, 12, 7, 24)
    assert not short.resolves and short.resolved_share == 0.0
    assert "never reaches the target velocity" in short.reason or "depth of investigation" in short.reason
    # Measured over seeds 0-4 (noise 0.5 ms, 3 members, at most 8 iterations): the long
    # layout resolves 93-100 % of the columns, its 1077 m/s surface 0.40-0.52 m RMS and
    # 0.58-0.70 m at most from the model's interface, the band 1.9-2.2 m wide (median).
    # RESOLVED_SHARE asks for 90 %; with a tolerance of 1.5 m seed 2 fell to 89 % (the
    # band passes 3 m at the spread's ends), hence 2 m here. The error bound is about
    # twice the measured worst.
    assert long.resolves and long.resolved_share >= RESOLVED_SHARE
    assert long.error_max_m <= 1.5 and long.doi_depth_m > long.target_depth_m
    assert result.choice is long
    assert "cheapest layout that resolves it: long" in result.summary()[1]
    lines = design_table_lines(result)
    assert lines[0].startswith("layout") and any(line.startswith("short:") for line in lines)


def test_no_layout_within_a_tolerance_too_tight_is_said_so(result, files):
    folder, short, long = files
    model = read_model(folder / "site.toml")
    # the same runs judged against 0.1 m: the long layout's surface is 0.4-0.5 m RMS off
    tight = []
    for layout in result.layouts:
        run = layout.run
        try:
            surface, band = run.surface(result.velocity_m_s), run.band(result.velocity_m_s)
        except InputError:
            surface = band = None
        from tomo.survey.picks import read_picks

        picks = read_picks(short if layout.name == "short" else long, terrain=model.terrain, layout=True)
        tight.append(assess_layout(layout.name, picks, run, surface, band, model, result.velocity_m_s,
                                   result.region, 0.1))
    assert cheapest(tight) is None
    assert all("off by more than the tolerance" in r.reason or "never reaches" in r.reason for r in tight)


def test_the_command_prints_the_table_and_writes_its_files(files, tmp_path, capsys):
    folder, short, long = files
    out = tmp_path / "design"
    assert main(["design", str(folder / "site.toml"), "--layout", str(short), "--layout", str(long), "--out",
                 str(out), "--members", "2", "--workers", "1", "--noise-ms", "0.5", "--tolerance-m", "1.5"]) == 0
    text = capsys.readouterr().out
    assert "layout" in text and "short:" in text and "resolves" in text
    assert {p.name for p in out.iterdir()} >= {"design.csv", "design.png", "short.h5", "long.h5"}
    assert (out / "design.csv").read_text(encoding="utf-8").splitlines()[1].startswith("layout,shots")


@pytest.mark.parametrize("args, field", [
    (["--noise-ms", "0"], "--noise-ms"),
    (["--tolerance-m", "-1"], "--tolerance-m"),
    (["--contour", "-5"], "--contour"),
    (["--members", "1"], "--members"),
    (["--contour", "9000"], "--contour"),  # faster than anything in the model
])
def test_bad_requests_are_one_line_errors(files, tmp_path, args, field, capsys):
    folder, short, long = files
    out = tmp_path / "design"
    assert main(["design", str(folder / "site.toml"), "--layout", str(long), "--out", str(out), *args]) == 2
    err = capsys.readouterr().err.strip()
    assert err.startswith("tomo design: error:") and field in err and len(err.splitlines()) == 1
    assert not any(out.glob("*.csv"))


def test_a_missing_layout_names_its_file(files, tmp_path, capsys):
    folder, _, _ = files
    assert main(["design", str(folder / "site.toml"), "--layout", str(tmp_path / "none.csv"), "--out",
                 str(tmp_path / "o")]) == 2
    assert "none.csv" in capsys.readouterr().err
