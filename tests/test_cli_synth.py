"""`tomo synth` end to end, and its refusals (issue 2)."""

import numpy as np
import pytest

from tomo.cli import main
from tomo.survey.picks import read_picks

MODEL = """
[[layer]]
velocity = 500.0
base = [[0.0, 4.0]]
[[layer]]
velocity = 2000.0
[terrain]
points = [[-10.0, 50.0], [60.0, 50.0]]
"""


def layout(tmp_path):
    rows = ["source_x,receiver_x"]
    for s in (0.0, 46.0):
        rows += [f"{s},{r}" for r in np.arange(0.0, 46.1, 2.0) if r != s]
    path = tmp_path / "layout.csv"
    path.write_text("\n".join(rows) + "\n")
    return path


def test_synth_writes_head_wave_times(tmp_path, capsys):
    (tmp_path / "model.toml").write_text(MODEL)
    out = tmp_path / "picks.csv"
    status = main(["synth", str(tmp_path / "model.toml"), "--layout", str(layout(tmp_path)),
                   "--out", str(out), "--noise-ms", "0.2", "--seed", "3"])
    assert status == 0
    p = read_picks(out)
    assert len(p) == 46 and np.allclose(p.sigma_s, 0.2e-3)
    assert np.allclose(p.source_z, 50.0)
    # two-layer head wave (Telford, Geldart & Sheriff 1990, sec. 4.3): at 40 m,
    # t = x / V2 + 2 h cos(theta_c) / V1
    k = np.flatnonzero((p.source_x == 0) & (p.receiver_x == 40))[0]
    theta = np.arcsin(500 / 2000)
    exact = 40 / 2000 + 2 * 4 * np.cos(theta) / 500
    # 1 % or 0.3 ms target, plus 4 sigma of the added noise
    assert abs(p.time_s[k] - exact) <= max(0.01 * exact, 0.3e-3) + 4 * 0.2e-3
    assert "wrote 46 picks" in capsys.readouterr().out


@pytest.mark.parametrize("model,words", [
    ("[[layer]]\nvelocity = 400\n[[layer]\n", "malformed TOML"),
    ("[[layer]]\nvelocity = 0\n", "must be positive"),
])
def test_synth_refuses_bad_model_and_leaves_no_output(tmp_path, capsys, model, words):
    (tmp_path / "model.toml").write_text(model)
    out = tmp_path / "picks.csv"
    status = main(["synth", str(tmp_path / "model.toml"), "--layout", str(layout(tmp_path)), "--out", str(out)])
    err = capsys.readouterr().err
    assert status != 0 and words in err and len(err.strip().splitlines()) == 1
    assert not out.exists()
    assert not list(tmp_path.glob("*.part"))


def test_synth_station_outside_terrain(tmp_path, capsys):
    (tmp_path / "model.toml").write_text(MODEL)
    (tmp_path / "t.csv").write_text("x,z\n0,50\n30,48\n")
    out = tmp_path / "picks.csv"
    status = main(["synth", str(tmp_path / "model.toml"), "--layout", str(layout(tmp_path)),
                   "--terrain", str(tmp_path / "t.csv"), "--out", str(out)])
    err = capsys.readouterr().err
    assert status == 2 and "outside the terrain" in err and "layout.csv:" in err
    assert not out.exists()


def test_synth_missing_layout(tmp_path, capsys):
    (tmp_path / "model.toml").write_text(MODEL)
    status = main(["synth", str(tmp_path / "model.toml"), "--layout", str(tmp_path / "none.csv"),
                   "--out", str(tmp_path / "p.csv")])
    assert status == 2 and "does not exist" in capsys.readouterr().err


def test_synth_unwritable_folder(tmp_path, capsys):
    (tmp_path / "model.toml").write_text(MODEL)
    status = main(["synth", str(tmp_path / "model.toml"), "--layout", str(layout(tmp_path)),
                   "--out", str(tmp_path / "no" / "such" / "p.csv")])
    assert status == 2 and "output folder does not exist" in capsys.readouterr().err
