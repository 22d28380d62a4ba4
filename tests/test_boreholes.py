"""Borehole files: reading, placing on a run's line, the bad-input errors, the run file,
figures and the report (issue 14, part 1 without the ties to the interpretations)."""

import re
from dataclasses import replace

import numpy as np
import pytest
from _runs import make_run

from tomo.analysis.boreholes import grid_bottom_elevation, place_boreholes
from tomo.cli import main
from tomo.core.errors import InputError
from tomo.results.borehole_ties import borehole_ties
from tomo.results.runfile import read_run, write_run
from tomo.survey.boreholes import DEEPEST, DEFAULT_SIGMA_M, read_boreholes
from tomo.survey.stations import Stations


@pytest.fixture(scope="module")
def base_run():
    return make_run()[0]


def write(path, text):
    path.write_text(text, encoding="utf-8")
    return path


def test_reads_boreholes_with_defaults(tmp_path):
    b = read_boreholes(write(tmp_path / "b.csv", "# logged rock head\nx,depth_m,sigma_m,label,interface\n"
                                                 "10,3.5,0.2,BH-A,1\n25,4.4,,,\n"))
    assert len(b) == 2 and b.label == ("BH-A", "BH2")
    np.testing.assert_array_equal(b.x, [10.0, 25.0])
    np.testing.assert_array_equal(b.sigma_m, [0.2, DEFAULT_SIGMA_M])
    np.testing.assert_array_equal(b.interface, [1, DEEPEST])
    np.testing.assert_array_equal(b.line, [3, 4])


BAD_BOREHOLES = [
    ("depth_m\n3\n", None, None, "missing column 'x' (or 'easting' and 'northing')"),
    ("x,label\n3,A\n", None, None, "missing column 'depth_m'"),
    ("x,depth_m\n", None, None, "no boreholes"),
    ("x,depth_m\n10,-3\n", 2, "depth_m", "depth must be positive"),
    ("x,depth_m\n10,0\n", 2, "depth_m", "depth must be positive"),
    ("x,depth_m\n10,abc\n", 2, "depth_m", "expected a number"),
    ("x,depth_m\nnan,3\n", 2, "x", "finite"),
    ("x,depth_m,sigma_m\n10,3,-1\n", 2, "sigma_m", "sigma must be positive"),
    ("x,depth_m,interface\n10,3,0\n", 2, "interface", "whole number >= 1"),
    ("x,depth_m,interface\n10,3,1.5\n", 2, "interface", "whole number >= 1"),
    ("x,depth_m,label\n10,3,A\n20,4,A\n", 3, "label", "already used on line 2"),
    ("x,depth_m\n10\n", 2, None, "expected 2 fields"),
]


@pytest.mark.parametrize("text, line, field, words", BAD_BOREHOLES)
def test_bad_borehole_file_names_file_line_and_field(tmp_path, text, line, field, words):
    path = write(tmp_path / "b.csv", text)
    with pytest.raises(InputError) as info:
        read_boreholes(path)
    message = str(info.value)
    assert "\n" not in message and words in message
    assert message.startswith(str(path) + (f":{line}" if line else ""))
    if field:
        assert f"field '{field}'" in message


def test_boreholes_outside_the_line_or_below_the_grid_are_refused(tmp_path, base_run):
    # the test line's shots and geophones run from -2 to 35 m; its grid ends 12 m below
    # the lowest ground of the mesh (tests/_runs.py)
    bottom = grid_bottom_elevation(base_run)
    ground_at_20 = float(np.interp(20.0, base_run.terrain_x, base_run.terrain_z))
    cases = [("x,depth_m\n10,3\n40,3\n", 3, "x", "outside the line (-2 to 35 m)"),
             ("x,depth_m\n-5,3\n", 2, "x", "outside the line"),
             (f"x,depth_m\n20,{ground_at_20 - bottom + 0.5:.2f}\n", 2, "depth_m", "deeper than the model grid"),
             ("easting,northing,depth_m\n5,5,3\n", 2, "easting", "needs the line in map coordinates")]
    for text, line, field, words in cases:
        path = write(tmp_path / "b.csv", text)
        with pytest.raises(InputError) as info:
            place_boreholes(read_boreholes(path), base_run)
        message = str(info.value)
        assert message.startswith(f"{path}:{line}: field '{field}'") and words in message, message
    # at the grid's bottom exactly is still inside
    path = write(tmp_path / "b.csv", f"x,depth_m\n20,{ground_at_20 - bottom - 0.01:.2f}\n")
    assert len(place_boreholes(read_boreholes(path), base_run)) == 1


def _mapped_run(base_run, bend_m=0.0):
    """The test run on a straight east-west line (or one bent by ``bend_m`` at its middle)."""
    x = np.arange(-2.0, 36.0, 1.0)
    north = 5203000.0 + bend_m * (1 - ((x - 16.5) / 18.5) ** 2)
    stations = Stations.from_arrays(x, 512000.0 + x, north, np.interp(x, base_run.terrain_x, base_run.terrain_z))
    return replace(base_run, stations=stations)


def test_boreholes_by_map_position_are_projected_onto_the_line(tmp_path, base_run):
    run = _mapped_run(base_run)
    path = write(tmp_path / "b.csv", "label,easting,northing,depth_m\nN,512010,5203004,3.5\nS,512020.5,5202997,4\n")
    b = place_boreholes(read_boreholes(path), run)
    # on a straight east-west line the distance is the easting difference and the
    # offset the northing difference (positive to the left looking east: north)
    np.testing.assert_allclose(b.x, [10.0, 20.5], atol=1e-9)
    np.testing.assert_allclose(b.offset_m, [4.0, -3.0], atol=1e-9)
    path = write(tmp_path / "c.csv", "easting,northing,depth_m\n511990,5203000,3\n")
    with pytest.raises(InputError, match=r"c\.csv:2: field 'easting': borehole BH1 lies beyond the end"):
        place_boreholes(read_boreholes(path), run)


def test_boreholes_and_stations_survive_the_run_file(tmp_path, base_run):
    run = _mapped_run(base_run, bend_m=1.5)
    path = write(tmp_path / "b.csv", "label,x,depth_m,sigma_m,interface\nÅ-1,10,3.5,0.2,1\nB,25,4.4,,\n")
    run = replace(run, boreholes=place_boreholes(read_boreholes(path), run))
    write_run(tmp_path / "run.h5", run)
    back = read_run(tmp_path / "run.h5")
    for name in ("x", "easting", "northing", "elevation", "distance_m"):
        np.testing.assert_array_equal(getattr(back.stations, name), getattr(run.stations, name))
    assert back.stations.crs is None
    for name in ("x", "depth_m", "sigma_m", "interface", "offset_m", "line"):
        np.testing.assert_array_equal(getattr(back.boreholes, name), getattr(run.boreholes, name))
    assert back.boreholes.label == ("Å-1", "B")
    # a run file without the groups reads as before
    write_run(tmp_path / "plain.h5", base_run)
    plain = read_run(tmp_path / "plain.h5")
    assert plain.stations is None and plain.boreholes is None


def test_ties_to_both_interpretations(tmp_path, base_run):
    path = write(tmp_path / "b.csv", "label,x,depth_m\nA,10,3.5\nB,30,4.5\n")
    run = replace(base_run, boreholes=place_boreholes(read_boreholes(path), base_run))
    ties = borehole_ties(run)
    # The run's layered profile is the true refractor depth 3 + x/20 m plus 0.2 m at
    # every geophone (tests/_runs.py); linear, so linear interpolation between
    # geophones is exact: 3.7 m at x = 10 m and 4.7 m at 30 m.
    assert [t.label for t in ties] == ["A", "B"]
    np.testing.assert_allclose([t.layered_depth_m for t in ties], [3.7, 4.7], atol=1e-9)
    np.testing.assert_allclose([t.layered_error_m for t in ties], [0.2, 0.2], atol=1e-9)
    # The tomogram is the true model on 1 m cells: its 995 m/s contour (mean of 510 and
    # 1480 m/s) lies between the centres of the cells around the true depth, within a
    # cell (1 m) of it.
    assert all(t.contour_m_s == pytest.approx(995.0) for t in ties)
    np.testing.assert_allclose([t.tomogram_depth_m for t in ties], [3.5, 4.5], atol=1.0)


def test_boreholes_on_every_section_figure_and_in_the_report(tmp_path, base_run, capsys):
    run_path = tmp_path / "run.h5"
    write_run(run_path, base_run)
    bh = write(tmp_path / "b.csv", "label,x,depth_m\nBH-east,30,4.5\n")
    from tomo.figures import compare, section, versus

    run = replace(base_run, boreholes=place_boreholes(read_boreholes(bh), base_run))
    for fig in (section.velocity_section(run), section.coverage_section(run), compare.layered_vs_gridded(run),
                versus.versus_figure(run, run)):
        texts = [t.get_text() for ax in fig.axes for t in ax.texts]
        assert "BH-east" in texts
        labels = fig.axes[0].get_legend_handles_labels()[1]
        assert any(label.startswith("boreholes") for label in labels)
        section.style.plt.close(fig)
    out = tmp_path / "report.html"
    assert main(["report", str(run_path), "--out", str(out), "--boreholes", str(bh)]) == 0
    text = out.read_text(encoding="utf-8")
    assert re.search(r"<h3>\d+\.\d+ Boreholes</h3>", text) and "BH-east" in text and "4.5 ± 0.5" in text
    assert main(["plot", str(run_path), "--out", str(tmp_path / "figs"), "--format", "png",
                 "--boreholes", str(write(tmp_path / "bad.csv", "x,depth_m\n99,3\n"))]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "bad.csv:2: field 'x'" in err and not (tmp_path / "figs").exists()


def test_demo_boreholes_and_stations_agree_with_the_demo_site():
    from pathlib import Path

    from tomo.survey.model import read_model
    from tomo.survey.stations import read_stations
    from tomo.survey.terrain import read_terrain

    demo = Path(__file__).resolve().parents[1] / "tomo" / "data" / "demo"
    model = read_model(demo / "site.toml")
    b = read_boreholes(demo / "boreholes.csv")
    # the boreholes log the bedrock: the base of the second layer of the invented site,
    # rounded to 0.1 m in the file (tomo/data/demo/README.md)
    np.testing.assert_allclose(b.depth_m, model.layers[1].base_depth(b.x), atol=0.05)
    stations = read_stations(demo / "stations.csv")
    terrain = read_terrain(demo / "terrain.csv")
    # elevations from the terrain (1 mm in the file); a straight line with 1 cm survey
    # scatter: distances along it within 5 cm of x over 57 steps, no sideways warning
    np.testing.assert_allclose(stations.elevation, terrain.elevation(stations.x), atol=5e-4)
    np.testing.assert_allclose(stations.distance_m, stations.x, atol=0.05)
    assert not stations.sideways().warn
