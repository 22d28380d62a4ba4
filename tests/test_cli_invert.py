"""`tomo invert` from the command line (tests call tomo.cli.main)."""

import numpy as np
import pytest
from helpers import line_picks

from tomo.cli import main
from tomo.results.runfile import read_run
from tomo.survey.model import Layer, Model
from tomo.survey.picks import write_picks
from tomo.survey.terrain import flat_terrain
from tomo.tomography.mesh import build_mesh
from tomo.tomography.starting import LAYERED_SMOOTHING_CELLS
from tomo.tomography.synth import synthetic_times

TERRAIN = flat_terrain(-30.0, 80.0)


@pytest.fixture(scope="module")
def pick_file(tmp_path_factory):
    folder = tmp_path_factory.mktemp("cli_invert")
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
    return path, mesh


def test_invert_writes_a_run_file(pick_file, tmp_path, capsys):
    picks, mesh = pick_file
    out = tmp_path / "run.h5"
    status = main(["invert", str(picks), "--mesh", str(mesh), "--start", "gradient", "--out", str(out),
                   "--workers", "1"])
    captured = capsys.readouterr()
    assert status == 0, captured.err
    run = read_run(out)
    assert "wrote" in captured.out and f"chi2 {run.chi2:.3f}" in captured.out
    # one progress line for the start and one per iteration, on stderr
    lines = [ln for ln in captured.err.splitlines() if "chi2" in ln and "RMS" in ln and "lambda" in ln]
    assert len(lines) == run.iterations + 1
    assert lines[0].startswith("start:") and lines[1].startswith("iteration 1/")
    assert run.settings["start"] == "gradient" and run.settings["workers"] == 1
    assert run.settings["mesh_spec"]["cell_m"] == 1.0
    assert 0.8 <= run.chi2 <= 1.3  # the discrepancy principle target (issue 4)
    assert run.picks["observed_ms"].size == run.picks["computed_ms"].size


def _invert(pick_file, tmp_path, *extra):
    """`tomo invert` on the test line with one worker; (exit status, run file path)."""
    picks, mesh = pick_file
    out = tmp_path / "run.h5"
    return main(["invert", str(picks), "--mesh", str(mesh), "--out", str(out), "--workers", "1", *extra]), out


def test_default_layered_start(pick_file, tmp_path, capsys):
    status, out = _invert(pick_file, tmp_path)
    assert status == 0, capsys.readouterr().err
    run = read_run(out)
    assert run.settings["start"] == "layered" and run.layered is not None
    assert run.settings["start_smoothing_cells"] == LAYERED_SMOOTHING_CELLS
    assert run.converged and "--start gradient and compare" in capsys.readouterr().err


def test_sharp_layered_start_on_request(pick_file, tmp_path, capsys):
    # --start-smoothing 0: the layers as the layered interpretation paints them, sharp
    status, out = _invert(pick_file, tmp_path, "--start-smoothing", "0", "--max-iterations", "0")
    assert status == 0, capsys.readouterr().err
    run = read_run(out)
    assert run.settings["start_smoothing_cells"] == 0.0
    values = np.unique(np.round(run.start_velocity[np.isfinite(run.start_velocity)], 6))
    assert values.size == len(run.layered["layers"])  # one velocity per layer


def test_layered_start_with_a_fixed_number_of_branches(pick_file, tmp_path, capsys):
    status, out = _invert(pick_file, tmp_path, "--branches", "2", "--max-iterations", "1")
    assert status == 0, capsys.readouterr().err
    run = read_run(out)
    assert run.settings["layered_branches"] == 2 and len(run.layered["layers"]) == 2


@pytest.mark.parametrize("extra, message", [(["--branches", "9"], "must be 1 to"),
                                            (["--branches", "2", "--start", "gradient"], "layered start only"),
                                            (["--start-smoothing", "-1"], "0 or more model cells"),
                                            (["--start-smoothing", "nan"], "0 or more model cells"),
                                            (["--start-smoothing", "1", "--start", "gradient"],
                                             "layered start only")])
def test_bad_start_options_are_named(pick_file, tmp_path, capsys, extra, message):
    status, out = _invert(pick_file, tmp_path, *extra)
    err = capsys.readouterr().err
    assert status != 0 and message in err and "Traceback" not in err
    assert not out.exists()


def test_unconverged_layered_run_suggests_the_gradient_start(pick_file, tmp_path, capsys):
    picks, mesh = pick_file
    out = tmp_path / "run.h5"
    status = main(["invert", str(picks), "--mesh", str(mesh), "--out", str(out), "--workers", "1",
                   "--max-iterations", "1"])
    err = capsys.readouterr().err
    assert status == 0, err
    assert not read_run(out).converged
    assert "not fitted to their uncertainty" in err and "--start gradient" in err


def test_missing_pick_file_is_one_line(tmp_path, capsys):
    status = main(["invert", str(tmp_path / "nope.csv"), "--out", str(tmp_path / "run.h5")])
    err = capsys.readouterr().err.strip()
    assert status == 2 and "nope.csv" in err and "does not exist" in err and len(err.splitlines()) == 1
    assert not (tmp_path / "run.h5").exists()


def test_bounds_excluding_the_start(pick_file, tmp_path, capsys):
    picks, mesh = pick_file
    status = main(["invert", str(picks), "--mesh", str(mesh), "--start", "gradient", "--v-max", "300",
                   "--out", str(tmp_path / "run.h5")])
    err = capsys.readouterr().err.strip()
    assert status == 2 and "exclude the starting model" in err and len(err.splitlines()) == 1


def test_ctrl_c_keeps_the_last_finished_iteration(pick_file, tmp_path, capsys, monkeypatch):
    import tomo.cli.invert as cli_invert

    def interrupt_after_first(info):
        cli_invert.note(str(info))
        if info.iteration == 1:
            raise KeyboardInterrupt

    monkeypatch.setattr(cli_invert, "_print_progress", interrupt_after_first)
    picks, mesh = pick_file
    out = tmp_path / "run.h5"
    status = main(["invert", str(picks), "--mesh", str(mesh), "--start", "gradient", "--out", str(out),
                   "--workers", "1"])
    err = capsys.readouterr().err
    assert status == 130
    assert f"{out} holds the last finished iteration (1 of" in err
    run = read_run(out)
    assert run.iterations == 1 and run.stop_reason == "interrupted"


def test_ground_from_station_elevations_without_terrain(pick_file, tmp_path, capsys):
    from tomo.survey.picks import read_picks

    picks_path, mesh = pick_file
    picks = read_picks(picks_path)
    lifted = picks.with_times(picks.time_s, picks.sigma_s)
    lifted.source_z = picks.source_z + 100.0
    lifted.receiver_z = picks.receiver_z + 100.0
    path = tmp_path / "lifted.csv"
    write_picks(path, lifted)
    out = tmp_path / "run.h5"
    status = main(["invert", str(path), "--mesh", str(mesh), "--start", "gradient", "--out", str(out),
                   "--workers", "1", "--max-iterations", "1"])
    err = capsys.readouterr().err
    assert status == 0, err
    assert "ground is drawn through the station elevations" in err
    run = read_run(out)
    assert run.terrain_z.min() == 100.0 and run.z.max() > 100.0
