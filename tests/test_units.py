"""Files in the wrong units are refused with the likely unit named; declared, they give
the metric result. Blank times, other separators and decimal commas are named."""

from __future__ import annotations

import csv
from pathlib import Path

import numpy as np
import pytest

import tomo
from tomo.cli import main
from tomo.core.errors import InputError
from tomo.survey.picks import Picks
from tomo.survey.units import pick_scales

DEMO = Path(tomo.__file__).resolve().parent / "data" / "demo"

#: International foot, m (exact by definition: NIST Handbook 44, Appendix C).
FOOT_M = 0.3048
POSITIONS = ("source_x", "receiver_x", "source_z", "receiver_z")
TIMES = ("time_ms", "sigma_ms")


def _converted(tmp_path, name, distance_m_per_unit=1.0, time_s_per_unit=1e-3, terrain=False):
    """The demo pick file (and terrain file) rewritten in other units, 9 significant digits."""
    out = tmp_path / name
    with open(DEMO / "picks.csv", encoding="utf-8") as f:
        rows = list(csv.DictReader(f))
    with open(out, "w", encoding="utf-8", newline="") as f:
        writer = csv.DictWriter(f, fieldnames=list(rows[0]))
        writer.writeheader()
        for row in rows:
            for c in POSITIONS:
                row[c] = f"{float(row[c]) / distance_m_per_unit:.9g}"
            for c in TIMES:
                row[c] = f"{float(row[c]) * 1e-3 / time_s_per_unit:.9g}"
            writer.writerow(row)
    if not terrain:
        return out
    tfile = tmp_path / ("terrain-" + name)
    lines = [line for line in (DEMO / "terrain.csv").read_text().splitlines() if line and not line.startswith("#")]
    body = [",".join(f"{float(v) / distance_m_per_unit:.9g}" for v in line.split(",")) for line in lines[1:]]
    tfile.write_text("\n".join([lines[0], *body]) + "\n", encoding="utf-8")
    return out, tfile


CASES = [  # file name, metres per unit, seconds per unit, the option the error must name
    ("seconds.csv", 1.0, 1.0, "--time-unit s"),
    ("feet.csv", FOOT_M, 1e-3, "--distance-unit ft"),
    ("centimetres.csv", 0.01, 1e-3, "--distance-unit cm"),
]


@pytest.mark.parametrize("name, metres, seconds, option", CASES)
def test_wrong_units_are_one_line_errors_naming_the_unit(tmp_path, capsys, name, metres, seconds, option):
    picks = _converted(tmp_path, name, metres, seconds)
    assert main(["check", str(picks)]) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and option in err, err
    assert {"s": "seconds", "ft": "feet", "cm": "centimetres"}[option.split()[-1]] in err
    assert str(picks) in err


@pytest.mark.parametrize("name, metres, seconds, option", CASES)
def test_declared_units_give_the_metric_survey(tmp_path, name, metres, seconds, option):
    picks, terrain = _converted(tmp_path, name, metres, seconds, terrain=True)
    unit = option.split()[-1]
    kind = "time_unit" if option.startswith("--time") else "distance_unit"
    got = tomo.read_survey(picks, terrain, **{kind: unit})
    ref = tomo.read_survey(DEMO / "picks.csv", DEMO / "terrain.csv")
    # 9 significant digits in the converted file: positions of at most ~400 (ft, m) or
    # 13,000 (cm) units and times of 0.06 s round to about 1e-6 relative
    for name_ in ("source_x", "receiver_x", "source_z", "receiver_z", "time_s", "sigma_s"):
        np.testing.assert_allclose(getattr(got.picks, name_), getattr(ref.picks, name_), rtol=1e-7, atol=1e-7)
    np.testing.assert_allclose(got.terrain.z, ref.terrain.z, rtol=1e-7)


def test_declared_feet_give_the_metric_layers(tmp_path):
    # the layered interpretation from the declared file equals the metric one (the
    # same numbers to the rounding of the file, 1e-7 relative; the fits are continuous
    # in them, so 1e-4 relative in the velocities is ample)
    picks, terrain = _converted(tmp_path, "feet.csv", FOOT_M, 1e-3, terrain=True)
    got = tomo.interpret_layers(tomo.read_survey(picks, terrain, distance_unit="ft"))
    ref = tomo.interpret_layers(tomo.read_survey(DEMO / "picks.csv", DEMO / "terrain.csv"))
    np.testing.assert_allclose(got.velocities, ref.velocities, rtol=1e-4)
    np.testing.assert_allclose(got.thicknesses, ref.thicknesses, rtol=1e-4)


def test_metric_demo_scales_are_those_of_a_refraction_line():
    # the numbers the checks work on, for the record: 2.5 m spacing, 61 ms, direct wave
    # about 450 m/s (the demo's topsoil, demo/site.toml) and far apparent velocities
    # about 3200 m/s (its bedrock, 3000 m/s, read across a dipping and stepped surface)
    ref = tomo.read_survey(DEMO / "picks.csv").picks
    scales = pick_scales(ref.source_x, ref.receiver_x, ref.time_s * 1e3)
    assert scales.spacing_m == pytest.approx(2.5)
    assert 60 < scales.max_time_ms < 62
    assert 400 < scales.near_m_s < 500 and 2800 < scales.far_m_s < 3600
    assert not scales.problems()


def test_blank_time_is_a_skipped_pick_with_a_notice(tmp_path):
    text = (DEMO / "picks.csv").read_text().splitlines()
    header = text[0].split(",")
    k = header.index("time_ms")
    for line in (2, 7):  # 1-based data lines 2 and 7 of the file are lines 3 and 8
        fields = text[line].split(",")
        fields[k] = ""
        text[line] = ",".join(fields)
    path = tmp_path / "blank.csv"
    path.write_text("\n".join(text) + "\n")
    survey = tomo.read_survey(path)
    assert len(survey.picks) == len(text) - 1 - 2
    note = [n for n in survey.notices if "blank time_ms" in n]
    assert note and "2 pick(s)" in note[0] and "3, 8" in note[0]


def test_semicolons_and_decimal_commas_are_named(tmp_path, capsys):
    path = tmp_path / "semicolons.csv"
    path.write_text("source_x;receiver_x;time_ms\n-12,5;0;18,52\n-12,5;2,5;21,17\n")
    assert main(["check", str(path)]) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and "semicolons" in err and "decimal" in err and ":1:" in err
    path = tmp_path / "commas.csv"
    path.write_text("source_x,receiver_x,time_ms\n-12,5,0,18,52\n")
    with pytest.raises(InputError, match=r"commas\.csv:2: 5 fields where the header has 3: decimal commas"):
        tomo.read_survey(path)
    path.write_text('source_x,receiver_x,time_ms\n"-12,5",0,18.52\n')
    with pytest.raises(InputError, match=r"decimal comma\? write -12\.5"):
        tomo.read_survey(path)


def test_inversion_refuses_a_start_outside_ground_velocities():
    # picks made in memory in seconds-for-milliseconds (1000 times too early) get past
    # any file check; the start fitted to them is about 1e6 m/s, which fits them at
    # once: refused instead of "converging" after 0 iterations
    ref = tomo.read_survey(DEMO / "picks.csv", DEMO / "terrain.csv")
    p = ref.picks
    fast = Picks(p.source_x, p.source_z, p.receiver_x, p.receiver_z, time_s=p.time_s * 1e-3,
                 sigma_s=p.sigma_s * 1e-3)
    with pytest.raises(InputError, match="outside what near-surface ground gives"):
        tomo.invert(tomo.read_survey(fast, ref.terrain), start="gradient", max_iterations=1)


def test_fast_far_velocities_in_metres_get_a_notice(tmp_path):
    # the demo in feet read with a 2.4 times slower bedrock would pass the checks; a
    # line whose far apparent velocity exceeds 5500 m/s gets a notice naming feet.
    # Made here by scaling the demo's positions by 2 (far velocities about 6500 m/s,
    # direct wave about 900 m/s, spacing 5 m: all plausible in metres)
    picks = _converted(tmp_path, "stretched.csv", 0.5, 1e-3)
    survey = tomo.read_survey(picks)
    notes = [n for n in survey.notices if "declare --distance-unit ft" in n]
    assert len(notes) == 1 and "fast for near-surface rock" in notes[0]
    assert not [n for n in tomo.read_survey(DEMO / "picks.csv").notices if "distance-unit" in n]
