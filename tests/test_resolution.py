"""Resolution tests: the score against its definition, a checker the line resolves and
one it cannot, the run file's /resolution group, the hatching, bad input.

The line is small (24 geophones at 2 m, 9 shots, 1 m cells, 12 m deep) so that a test
inversion takes well under a second.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from _runs import write_test_run
from helpers import line_picks

from tomo.api import invert, resolution_summary, resolve
from tomo.cli import main
from tomo.core.errors import InputError
from tomo.results.run import Run
from tomo.survey.meshspec import MeshSpec
from tomo.survey.model import Layer, Model
from tomo.survey.survey import read_survey
from tomo.survey.terrain import flat_terrain
from tomo.tomography.mesh import build_mesh
from tomo.tomography.synth import synthetic_times
from tomo.uncertainty.resolution import (
    SEMBLANCE_THRESHOLD,
    checker_pattern,
    recovery_scores,
    run_mesh,
    target_pattern,
    trusted_cells,
)

TERRAIN = flat_terrain(-30.0, 80.0)
SPACING_M = 2.0


@pytest.fixture(scope="module")
def run():
    layout = line_picks(TERRAIN, np.arange(24) * SPACING_M, [-4.0, 0.0, 7.7, 15.3, 23.0, 30.7, 38.3, 46.0, 50.0])
    model = Model((Layer(500.0, 20.0, np.array([[0.0, 4.0], [46.0, 6.0]])), Layer(2000.0, 20.0)), terrain=TERRAIN)
    fine = build_mesh(-8.0, 54.0, TERRAIN, 0.25, 16.0, refine=2, padding=2.0)
    t = synthetic_times(model, layout, fine).time_s
    rng = np.random.default_rng(5)
    survey = read_survey(layout.with_times(t + rng.normal(0.0, 0.5e-3, t.size), np.full(t.size, 0.5e-3)),
                         terrain=TERRAIN)
    return invert(survey, start="gradient", mesh=MeshSpec(cell_m=1.0, depth_m=12.0, refine=2), workers=1,
                  progress=lambda info: None)


@pytest.fixture(scope="module")
def run_file(run, tmp_path_factory):
    path = tmp_path_factory.mktemp("res") / "run.h5"
    run.write(path)
    return path


def _window_scores(t, r):
    """Semblance and correlation of two arrays, straight from their definitions:
    S = sum (t + r)^2 / (2 sum (t^2 + r^2)) (Neidell & Taner 1971, "Semblance and other
    coherency measures for multichannel data", Geophysics 36, eq. for two channels; the
    measure Zelt 1998 applies to checkerboards, from memory) and the correlation about
    zero sum t r / sqrt(sum t^2 sum r^2)."""
    t, r = np.ravel(t), np.ravel(r)
    return np.sum((t + r) ** 2) / (2 * np.sum(t ** 2 + r ** 2)), np.dot(t, r) / np.sqrt(np.dot(t, t) * np.dot(r, r))


def test_scores_follow_their_definitions():
    rng = np.random.default_rng(0)
    t = rng.normal(size=(9, 12))
    ground = np.ones(t.shape, bool)
    # exact recovery: S = 1, c = 1; half the amplitude: S = (1 + a)^2 / (2 (1 + a^2)) =
    # 0.9 with a = 0.5, c = 1; the opposite sign: S = 0, c = -1 (closed forms of the
    # definitions above); to rounding
    for a, s_expected, c_expected in ((1.0, 1.0, 1.0), (0.5, 0.9, 1.0), (-1.0, 0.0, -1.0)):
        s, c = recovery_scores(t, a * t, ground, 3)
        np.testing.assert_allclose(s, s_expected, atol=1e-12)
        np.testing.assert_allclose(c, c_expected, atol=1e-12)
    # an unrelated recovery: every interior cell's scores equal the definitions computed
    # here over its own 3 x 3 window
    r = rng.normal(size=t.shape)
    s, c = recovery_scores(t, r, ground, 3)
    for i, j in ((1, 1), (4, 7), (7, 10)):
        s_ref, c_ref = _window_scores(t[i - 1:i + 2, j - 1:j + 2], r[i - 1:i + 2, j - 1:j + 2])
        assert s[i, j] == pytest.approx(s_ref, abs=1e-12) and c[i, j] == pytest.approx(c_ref, abs=1e-12)
    # air cells are left out of the windows and get no score
    air = ground.copy()
    air[0, :] = False
    s, _ = recovery_scores(t, r, air, 3)
    assert np.all(np.isnan(s[0])) and s[1, 4] == pytest.approx(_window_scores(t[1:3, 3:6], r[1:3, 3:6])[0])
    # nothing recovered: semblance 0.5 and correlation 0 (the definitions' limits)
    s, c = recovery_scores(t, np.zeros_like(t), ground, 3)
    assert np.allclose(s, 0.5) and np.allclose(c, 0.0)


def test_checker_alternates_at_its_size_and_amplitude(run):
    mesh = run_mesh(run)
    one = checker_pattern(mesh, mesh.cell, 10.0, 0.0)
    a = math.log(1.1)  # +10 % in velocity is ln(1.1) in log-velocity
    g = one[mesh.ground]
    # a checker one cell wide: every ground cell at +-a, neighbours of opposite sign
    np.testing.assert_allclose(np.abs(g), a, rtol=1e-12)
    assert np.all(one[5, 1:] * one[5, :-1] < 0) and np.all(one[6, :] * one[5, :] < 0)
    four = checker_pattern(mesh, 4 * mesh.cell, 10.0, 0.0)
    signs = np.sign(four[1, :])
    changes = np.flatnonzero(signs[1:] != signs[:-1])
    assert np.all(np.diff(changes) == 4)  # the sign flips every 4 cells along the line
    assert np.nanmax(np.abs(four)) <= a + 1e-12


def test_a_checker_of_four_spacings_is_resolved_and_one_of_half_a_spacing_is_not(run):
    good = trusted_cells(run)
    assert good.sum() > 300  # most of the section above the depth of investigation
    big = resolve(run, checker_m=4 * SPACING_M, amplitude_pct=10.0, seed=1, workers=1).resolution
    s = big.summary(run)
    # Measured over noise seeds 0-4 of the test and two noise draws of the line: median
    # correlation 0.76-0.87 and semblance 0.78-0.88 in the well-covered cells, amplitude
    # 34-58 % recovered (a smooth inversion brings back the shape before the strength).
    # The issue asks for a correlation of at least 0.7 where coverage is good.
    assert s["correlation"] >= 0.7 and s["semblance"] >= SEMBLANCE_THRESHOLD, s
    assert s["resolved_share"] > 0.5 and 0.2 < s["amplitude"] < 1.0, s
    # half a station spacing (one cell) at 30 %: the picks feel it (chi2 2.7-2.9 at the
    # final model, so the inversion works), but what comes back has nothing of its shape:
    # correlation 0.00 and semblance 0.50 measured for seeds 0-2. The issue asks for
    # below 0.3; the semblance stays near its "nothing" value 0.5.
    small = resolve(run, checker_m=SPACING_M / 2, amplitude_pct=30.0, seed=1, workers=1).resolution
    s_small = small.summary(run)
    assert small.chi2_start > 1.5 and small.iterations >= 1
    assert abs(s_small["correlation"]) < 0.3 and s_small["semblance"] < 0.6, s_small
    assert s_small["resolved_share"] < 0.05
    # the test inversion starts from the final model and keeps the run's settings
    assert small.chi2 == pytest.approx(1.0, abs=0.15)


def test_a_checker_the_picks_cannot_feel_is_reported_so(run):
    record = resolve(run, checker_m=1.5, amplitude_pct=10.0, seed=0, workers=1).resolution
    assert record.iterations == 0 and record.chi2_start < 1.1
    lines = resolution_summary(resolve(run, checker_m=1.5, seed=0, workers=1))
    assert any("less than their noise" in line for line in lines)


def test_the_run_file_keeps_the_test_and_old_files_read_without_one(run, tmp_path):
    tested = resolve(run, checker_m=8.0, seed=2, workers=1, out=tmp_path / "tested.h5")
    back = Run.read(tmp_path / "tested.h5")
    record, expected = back.resolution, tested.resolution
    for name in ("true", "recovered", "semblance", "correlation"):
        np.testing.assert_array_equal(getattr(record, name), getattr(expected, name))
    assert (record.kind, record.size_m, record.amplitude_pct, record.seed) == ("checker", 8.0, 10.0, 2)
    assert record.threshold == SEMBLANCE_THRESHOLD and record.target_file is None
    np.testing.assert_array_equal(back.velocity, run.velocity)  # the run itself is untouched
    write_test_run(tmp_path / "old.h5")
    assert Run.read(tmp_path / "old.h5").resolution is None


def test_sections_hatch_what_is_not_resolved_and_the_report_shows_the_test(run, tmp_path):
    import matplotlib.pyplot as plt

    from tomo.api import write_report
    from tomo.figures.section import velocity_section

    tested = resolve(run, checker_m=4.0, seed=0, workers=1)
    fig = velocity_section(tested)
    labels = fig.axes[0].get_legend().get_texts()
    assert any("not resolved (checker 4 m" in t.get_text() for t in labels)
    plt.close(fig)
    html = write_report(tested, tmp_path / "tested.html").read_text(encoding="utf-8")
    assert 'id="fig-resolution"' in html
    from tomo.figures.resolution import resolution_figure

    assert resolution_figure(run) is None  # a run without a test: no such figure, no hatching
    plt.close("all")


def test_a_target_body_is_its_contrast_against_the_layers(run, tmp_path):
    path = tmp_path / "target.toml"
    path.write_text("[[layer]]\nvelocity = 800.0\n\n[[body]]\nvelocity = 560.0\n"
                    "outline = [[14.0, 0.0], [30.0, 0.0], [30.0, 5.0], [14.0, 5.0]]\n", encoding="utf-8")
    tested = resolve(run, target=path, seed=0, workers=1)
    record = tested.resolution
    mesh = run_mesh(run)
    inside = mesh.ground & (np.abs(mesh.x - 22.0)[None, :] < 6.0) & (mesh.depth > 0.5) & (mesh.depth < 4.5)
    # cells wholly inside the body: ln(560 / 800), the body against its layer
    np.testing.assert_allclose(record.true[inside], math.log(560.0 / 800.0), rtol=1e-9)
    assert record.kind == "target" and record.target_file == "target.toml" and math.isnan(record.amplitude_pct)
    # a 16 m x 5 m slow zone near the surface of this line comes back with its sign
    assert np.median(record.recovered[inside]) < 0
    assert record.size_m == 5.0  # the body's smaller side sets the score window
    with pytest.raises(InputError, match="no \\[\\[body\\]\\]"):
        layers_only = tmp_path / "layers.toml"
        layers_only.write_text("[[layer]]\nvelocity = 800.0\n", encoding="utf-8")
        resolve(run, target=layers_only)
    from tomo.survey.model import read_model

    assert np.array_equal(np.isnan(target_pattern(read_model(path), mesh)), ~mesh.ground)


@pytest.mark.parametrize("args, field", [
    (["--checker", "0.5"], "--checker"),       # below a cell (1 m)
    (["--checker", "120"], "--checker"),       # longer than the line (54 m)
    (["--checker", "8", "--amplitude", "0"], "--amplitude"),
    (["--checker", "8", "--amplitude", "60"], "--amplitude"),
    (["--target", "site.toml", "--amplitude", "5"], "--amplitude"),  # a target's contrast is its file's
])
def test_bad_requests_are_one_line_errors_and_leave_the_file(run_file, args, field, capsys):
    before = run_file.read_bytes()
    assert main(["resolve", str(run_file), *args]) == 2
    err = capsys.readouterr().err.strip()
    assert err.startswith("tomo resolve: error:") and field in err and len(err.splitlines()) == 1
    assert run_file.read_bytes() == before


def test_a_file_that_is_not_a_run_is_refused(tmp_path, capsys):
    bad = tmp_path / "picks.h5"
    bad.write_text("source_x,receiver_x\n0,1\n", encoding="utf-8")
    assert main(["resolve", str(bad), "--checker", "8"]) == 2
    err = capsys.readouterr().err.strip()
    assert "not a readable HDF5 file" in err and len(err.splitlines()) == 1


def test_the_command_writes_the_group_and_the_figure(run_file, tmp_path, capsys):
    out, figure = tmp_path / "tested.h5", tmp_path / "res.png"
    assert main(["resolve", str(run_file), "--checker", "8", "--workers", "1", "--out", str(out),
                 "--figure", str(figure)]) == 0
    text = capsys.readouterr().out
    assert "median correlation" in text and figure.stat().st_size > 10_000
    assert Run.read(out).resolution.size_m == 8.0
