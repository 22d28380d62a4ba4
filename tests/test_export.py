"""tomo export: grid and iso-velocity surface exports, and the bad-input cases of every
command that reads a run file (export, plot, report)."""

from __future__ import annotations

import h5py
import numpy as np
import pytest
from _runs import COVER_DEPTH_M, make_run

from tomo.analysis.coverage import covered, deepest_ray_elevation, investigation_elevation, ray_cells
from tomo.analysis.surface import contour_surface
from tomo.cli import main
from tomo.core.fileio import read_csv_rows
from tomo.results.runfile import write_run


@pytest.fixture(scope="module")
def base_run():
    run, mesh, _ = make_run()
    return run, mesh


@pytest.fixture()
def run_file(tmp_path, base_run):
    path = tmp_path / "run.h5"
    write_run(path, base_run[0])
    return path


def _gradient_run(base_run, v0=500.0, k=100.0):
    """The test run with v = v0 + k * depth at every cell centre (depth below ground)."""
    run, mesh = base_run
    from dataclasses import replace
    velocity = np.where(mesh.ground, v0 + k * mesh.depth, np.nan)
    return replace(run, velocity=velocity)


def test_grid_export_reads_back_and_matches_run_file(tmp_path, run_file, base_run):
    run = base_run[0]
    out = tmp_path / "grid.csv"
    assert main(["export", str(run_file), "--grid", str(out)]) == 0
    header, rows = read_csv_rows(out)
    assert header == ["x", "z", "velocity_m_s", "coverage_m"]
    data = np.array([[float(v) for v in fields] for _, fields in rows])
    ground = np.isfinite(run.velocity)
    assert data.shape == (int(ground.sum()), 4)
    xx, zz = np.meshgrid(run.x, run.z)
    # the file keeps 3 decimals of x, z, 1 of velocity and 4 of coverage: half a unit of the last
    np.testing.assert_allclose(data[:, 0], xx[ground], atol=5e-4)
    np.testing.assert_allclose(data[:, 1], zz[ground], atol=5e-4)
    np.testing.assert_allclose(data[:, 2], run.velocity[ground], atol=0.05)
    np.testing.assert_allclose(data[:, 3], run.coverage[ground], atol=5e-5)


def test_surface_of_linear_gradient_is_exact(base_run):
    # v = v0 + k d is linear in depth, so linear interpolation between cell centres
    # puts the V contour exactly at d = (V - v0) / k (definition of the model; exact
    # up to floating point).
    v0, k, value = 500.0, 100.0, 1200.0
    run = _gradient_run(base_run, v0, k)
    s = contour_surface(run, value)
    ground = np.interp(s["x"], run.terrain_x, run.terrain_z)
    np.testing.assert_allclose(s["ground_z"], ground, atol=1e-9)
    np.testing.assert_allclose(s["depth_m"], (value - v0) / k, atol=1e-9)
    np.testing.assert_allclose(s["elevation_m"], ground - (value - v0) / k, atol=1e-9)


def test_surface_export_file_reads_back(tmp_path, base_run):
    run = _gradient_run(base_run)
    path = tmp_path / "run.h5"
    write_run(path, run)
    out = tmp_path / "surface.csv"
    assert main(["export", str(path), "--contour", "900", "--surface", str(out)]) == 0
    header, rows = read_csv_rows(out)
    assert header == ["x", "ground_z", "depth_m", "elevation_m", "constrained"]
    data = np.array([[float(v) for v in fields] for _, fields in rows])
    expected = contour_surface(run, 900.0)
    np.testing.assert_allclose(data[:, 0], expected["x"], atol=5e-4)  # 3 decimals in the file
    np.testing.assert_allclose(data[:, 2], 4.0, atol=5e-4)  # (900 - 500) / 100 m, exact for a gradient
    np.testing.assert_array_equal(data[:, 4].astype(bool), expected["constrained"])


def test_constrained_only_where_rays_reach(base_run):
    run = _gradient_run(base_run)
    x = run.x
    under_spread = (x >= -1.0) & (x <= 34.0)  # where _runs puts rays
    shallow = contour_surface(run, 700.0)   # 2 m deep: inside the rays (to 7 m)
    deep = contour_surface(run, 1500.0)     # 10 m deep: below every ray
    assert np.all(shallow["constrained"][under_spread])
    assert not np.any(shallow["constrained"][~under_spread])
    assert not np.any(deep["constrained"])


def test_coverage_envelope_and_depth_of_investigation(base_run):
    run, mesh = base_run
    from dataclasses import replace
    # rays of 1 m per cell to 4 m depth and 0.01 m per cell from 4 to 10 m: 95 % of the
    # ray length in a column lies above 4 m; the deepest ray is at 10 m (definitions in
    # tomo.export; the 95 % share is common practice).
    xx = np.broadcast_to(mesh.x[None, :], mesh.shape)
    spread = (xx >= 5.0) & (xx <= 30.0)
    cov = np.where(mesh.ground & spread & (mesh.depth <= 4.0), 1.0, 0.0)
    cov = np.where(mesh.ground & spread & (mesh.depth > 4.0) & (mesh.depth <= 10.0), 0.01, cov)
    run = replace(run, coverage=cov)
    cols = (mesh.x >= 8.0) & (mesh.x <= 27.0)  # away from the ends, where smoothing mixes columns
    ground = mesh.ground_surface
    cell = mesh.cell
    deepest = ground - deepest_ray_elevation(run)
    doi = ground - investigation_elevation(run)
    # each is the bottom edge of a cell: within one cell of the depth it stands for
    assert np.all(np.abs(deepest[cols] - 10.0) <= cell)
    assert np.all(np.abs(doi[cols] - 4.0) <= cell)
    assert np.all(np.isnan(deepest[mesh.x < 4.0]))
    env = covered(run)
    np.testing.assert_array_equal(ray_cells(run), mesh.ground & (cov > 0))
    # the envelope holds every ray cell and nothing below the deepest ray
    assert np.all(env[ray_cells(run)])
    assert not np.any(env & (mesh.depth > 10.0 + cell))


def test_fake_coverage_envelope_matches_its_definition(base_run):
    run, mesh = base_run
    xx = np.broadcast_to(mesh.x[None, :], mesh.shape)
    expected = mesh.ground & (mesh.depth <= COVER_DEPTH_M) & (xx >= -1.0) & (xx <= 34.0)
    np.testing.assert_array_equal(covered(run), expected)


def test_contour_outside_model_range_is_refused(tmp_path, run_file, capsys):
    grid = tmp_path / "grid.csv"
    surface = tmp_path / "surface.csv"
    status = main(["export", str(run_file), "--grid", str(grid), "--contour", "9000", "--surface", str(surface)])
    err = capsys.readouterr().err
    assert status == 2
    assert "9000 m/s is outside the model's range" in err and len(err.strip().splitlines()) == 1
    # nothing half written: the grid was asked for too, but no file was made
    assert not grid.exists() and not surface.exists()


def test_contour_needs_surface_and_something_to_export(run_file, capsys):
    assert main(["export", str(run_file), "--contour", "1000"]) == 2
    assert main(["export", str(run_file)]) == 2
    assert "nothing to export" in capsys.readouterr().err


def _not_ours(path):
    with h5py.File(path, "w") as f:
        f["data"] = np.arange(3)


def _newer(path, run):
    write_run(path, run)
    with h5py.File(path, "a") as f:
        f.attrs["format_version"] = 99


def _truncated(path, run):
    write_run(path, run)
    data = path.read_bytes()
    path.write_bytes(data[: len(data) // 2])


def _text(path, run):
    path.write_text("source_x,receiver_x,time_ms\n0,1,2\n")


@pytest.mark.parametrize("damage, words", [
    ("not_ours", "not a tomo run file"),
    ("newer", "newer than this tomo reads"),
    ("truncated", "truncated"),
    ("text", "not a readable HDF5 file"),
])
@pytest.mark.parametrize("command", ["export", "plot", "report"])
def test_bad_run_files_give_one_line_and_no_output(tmp_path, base_run, capsys, damage, words, command):
    path = tmp_path / "bad.h5"
    if damage == "not_ours":
        _not_ours(path)
    else:
        {"newer": _newer, "truncated": _truncated, "text": _text}[damage](path, base_run[0])
    out = tmp_path / "out"
    argv = {"export": ["export", str(path), "--grid", str(out)],
            "plot": ["plot", str(path), "--out", str(out)],
            "report": ["report", str(path), "--out", str(out)]}[command]
    status = main(argv)
    err = capsys.readouterr().err.strip()
    assert status == 2
    assert len(err.splitlines()) == 1 and words in err and str(path) in err
    assert not out.exists()


def test_output_folder_missing(tmp_path, run_file, capsys):
    out = tmp_path / "no" / "such" / "grid.csv"
    assert main(["export", str(run_file), "--grid", str(out)]) == 2
    assert "output folder does not exist" in capsys.readouterr().err
    assert not out.exists()


def test_output_folder_not_writable(tmp_path, run_file, capsys):
    import os

    locked = tmp_path / "locked"
    locked.mkdir()
    locked.chmod(0o500)
    try:
        if os.access(locked, os.W_OK):
            pytest.skip("running as a user who can write anywhere (root)")
        assert main(["export", str(run_file), "--grid", str(locked / "g.csv")]) == 2
        assert "not writable" in capsys.readouterr().err
        assert list(locked.iterdir()) == []
    finally:
        locked.chmod(0o700)


def test_walkthrough_python_example_runs(tmp_path, base_run, monkeypatch, capsys):
    # the "reading a run file from Python" example of README.md, on a small
    # run whose velocities (1000-3000 m/s) include the example's 2100 m/s contour
    import re
    from dataclasses import replace
    from pathlib import Path

    text = (Path(__file__).resolve().parents[1] / "README.md").read_text(encoding="utf-8")
    code = re.search(r"<!-- run-file-example -->\n```python\n(.*?)```", text, re.S).group(1)
    run = base_run[0]
    (tmp_path / "tomo-demo").mkdir()
    write_run(tmp_path / "tomo-demo" / "run.h5", replace(run, velocity=run.velocity * 2.0))
    monkeypatch.chdir(tmp_path)
    exec(compile(code, "README.md", "exec"), {})
    out = capsys.readouterr().out
    assert "chi2" in out and "m deep" in out
