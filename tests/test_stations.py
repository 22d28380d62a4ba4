"""Lines in map coordinates: the stations file, distance along a crooked line, the
sideways departure, EPSG codes, and the commands that read them (issue 14, part 2)."""

import numpy as np
import pytest

from tomo.cli import main
from tomo.core.errors import InputError
from tomo.survey.crs import check_crs
from tomo.survey.line import read_line
from tomo.survey.stations import SIDEWAYS_WARNING_FRACTION, Stations, read_stations

#: The test arc: radius (m), station step along the arc (m), station count, and where it
#: lies (UTM zone 33N, EPSG:32633; an invented place in open country).
RADIUS_M, STEP_M, N_STATIONS = 60.0, 2.0, 25
CENTRE_E, CENTRE_N = 512000.0, 5203000.0
EPSG = 32633


def arc_stations(radius=RADIUS_M, step=STEP_M, n=N_STATIONS):
    """Stations every ``step`` m of arc on a circle of ``radius`` m: (x, e, n, z, arc)."""
    arc = np.arange(n) * step
    theta = arc / radius
    e = CENTRE_E + radius * np.sin(theta)
    north = CENTRE_N + radius * (1.0 - np.cos(theta))
    z = 400.0 + 0.05 * arc  # a gentle slope, m
    return arc.copy(), e, north, z, arc


def write_stations(path, x, e, n, z):
    rows = "".join(f"{a:.3f},{b:.4f},{c:.4f},{d:.3f}\n" for a, b, c, d in zip(x, e, n, z))
    path.write_text("# invented survey\nx,easting,northing,elevation\n" + rows, encoding="utf-8")
    return path


def test_distance_along_an_arc_is_its_arc_length(tmp_path):
    x, e, n, z, arc = arc_stations()
    stations = read_stations(write_stations(tmp_path / "s.csv", x, e, n, z))
    # Arc length R theta (definition). The polyline's chords are 2R sin(a/2) each, short
    # by R a^3/24 = 0.09 mm per 2 m step here, 2 mm over the line; the file keeps
    # 0.1 mm of easting and northing. The issue asks for 1 cm.
    np.testing.assert_allclose(stations.distance_m, arc, atol=0.01)
    np.testing.assert_allclose(stations.distance_at(x), arc, atol=0.01)
    # halfway between two stations in x is halfway along the chord between them
    assert stations.distance_at(3.0) == pytest.approx(0.5 * (stations.distance_m[1] + stations.distance_m[2]))


def test_sideways_departure_of_an_arc_is_its_sagitta(tmp_path):
    x, e, n, z, arc = arc_stations()
    stations = read_stations(write_stations(tmp_path / "s.csv", x, e, n, z))
    side = stations.sideways()
    half_angle = arc[-1] / RADIUS_M / 2
    # The sagitta R (1 - cos(a/2)) of the arc (plane geometry) at its middle station,
    # which lies exactly on the arc's midpoint (25 stations, index 12); 0.1 mm from the file.
    assert side.max_m == pytest.approx(RADIUS_M * (1 - np.cos(half_angle)), abs=2e-4)
    assert side.at_x == pytest.approx(x[12])
    assert side.fraction == pytest.approx(side.max_m / stations.spread_m)
    assert side.fraction > SIDEWAYS_WARNING_FRACTION  # 4.7 m over 48 m: about 10 %
    assert side.warn and "warning" in side.message()
    assert any("sideways departure" in note and "warning" in note for note in stations.notices)


def test_gentle_bend_is_reported_without_warning():
    # R = 1000 m over 48 m: sagitta 0.29 m, 0.6 % of the spread
    x, e, n, z, _ = arc_stations(radius=1000.0)
    side = Stations.from_arrays(x, e, n, z).sideways()
    assert side.max_m == pytest.approx(1000.0 * (1 - np.cos(0.024)), abs=1e-6)
    assert not side.warn and "warning" not in side.message()


def test_projection_onto_the_line(tmp_path):
    x, e, n, z, arc = arc_stations()
    stations = Stations.from_arrays(x, e, n, z)
    # a point 3 m outside the circle at arc length 21 m (between stations 10 and 11)
    theta = 21.0 / RADIUS_M
    pe, pn = CENTRE_E + (RADIUS_M + 3.0) * np.sin(theta), CENTRE_N + RADIUS_M - (RADIUS_M + 3.0) * np.cos(theta)
    d, off, inside = stations.project([pe], [pn])
    # The nearest point of the chord, not of the arc: the chord lies inside the circle
    # by at most R (1 - cos(a/2)) = 0.8 mm for a 2 m step, so 1 cm covers both.
    assert d[0] == pytest.approx(21.0, abs=0.01)
    assert abs(off[0]) == pytest.approx(3.0, abs=0.01)
    assert inside[0]
    _, _, inside = stations.project([e[0] - 5.0], [n[0]])  # before the first station
    assert not inside[0]


def test_map_position_along_the_line_follows_the_stations():
    x, e, n, z, _ = arc_stations()
    stations = Stations.from_arrays(x, e, n, z)
    me, mn = stations.map_at(stations.distance_m)
    np.testing.assert_allclose(me, e, atol=1e-9)
    np.testing.assert_allclose(mn, n, atol=1e-9)
    me, _ = stations.map_at([stations.distance_m[-1] + 1.0])
    assert np.isnan(me[0])  # no survey beyond the ends


BAD_STATIONS = [
    ("x,easting,northing\n0,1,2\n", None, None, "missing column 'elevation'"),
    ("x,easting,northing,elevation\n0,1,2,3\n2,1,x,3\n", 3, "northing", "expected a number"),
    ("x,easting,northing,elevation\n0,1,2,3\n2,3,2,3\n1,5,2,3\n", 4, "x", "must increase"),
    ("x,easting,northing,elevation\n0,1,2,3\n2,3,2,3\n2,5,2,3\n", 4, "x", "duplicate station"),
    ("x,easting,northing,elevation\n0,1,2,3\n2,3,2,3\n4,3,2,3\n", 4, "easting", "duplicate station"),
    ("x,easting,northing,elevation\n0,1,2,3\n", None, None, "at least two stations"),
    ("x,easting,northing,elevation\n0,1,2,3\n2,3,nan,3\n", 3, "northing", "finite"),
]


@pytest.mark.parametrize("text, line, field, words", BAD_STATIONS)
def test_bad_stations_file_names_file_line_and_field(tmp_path, text, line, field, words):
    path = tmp_path / "stations.csv"
    path.write_text(text, encoding="utf-8")
    with pytest.raises(InputError) as info:
        read_stations(path)
    message = str(info.value)
    assert "\n" not in message and words in message
    assert message.startswith(str(path) + (f":{line}" if line else ""))
    if field:
        assert f"field '{field}'" in message


def test_odd_step_is_reported(tmp_path):
    path = tmp_path / "s.csv"
    path.write_text("x,easting,northing,elevation\n0,0,0,1\n2,2,0,1\n4,9,0,1\n", encoding="utf-8")
    assert any("s.csv:4" in n and "7.00 m where x steps 2 m" in n for n in read_stations(path).notices)


def test_epsg_codes_are_checked_with_pyproj():
    crs = check_crs("EPSG:32633")
    assert crs.epsg == 32633 and "UTM zone 33N" in crs.name
    # UTM zone 33N puts the central meridian 15 deg E at false easting 500 000 m and the
    # equator at northing 0 (definition of the UTM projection; exact).
    lon, lat = crs.to_lonlat([500000.0], [0.0])
    assert lon[0] == pytest.approx(15.0, abs=1e-9) and lat[0] == pytest.approx(0.0, abs=1e-9)
    for code, words in [("999999", "unknown EPSG code 999999"), ("4326", "not a projected system"),
                        ("2263", "tomo needs metres"), ("utm", "expected an EPSG code")]:
        with pytest.raises(InputError, match=words) as info:
            check_crs(code)
        assert "field '--crs'" in str(info.value)


PICKS = """source_x,receiver_x,time_ms
0,4,8.0
0,8,16.0
0,20,30.0
48,20,30.5
48,40,16.0
"""


def test_read_line_places_picks_along_the_surveyed_line(tmp_path):
    x, e, n, z, arc = arc_stations()
    e = e.copy()
    stations_path = write_stations(tmp_path / "s.csv", x * 0.5, e, n, z)  # the picks count in half metres
    picks_path = tmp_path / "p.csv"
    picks_path.write_text("source_x,receiver_x,time_ms\n0,2,8\n0,4,16\n0,10,30\n24,10,30.5\n24,20,16\n",
                          encoding="utf-8")
    line = read_line(picks_path, stations_path=stations_path, crs=EPSG)
    assert line.stations.crs.epsg == EPSG
    # every position now the distance along the arc (1 cm, as above) and on the ground
    # of the stations (elevations linear between stations; the file keeps 1 mm)
    np.testing.assert_allclose(line.picks.receiver_x, 2.0 * np.array([2, 4, 10, 10, 20.0]), atol=0.01)
    np.testing.assert_allclose(line.picks.receiver_z, 400.0 + 0.05 * line.picks.receiver_x, atol=2e-3)
    assert line.terrain.x[-1] == pytest.approx(arc[-1], abs=0.01)
    assert any("placed by distance along the surveyed line" in note for note in line.notices)


def test_read_line_refusals(tmp_path):
    x, e, n, z, _ = arc_stations()
    stations_path = write_stations(tmp_path / "s.csv", x, e, n, z)
    picks_path = tmp_path / "p.csv"
    picks_path.write_text(PICKS.replace("48,40", "50,40"), encoding="utf-8")
    with pytest.raises(InputError) as info:  # a shot beyond the last station (48 m)
        read_line(picks_path, stations_path=stations_path)
    assert f"{picks_path}:6: field 'source_x'" in str(info.value) and "s.csv" in str(info.value)
    with pytest.raises(InputError, match="leave out --terrain"):
        read_line(picks_path, terrain_path=stations_path, stations_path=stations_path)
    with pytest.raises(InputError, match="give --stations"):
        read_line(picks_path, crs=EPSG)
    with pytest.raises(InputError, match="unknown EPSG code 1"):
        read_line(picks_path, stations_path=stations_path, crs="1")


def test_check_command_reports_the_departure(tmp_path, capsys):
    x, e, n, z, _ = arc_stations()
    stations_path = write_stations(tmp_path / "s.csv", x, e, n, z)
    picks_path = tmp_path / "p.csv"
    picks_path.write_text(PICKS, encoding="utf-8")
    assert main(["check", str(picks_path), "--stations", str(stations_path), "--crs", str(EPSG)]) == 0
    err = capsys.readouterr().err
    assert "largest sideways departure" in err and "warning: above 5 %" in err
    assert main(["check", str(picks_path), "--stations", str(stations_path), "--crs", "999999"]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "unknown EPSG code 999999" in err


def test_invert_records_the_line_on_the_map(tmp_path, capsys):
    from helpers import line_picks

    from tomo.results.runfile import read_run
    from tomo.survey.model import Layer, Model
    from tomo.survey.picks import write_picks
    from tomo.survey.terrain import Terrain
    from tomo.tomography.mesh import build_mesh
    from tomo.tomography.synth import synthetic_times

    # a small two-layer line on a gentle arc (R = 400 m) climbing 1 m in 22 m
    x, e, n, z, _ = arc_stations(radius=400.0, step=1.0, n=27)
    x, z = x - 2.0, 400.0 + (x - 2.0) / 22.0
    terrain = Terrain(x, z)
    layout = line_picks(terrain, np.arange(12) * 2.0, [-2.0, 11.0, 24.0])
    model = Model((Layer(500.0, 0.0, np.array([[0.0, 4.0], [22.0, 5.0]])), Layer(1800.0)), terrain=terrain)
    times = synthetic_times(model, layout, build_mesh(-4.0, 26.0, terrain, 0.5, 12.0, refine=2, padding=2.0)).time_s
    picks_path = tmp_path / "p.csv"
    write_picks(picks_path, layout.with_times(times, np.full(times.size, 0.5e-3)), elevations=False)
    stations_path = write_stations(tmp_path / "s.csv", x, e, n, z)
    mesh = tmp_path / "mesh.toml"
    mesh.write_text("cell_m = 1.0\ndepth_m = 10.0\nrefine = 2\n")
    out = tmp_path / "run.h5"
    status = main(["invert", str(picks_path), "--stations", str(stations_path), "--crs", f"EPSG:{EPSG}",
                   "--mesh", str(mesh), "--start", "gradient", "--max-iterations", "1", "--workers", "1",
                   "--out", str(out)])
    assert status == 0, capsys.readouterr().err
    run = read_run(out)
    assert run.stations.crs.epsg == EPSG and run.settings["stations_file"] == str(stations_path)
    np.testing.assert_array_equal(run.stations.easting, np.round(e, 4))  # the file keeps 0.1 mm
    # the ground is the stations' (elevations of the picks' stations, 1 mm in the file)
    np.testing.assert_allclose(run.picks["receiver_z"], 400.0 + run.picks["receiver_x"] / 22.0, atol=2e-3)
    assert any("sideways departure" in note for note in run.notes)
