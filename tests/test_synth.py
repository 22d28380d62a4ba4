"""`tomo synth` with its default settings against closed forms, offsets to 140 m.

The grid's depth is chosen from the model's own rays (tomo.tomography.depth): a third
of the longest offset (47 m here) is only the first guess, too shallow for the diving
waves of a strong gradient. Issue 12's goal: every time within 0.1 ms of the closed form.
Geophones every 2 m over two layers, so the default grid has 0.5 m cells with nodes
1/12 m apart (tomo.tomography.synth.SYNTH_REFINE); every 4 m over the smooth gradient
(nodes 1/6 m apart), which keeps the test quick.
"""

import numpy as np
import pytest

from tomo.cli import main
from tomo.survey.picks import read_picks

#: Issue 12's goal for synthetic picks against closed forms, s.
GOAL_S = 0.1e-3


def synth(tmp_path, model, capsys, *extra, spacing=2.0, shots=(0.0,)):
    rows = ["source_x,receiver_x"] + [f"{s},{r}" for s in shots for r in np.arange(0.0, 140.1, spacing) if r != s]
    (tmp_path / "layout.csv").write_text("\n".join(rows) + "\n")
    (tmp_path / "model.toml").write_text(model)
    out = tmp_path / "picks.csv"
    status = main(["synth", str(tmp_path / "model.toml"), "--layout", str(tmp_path / "layout.csv"),
                   "--out", str(out), *extra])
    err = capsys.readouterr().err
    assert status == 0, err
    return read_picks(out), err


def test_diving_waves_of_a_strong_gradient_turn_inside_the_grid(tmp_path, capsys):
    # v = v0 + k z: the first arrival on the surface is the diving wave
    # t = (2/k) asinh(k x / (2 v0)) (Slotnick 1959, Lessons in Seismic Computing, SEG;
    # REFERENCES.md), turning at z = (v0/k) (sqrt(1 + (k x / (2 v0))^2) - 1): 57 m at
    # 140 m for v0 = 300 m/s, k = 20 1/s, below a third of the offset (47 m).
    v0, k = 300.0, 20.0
    picks, err = synth(tmp_path, f"[[layer]]\nvelocity = {v0}\ngradient = {k}\n"
                                 "[terrain]\npoints = [[-10.0, 0.0], [160.0, 0.0]]\n", capsys, spacing=4.0)
    x = np.abs(picks.receiver_x - picks.source_x)
    exact = (2.0 / k) * np.arcsinh(k * x / (2.0 * v0))
    assert np.max(np.abs(picks.time_s - exact)) <= GOAL_S
    turning = (v0 / k) * (np.sqrt(1.0 + (k * 140.0 / (2.0 * v0)) ** 2) - 1.0)
    depth = float(err.split("grid depth: ")[1].split(" m below")[0])
    assert depth >= 1.5 * turning - 1.0 and "first guess 46.7 m, a third of the longest offset" in err
    # the depth and its reason are told: where the deepest ray turns (its cell centre,
    # within a cell of the closed form's turning point)
    told = float(err.split("ray turns ")[1].split(" m below")[0])
    assert abs(told - turning) <= 1.0


@pytest.mark.parametrize("slope", [0.0, 0.15])
def test_two_layers_on_flat_and_sloping_ground(tmp_path, capsys, slope):
    # 500 over 2000 m/s, the refractor 10 m below the ground (vertically) and parallel to
    # it: in the frame of the slope, the head wave t = L / V2 + 2 H cos(ic) / V1 and the
    # direct wave t = L / V1 (Telford, Geldart & Sheriff 1990, Applied Geophysics,
    # sec. 4.3), L the distance along the ground and H = 10 m x cos(slope angle) the
    # thickness across the layer.
    v1, v2, h_vertical = 500.0, 2000.0, 10.0
    model = (f"[[layer]]\nvelocity = {v1}\nbase = [[-10.0, {h_vertical}], [160.0, {h_vertical}]]\n"
             f"[[layer]]\nvelocity = {v2}\n"
             f"[terrain]\npoints = [[-10.0, {-10.0 * slope}], [160.0, {160.0 * slope}]]\n")
    picks, _ = synth(tmp_path, model, capsys, shots=(0.0, 140.0) if slope else (0.0,))
    length = np.hypot(picks.receiver_x - picks.source_x, picks.receiver_z - picks.source_z)
    thickness = h_vertical * np.cos(np.arctan(slope))
    ic = np.arcsin(v1 / v2)
    exact = np.minimum(length / v1, length / v2 + 2 * thickness * np.cos(ic) / v1)
    assert np.max(np.abs(picks.time_s - exact)) <= GOAL_S


def test_a_mesh_spec_too_shallow_for_the_rays_is_warned_about(tmp_path, capsys):
    # The user's depth is kept, with a warning that names the deepest turning point.
    (tmp_path / "mesh.toml").write_text("depth_m = 20.0\n")
    _, err = synth(tmp_path, "[[layer]]\nvelocity = 300.0\ngradient = 20.0\n"
                             "[terrain]\npoints = [[-10.0, 0.0], [160.0, 0.0]]\n", capsys,
                   "--mesh", str(tmp_path / "mesh.toml"), spacing=4.0)
    assert "warning: the mesh spec's depth 20 m may be too shallow" in err
    assert "the deepest first-arrival ray turns" in err and "on the bottom of a grid 20.0 m deep" in err
