"""The public API (``tomo.read_survey`` ... ``Run.surface``) and its agreement with the CLI."""

from __future__ import annotations

import json
import logging

import numpy as np
import pytest
from _runs import make_run
from helpers import head_wave_times, line_picks

import tomo
from tomo.cli import main
from tomo.survey.model import Layer, Model
from tomo.survey.picks import Picks, write_picks
from tomo.survey.terrain import flat_terrain
from tomo.tomography.mesh import build_mesh
from tomo.tomography.synth import synthetic_times

TERRAIN = flat_terrain(-30.0, 80.0)
#: A short run: the API and the CLI must agree on any run, the first iteration suffices.
SHORT = ["--max-iterations", "1", "--workers", "1"]


@pytest.fixture(scope="module")
def line(tmp_path_factory):
    """Pick file of a two-layer line (24 geophones at 2 m, 7 shots), 0.5 ms noise, and a
    mesh spec of 1 m cells (forward-modelled on a 0.25 m grid, as in test_cli_invert)."""
    folder = tmp_path_factory.mktemp("api")
    layout = line_picks(TERRAIN, np.arange(24) * 2.0, [-4.0, 0.0, 12.0, 23.0, 34.0, 46.0, 50.0])
    model = Model((Layer(500.0, 0.0, np.array([[0.0, 6.0], [46.0, 8.0]])), Layer(2000.0)), terrain=TERRAIN)
    fine = build_mesh(-8.0, 54.0, TERRAIN, 0.25, 18.0, refine=2, padding=2.0)
    t = synthetic_times(model, layout, fine).time_s
    rng = np.random.default_rng(5)
    picks = layout.with_times(t + rng.normal(0.0, 0.5e-3, t.size), np.full(t.size, 0.5e-3))
    path = folder / "picks.csv"
    write_picks(path, picks)
    mesh = folder / "mesh.toml"
    mesh.write_text("cell_m = 1.0\ndepth_m = 16.0\nrefine = 3\n")
    layers = folder / "layers.json"
    assert main(["layers", str(path), "--out", str(layers)]) == 0
    return path, mesh, layers


def _same_settings(a, b):
    """Recorded settings, less the names of the files they came from."""
    drop = {"picks_file", "terrain_file", "mesh_file", "layers_file"}
    return {k: v for k, v in a.items() if k not in drop} == {k: v for k, v in b.items() if k not in drop}


def test_interpret_layers_recovers_the_head_wave_model():
    # Picks from the n-layer head-wave equation (Telford, Geldart & Sheriff 1990, Applied
    # Geophysics, 2nd ed., sec. 4.3) over 600 / 2400 m/s with 5 m of cover, 0.2 ms noise.
    # 2 % on the velocities and 5 % on the thickness: the scatter of branch fits over
    # 48 geophones at that noise is well below both (test_layered measures it).
    gx = np.arange(48) * 2.0
    shots = np.array([-13.0, -1.0, 47.0, 95.0, 107.0])
    sx, rx = np.repeat(shots, gx.size), np.tile(gx, shots.size)
    rng = np.random.default_rng(3)
    t = head_wave_times(rx - sx, [600.0, 2400.0], [5.0]) + rng.normal(0.0, 2e-4, sx.size)
    survey = tomo.read_survey(Picks(sx, np.zeros(sx.size), rx, np.zeros(sx.size), t, np.full(sx.size, 2e-4)))
    result = tomo.interpret_layers(survey)
    assert len(result.layers) == 2
    np.testing.assert_allclose(result.velocities, [600.0, 2400.0], rtol=0.02)
    assert result.thicknesses[0] == pytest.approx(5.0, rel=0.05)
    assert any("licensed professional" in c for c in result.cautions)


def test_api_and_cli_share_defaults(line, tmp_path, capsys):
    # Internal consistency check: `tomo invert` is a call of tomo.invert, so with the
    # same options the runs are the same to the last bit (same defaults: cell size,
    # pick sigma, start smoothing).
    picks, mesh, _ = line
    assert main(["invert", str(picks), "--mesh", str(mesh), "--out", str(tmp_path / "cli.h5"), *SHORT]) == 0
    cli = tomo.read_run(tmp_path / "cli.h5")
    run = tomo.invert(tomo.read_survey(picks), mesh=mesh, max_iterations=1, workers=1)
    assert isinstance(run, tomo.Run) and isinstance(cli, tomo.Run)
    np.testing.assert_array_equal(run.velocity, cli.velocity)
    np.testing.assert_array_equal(run.start_velocity, cli.start_velocity)
    assert _same_settings(run.settings, cli.settings)
    assert run.settings["start_smoothing_cells"] == tomo.api.START_SMOOTHING_CELLS
    assert run.settings["default_sigma_ms"] == tomo.default_settings().default_sigma_ms
    # without a mesh spec, cells of half the station spacing (2 m / 2), as the CLI's help says
    picks_only = tomo.invert(tomo.read_survey(picks), start="gradient", max_iterations=0, workers=1)
    assert picks_only.settings["mesh_spec"]["cell_m"] == 1.0


def test_start_from_a_layers_file_equals_interpreting_again(line, tmp_path, capsys):
    # The same layered reading, from the file or made again, paints the same start
    # (exact: the file holds the numbers to full precision).
    picks, mesh, layers = line
    survey = tomo.read_survey(picks)
    again = tomo.invert(survey, mesh=mesh, max_iterations=0, workers=1)
    from_file = tomo.invert(survey, layers=layers, mesh=mesh, max_iterations=0, workers=1)
    from_object = tomo.invert(survey, layers=tomo.read_layers(layers, survey), mesh=mesh, max_iterations=0, workers=1)
    np.testing.assert_array_equal(from_file.start_velocity, again.start_velocity)
    np.testing.assert_array_equal(from_object.start_velocity, again.start_velocity)
    assert from_file.settings["layers_file"] == str(layers) and "layers_file" not in again.settings
    # and through the command line
    out = tmp_path / "run.h5"
    assert main(["invert", str(picks), "--mesh", str(mesh), "--layers", str(layers), "--out", str(out),
                 "--max-iterations", "0", "--workers", "1"]) == 0
    np.testing.assert_array_equal(tomo.read_run(out).start_velocity, again.start_velocity)


def _bad_layers(tmp_path, line):
    picks, _, layers = line
    data = json.loads(layers.read_text(encoding="utf-8"))
    moved = json.loads(json.dumps(data))
    moved["shots"][0]["shot_x"] += 5.0
    files = {"missing": (tmp_path / "nope.json", "does not exist"),
             "not json": (tmp_path / "bad.json", "bad JSON"),
             "no layers": (tmp_path / "empty.json", "no layer table"),
             "other line": (tmp_path / "moved.json", "not those of")}
    files["not json"][0].write_text('{\n "layers": [\n')
    files["no layers"][0].write_text('{"layers": []}\n')
    files["other line"][0].write_text(json.dumps(moved))
    return picks, files


@pytest.mark.parametrize("case", ["missing", "not json", "no layers", "other line"])
def test_bad_layers_file_is_one_line_and_no_output(line, tmp_path, capsys, case):
    picks, files = _bad_layers(tmp_path, line)
    path, words = files[case]
    out = tmp_path / "run.h5"
    status = main(["invert", str(picks), "--layers", str(path), "--out", str(out), *SHORT])
    err = capsys.readouterr().err.strip()
    assert status == 2 and words in err and str(path) in err and len(err.splitlines()) == 1, err
    assert not out.exists()
    if case == "not json":
        assert f"{path}:3" in err  # the JSON parser's line: the file ends on line 3


@pytest.mark.parametrize("extra, words", [(["--start", "gradient"], "layered start only"),
                                          (["--branches", "2"], "read already")])
def test_layers_file_conflicting_options(line, tmp_path, capsys, extra, words):
    picks, _, layers = line
    status = main(["invert", str(picks), "--layers", str(layers), "--out", str(tmp_path / "r.h5"), *extra, *SHORT])
    err = capsys.readouterr().err.strip()
    assert status == 2 and words in err and len(err.splitlines()) == 1


def test_progress_goes_to_logging_without_a_callback(line, caplog):
    picks, mesh, _ = line
    with caplog.at_level(logging.INFO, logger="tomo"):
        run = tomo.invert(tomo.read_survey(picks), start="gradient", mesh=mesh, max_iterations=1, workers=1)
    lines = [r.getMessage() for r in caplog.records if r.name == "tomo"]
    assert len(lines) == run.iterations + 1 and lines[0].startswith("start:")


def test_run_writes_reads_and_reads_a_surface(tmp_path):
    # Run.surface on a model with v = v0 + k d: linear interpolation between cell centres
    # puts the V contour exactly at d = (V - v0) / k (the model's definition; exact up to
    # floating point), as for the exported surface (test_export).
    data, mesh, _ = make_run()
    v0, k = 500.0, 100.0
    data.velocity = np.where(mesh.ground, v0 + k * np.maximum(mesh.depth, 0.0), np.nan)
    run = tomo.Run.from_data(data)
    path = run.write(tmp_path / "run.h5")
    back = tomo.read_run(path)
    np.testing.assert_array_equal(back.velocity, run.velocity)
    surface = back.surface(1200.0)
    assert isinstance(surface, tomo.Surface) and surface.velocity_m_s == 1200.0
    np.testing.assert_allclose(surface.depth_m, (1200.0 - v0) / k, atol=1e-9)
    np.testing.assert_allclose(surface.elevation_m, surface.ground_z - surface.depth_m, atol=1e-9)
    assert surface.constrained.dtype == bool and surface["depth_m"] is surface.depth_m
    with pytest.raises(tomo.InputError, match="outside the model's range"):
        back.surface(9000.0)


def test_to_xarray_is_the_netcdf_grid(tmp_path):
    # Run.to_xarray is the dataset of `tomo export --netcdf` (test_export_formats reads
    # that back with h5py); here: the arrays are the run's, bit for bit, with CF units.
    run = tomo.Run.from_data(make_run()[0])
    ds = run.to_xarray()
    assert ds["velocity"].dims == ("z", "x") and ds["velocity"].attrs["units"] == "m s-1"
    assert ds["z"].attrs["positive"] == "up" and ds.attrs["Conventions"].startswith("CF-")
    np.testing.assert_array_equal(ds["velocity"].values, run.velocity)
    np.testing.assert_array_equal(ds["x"].values, run.x)


def test_survey_without_terrain_draws_the_ground_through_the_stations(line):
    picks, _, _ = line
    survey = tomo.read_survey(picks)
    assert survey.terrain is None and survey.picks_path == str(picks)
    # flat stations at z = 0: no ground is drawn, the mesh takes flat ground (no note)
    assert survey.ground() == (None, [])
    lifted = Picks(survey.picks.source_x, survey.picks.source_z + 50.0, survey.picks.receiver_x,
                   survey.picks.receiver_z + 50.0, survey.picks.time_s)
    terrain, notes = tomo.read_survey(lifted).ground()
    assert terrain.z.min() == 50.0 and notes == [tomo.api.NO_TERRAIN_NOTE]
