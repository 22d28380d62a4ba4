"""Survey files, mesh specs and model files: what they accept and how they refuse.

Each bad input gets one InputError naming file, line and field (issue 2).
"""

import numpy as np
import pytest

from tomo.core.errors import InputError
from tomo.survey.meshspec import read_mesh_spec
from tomo.survey.model import read_model
from tomo.survey.picks import Picks, read_picks, write_picks
from tomo.survey.terrain import Terrain, read_terrain
from tomo.tomography.mesh import build_mesh, mesh_for_picks


def write(path, text):
    path.write_text(text, encoding="utf-8")
    return path


GOOD = """# a comment line
source_x,receiver_x,time_ms,sigma_ms,gain
0,5,10.0,0.5,3
0,10,18.0,0.5,3

10,0,18.1,0.5,3
"""


def test_reads_picks_in_si_with_notice(tmp_path):
    p = read_picks(write(tmp_path / "p.csv", GOOD))
    assert len(p) == 3
    assert p.time_s[0] == pytest.approx(0.010)
    assert p.sigma_s[0] == pytest.approx(0.0005)
    assert np.all(p.source_z == 0) and np.all(p.receiver_z == 0)  # flat ground at z = 0
    assert any("gain" in n for n in p.notices)
    assert list(p.line) == [3, 4, 6]


def test_stations_sit_on_the_terrain(tmp_path):
    t = read_terrain(write(tmp_path / "t.csv", "x,z\n-5,100\n15,90\n"))
    p = read_picks(write(tmp_path / "p.csv", GOOD), terrain=t)
    assert p.source_z[0] == pytest.approx(97.5)  # linear between terrain points
    assert p.receiver_z[1] == pytest.approx(92.5)


def test_round_trip(tmp_path):
    p = read_picks(write(tmp_path / "p.csv", GOOD))
    write_picks(tmp_path / "q.csv", p)
    q = read_picks(tmp_path / "q.csv")
    assert np.allclose(q.time_s, p.time_s) and np.allclose(q.sigma_s, p.sigma_s)


BAD_PICKS = [
    ("source_x,time_ms\n0,10\n", None, "receiver_x", "missing required column"),
    ("source_x,receiver_x,time_ms\n0,5,abc\n", 2, "time_ms", "expected a number"),
    ("source_x,receiver_x,time_ms\n0,5,0\n", 2, "time_ms", "positive"),
    ("source_x,receiver_x,time_ms\n0,5,-3\n", 2, "time_ms", "positive"),
    ("source_x,receiver_x,time_ms\n0,5,nan\n", 2, "time_ms", "finite"),
    ("source_x,receiver_x,time_ms,sigma_ms\n0,5,3,0\n", 2, "sigma_ms", "sigma"),
    ("source_x,receiver_x,time_ms\n0,5,3\n5,5,2\n", 3, "receiver_x", "on top of its shot"),
    ("source_x,receiver_x,time_ms\n0,5,3\n0,10,5\n0,5,3.5\n", 4, "time_ms", "different time"),
    ("source_x,receiver_x,time_ms\n0,5\n", 2, None, "expected 3 fields"),
]


@pytest.mark.parametrize("text,line,field,words", BAD_PICKS)
def test_bad_pick_files(tmp_path, text, line, field, words):
    path = write(tmp_path / "bad.csv", text)
    with pytest.raises(InputError) as info:
        read_picks(path)
    message = str(info.value)
    assert str(path) in message and words in message
    if line is not None:
        assert f":{line}" in message
    if field is not None:
        assert f"'{field}'" in message
    assert "\n" not in message


def test_station_outside_terrain(tmp_path):
    t = read_terrain(write(tmp_path / "t.csv", "x,z\n0,10\n8,12\n"))
    with pytest.raises(InputError, match=r"p\.csv:4: field 'receiver_x'.*outside the terrain"):
        read_picks(write(tmp_path / "p.csv", GOOD), terrain=t)


def test_station_above_terrain(tmp_path):
    t = read_terrain(write(tmp_path / "t.csv", "x,z\n-5,0\n15,0\n"))
    text = "source_x,receiver_x,time_ms,source_z\n0,5,3,2.0\n"
    with pytest.raises(InputError, match="source_z.*above the terrain"):
        read_picks(write(tmp_path / "p.csv", text), terrain=t)


def test_exact_repeat_is_dropped_with_notice(tmp_path):
    p = read_picks(write(tmp_path / "p.csv", "source_x,receiver_x,time_ms\n0,5,3\n0,5,3\n"))
    assert len(p) == 1 and any("repeated" in n for n in p.notices)


@pytest.mark.parametrize("text,words", [
    ("x,z\n0,1\n", "at least two"),
    ("x,z\n0,1\n0,2\n", "increase"),
    ("x,elev\n0,1\n1,2\n", "missing column 'z'"),
    ("x,z\n0,1\n1,high\n", "expected a number"),
])
def test_bad_terrain(tmp_path, text, words):
    with pytest.raises(InputError, match=words):
        read_terrain(write(tmp_path / "t.csv", text))


def test_missing_file(tmp_path):
    with pytest.raises(InputError, match="does not exist"):
        read_picks(tmp_path / "nope.csv")


def test_not_utf8(tmp_path):
    path = tmp_path / "p.csv"
    path.write_bytes(b"source_x,receiver_x,time_ms\n0,5,\xff\n")
    with pytest.raises(InputError, match="not UTF-8"):
        read_picks(path)


@pytest.mark.parametrize("text,words", [
    ("cell_m = 0.5\nrefine = 1.5\n", "'refine': expected an integer"),
    ("cell_m = -1\n", "'cell_m': must be positive"),
    ("cell = 1\n", "'cell': unknown key"),
    ("cell_m = [\n", "malformed TOML"),
])
def test_bad_mesh_spec(tmp_path, text, words):
    with pytest.raises(InputError, match=words):
        read_mesh_spec(write(tmp_path / "m.toml", text))


@pytest.mark.parametrize("text,words", [
    ("[[layer]]\nvelocity = 400\n[[layer]]\nvelocity = 1500\n", "layer\\[1\\]\\.base'"),
    ("[[layer]]\nvelocity = -4\n", "must be positive"),
    ("[[layer]]\nvelocity = 'fast'\n", "expected a number"),
    ("[[layer]]\nvelocity = 400\nbase = [[0, 3]]\n", "last layer has no base"),
    ("[[layer]]\nvelocity = 400\nbase = [[0, 3], [0, 4]]\n[[layer]]\nvelocity = 900\n", "base x must increase"),
    ("[[layer]]\nvelocity = 400\n[terrain]\npoints = [[0, 1]]\n", "terrain.points"),
    ("[[layer]\nvelocity = 400\n", "malformed TOML"),
])
def test_bad_model_file(tmp_path, text, words):
    with pytest.raises(InputError, match=words):
        read_model(write(tmp_path / "model.toml", text))


def test_model_velocity_layers_gradient_body(tmp_path):
    text = """
[[layer]]
velocity = 400.0
gradient = 20.0
base = [[0.0, 2.0], [10.0, 4.0]]
[[layer]]
velocity = 2000.0
[[body]]
velocity = 900.0
outline = [[6.0, 0.5], [8.0, 0.5], [7.0, 1.5]]
[terrain]
points = [[0.0, 100.0], [10.0, 90.0]]
"""
    m = read_model(write(tmp_path / "model.toml", text))
    # x = 5: base at 3 m; 1 m deep -> 400 + 20 * 1
    assert m.velocity_at(5.0, 1.0) == pytest.approx(420.0)
    assert m.velocity_at(5.0, 3.5) == pytest.approx(2000.0)
    assert m.velocity_at(7.0, 1.0) == pytest.approx(900.0)
    assert m.terrain.elevation(5.0) == pytest.approx(95.0)


def test_mesh_masks_air_and_averages_cells():
    t = Terrain(np.array([0.0, 40.0]), np.array([10.0, 0.0]))
    mesh = build_mesh(0.0, 40.0, t, 1.0, 10.0, refine=2)
    # every station on or below the ground has its four surrounding nodes active
    xs = np.linspace(0.3, 39.7, 50)
    fi = (mesh.z_top - t.elevation(xs)) / mesh.h
    fj = (xs - mesh.x0) / mesh.h
    i, j = np.floor(fi).astype(int), np.floor(fj).astype(int)
    act = mesh.node_active
    assert act[i, j].all() and act[i + 1, j + 1].all() and act[i, j + 1].all() and act[i + 1, j].all()
    # the averaging matrix keeps a uniform model uniform on every active node
    nodes = mesh.cells_to_nodes(np.full(mesh.shape, 2.0))
    assert np.allclose(nodes[act], 2.0)
    assert mesh.ground[0].sum() < mesh.ground[-1].sum()


def test_mesh_must_cover_stations():
    t = Terrain(np.array([0.0, 40.0]), np.array([0.0, 0.0]))
    p = Picks([0.0], [-80.0], [10.0], [0.0])
    from tomo.survey.meshspec import MeshSpec
    with pytest.raises(InputError, match="outside the mesh"):
        mesh_for_picks(p, t, MeshSpec(depth_m=20.0))


def test_default_cell_follows_the_geophone_spacing_with_shots_between_geophones():
    # shots at half stations (common practice) must not halve the default cell
    t = Terrain(np.array([-20.0, 80.0]), np.array([0.0, 0.0]))
    geophones = np.arange(24) * 2.5
    shots = np.arange(-1.25, 60.0, 2.5)
    sx, rx = np.meshgrid(shots, geophones, indexing="ij")
    p = Picks(sx.ravel(), np.zeros(sx.size), rx.ravel(), np.zeros(sx.size))
    mesh, spec = mesh_for_picks(p, t)
    assert spec.cell_m == 0.5  # a quarter of 2.5 m, rounded down to 1-2-5
