"""Long lines (issue 12) through the public API and the command line: the grid's depth
from the rays, the estimate before a run and its refusal, worker counts, progress.

The windows themselves are proved in tests/test_windows.py, the synthetic picks against
closed forms in tests/test_synth.py.
"""

from __future__ import annotations

import io
import os

import numpy as np
import pytest
from helpers import line_picks

import tomo
from tomo.cli import main
from tomo.cli.bars import IterationBars
from tomo.survey.picks import write_picks
from tomo.survey.terrain import flat_terrain
from tomo.tomography import budget
from tomo.tomography.meter import PassProgress

#: v = V0 + K z, m/s and 1/s: a strong gradient (K x / (2 V0) = 4.7 at 140 m) whose
#: diving waves turn deeper than a third of the offset.
V0, K = 300.0, 20.0
TERRAIN = flat_terrain(-10.0, 150.0)


def turning_depth(offset):
    """Depth (m) where the diving wave of offset ``offset`` (m) turns in v = V0 + K z:
    z = (V0/K) (sqrt(1 + (K x / (2 V0))^2) - 1) (Slotnick 1959, Lessons in Seismic
    Computing, SEG: the ray of a linear gradient is a circular arc; REFERENCES.md)."""
    return (V0 / K) * (np.sqrt(1.0 + (K * offset / (2.0 * V0)) ** 2) - 1.0)


@pytest.fixture(scope="module")
def gradient_line(tmp_path_factory):
    """Picks of the diving wave t = (2/K) asinh(K x / (2 V0)) (Slotnick 1959): geophones
    every 4 m to 140 m, shots at both ends and the middle, 0.5 ms Gaussian noise
    (seeded) and sigma."""
    folder = tmp_path_factory.mktemp("longlines")
    layout = line_picks(TERRAIN, np.arange(0.0, 140.1, 4.0), [0.0, 70.0, 140.0])
    x = np.abs(layout.receiver_x - layout.source_x)
    t = (2.0 / K) * np.arcsinh(K * x / (2.0 * V0)) + np.random.default_rng(3).normal(0.0, 0.5e-3, x.size)
    path = folder / "picks.csv"
    write_picks(path, layout.with_times(t, np.full(t.size, 0.5e-3)))
    return path


def test_invert_deepens_a_first_guess_the_rays_turn_below(gradient_line):
    # A third of the longest offset is 46.7 m; the diving wave of 140 m turns 57 m deep
    # (closed form above). The grid is made deeper, with room below the deepest ray of
    # the starting model (the gradient fitted to the picks: close to the true one), and
    # the plan says why. The deepest ray is found to within a cell (2 m here) of the
    # closed form's turning point, and ROOM asks half its depth again below it.
    from tomo.tomography.depth import ROOM

    plans = []
    run = tomo.invert(tomo.read_survey(gradient_line), start="gradient", max_iterations=0, workers=1,
                      on_plan=plans.append)
    (plan,) = plans
    deepest = turning_depth(140.0)
    told = float(plan.depth.split("ray turns ")[1].split(" m below")[0])
    assert abs(told - deepest) <= 2.0 + 1e-9
    assert run.settings["mesh_spec"]["depth_m"] >= (1.0 + ROOM) * (deepest - 2.0)
    assert "deeper than the first guess of 46.7 m (a third of the longest offset)" in plan.depth
    assert any(n.startswith("grid depth ") for n in run.notes)
    assert not any("too shallow" in n for n in run.notes)
    assert "estimated time about" in plan.estimate.describe()


def test_a_mesh_spec_too_shallow_for_the_rays_is_kept_with_a_warning(gradient_line, tmp_path, capsys):
    # The user's depth wins; the run's notes warn, naming the deepest turning point.
    spec = tmp_path / "mesh.toml"
    spec.write_text("depth_m = 20.0\n")
    out = tmp_path / "run.h5"
    assert main(["invert", str(gradient_line), "--start", "gradient", "--mesh", str(spec), "--out", str(out),
                 "--max-iterations", "0", "--workers", "1"]) == 0
    err = capsys.readouterr().err
    assert "grid depth: 20 m below the lowest ground, as the mesh spec sets" in err
    assert "warning: the grid may be too shallow for the rays: the deepest first-arrival ray turns" in err
    assert "on the bottom of a grid 20.0 m deep" in err and "give the mesh spec depth_m = 40 or more" in err


@pytest.mark.parametrize("command", ["invert", "synth"])
def test_workers_zero_or_more_than_the_cores_are_refused(gradient_line, tmp_path, capsys, command):
    # One line naming the option, a non-zero exit, nothing written.
    out = tmp_path / "out"
    for bad in ("0", str((os.cpu_count() or 1) + 1)):
        if command == "invert":
            args = ["invert", str(gradient_line), "--out", str(out)]
        else:
            model = tmp_path / "model.toml"
            model.write_text(f"[[layer]]\nvelocity = {V0}\ngradient = {K}\n")
            args = ["synth", str(model), "--layout", str(gradient_line), "--out", str(out)]
        assert main(args + ["--workers", bad]) != 0
        err = capsys.readouterr().err.strip()
        assert len(err.splitlines()) == 1 and "workers" in err and "Traceback" not in err, err
        assert not out.exists()
    with pytest.raises(tomo.InputError, match="at least 1 worker"):
        tomo.invert(tomo.read_survey(gradient_line), workers=0)


def test_a_run_that_would_not_fit_is_refused_before_any_work(gradient_line, tmp_path, capsys, monkeypatch):
    # The memory available is read before the run (psutil); here it is made tiny. The
    # refusal names the estimate and a way out, and writes nothing.
    monkeypatch.setattr(budget, "available_memory", lambda: 50e6)
    out = tmp_path / "run.h5"
    assert main(["invert", str(gradient_line), "--out", str(out), "--workers", "1"]) != 0
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and "Traceback" not in err
    assert "this run would need about" in err and "0.1 GB is available" in err
    assert "split the line into parts" in err or "cell_m =" in err
    assert not out.exists()


def test_the_coarser_cell_suggested_fits_and_the_next_finer_does_not():
    # suggest_cell scales the estimate's parts as the module says (window nodes with the
    # inverse square of the cell, matrix entries with its inverse): an internal check of
    # that arithmetic (the parts' sizes are measured in benchmarks/scale.py).
    est = budget.RunEstimate(picks=36000, origins=400, cells=60000, nodes_per_pass=200_000_000,
                             matrix_entries=60_000_000, memory_bytes=0.0, available_bytes=None, pass_s=1.0,
                             iteration_s=1.0, iterations=12, max_iterations=20, workers=2)
    base = budget.PROCESS_BYTES * 3
    matrix = budget.MATRIX_COPIES * budget.ENTRY_BYTES * est.matrix_entries
    rest = budget.KEPT_NODE_BYTES * est.nodes_per_pass
    est.memory_bytes = base + matrix + rest

    def need(cell):
        factor = cell / 2.5
        return base + matrix / factor + rest / factor ** 2

    # cells of 1, 2 or 5 times a power of ten: after 2.5 m come 5, 10 and 20 m
    for available, expected in ((3.2e9, 5.0), (2.2e9, 10.0)):
        cell = budget.suggest_cell(est, 2.5, available)
        assert cell == expected and need(cell) <= 0.9 * available < need(cell / 2.0)
    assert budget.suggest_cell(est, 2.5, 0.5e9) is None  # the processes alone do not fit


def test_identical_runs_for_any_number_of_workers(gradient_line):
    # Chunks of origins depend only on the origins and their windows, every task carries
    # its inputs, and the solve runs in the main process: one or two workers give the
    # same model to the last bit.
    survey = tomo.read_survey(gradient_line)
    runs = [tomo.invert(survey, start="gradient", max_iterations=2, workers=n) for n in (1, 2)]
    assert runs[0].iterations >= 1
    np.testing.assert_array_equal(runs[0].velocity, runs[1].velocity)
    assert runs[0].chi2 == runs[1].chi2


def test_progress_bars_on_a_terminal_and_one_line_per_iteration_elsewhere(gradient_line, tmp_path, capsys):
    # A bar (tqdm) only on a terminal; a log or a pipe gets the iterations' lines alone.
    quiet = io.StringIO()
    bars = IterationBars(quiet)
    bars.passes(PassProgress(1, "fields", 1, 4, 0.1))
    bars.close()
    assert quiet.getvalue() == ""
    shown = io.StringIO()
    bars = IterationBars(shown, enabled=True)
    for done in range(1, 5):
        bars.passes(PassProgress(1, "fields" if done < 3 else "rays", done, 4, 0.1 * done, "geophone"))
    assert bars.bar is not None and bars.bar.n == 4 and bars.bar.total == 4
    bars.bar.refresh()  # drawn at most twice a second (mininterval): draw it now
    bars.close()
    assert "iteration 1" in shown.getvalue() and "4/4" in shown.getvalue() and "geophone" in shown.getvalue()
    out = tmp_path / "run.h5"
    assert main(["invert", str(gradient_line), "--start", "gradient", "--out", str(out), "--max-iterations", "2",
                 "--workers", "1"]) == 0
    err = capsys.readouterr().err
    assert "\r" not in err
    progress = [line for line in err.splitlines() if line.startswith(("start:", "iteration "))]
    assert len(progress) == tomo.read_run(out).iterations + 1


def test_the_depth_probe_is_the_inversions_first_pass(tmp_path):
    # Where the first guess holds the rays (10 m of 500 m/s over 2000 m/s: the head waves
    # run 10 m deep, the guess is 46.7 m), the probe's pass of the starting model is the
    # inversion's first: the same run to the last bit as one that solves it again.
    from helpers import head_wave_times

    from tomo.analysis.raypaths import run_mesh
    from tomo.tomography.inversion import InversionSettings, invert

    layout = line_picks(TERRAIN, np.arange(0.0, 140.1, 4.0), [0.0, 70.0, 140.0])
    t = head_wave_times(layout.receiver_x - layout.source_x, [500.0, 2000.0], [10.0])
    t = t + np.random.default_rng(4).normal(0.0, 0.5e-3, t.size)
    path = tmp_path / "picks.csv"
    write_picks(path, layout.with_times(t, np.full(t.size, 0.5e-3)))
    survey, plans = tomo.read_survey(path), []
    run = tomo.invert(survey, max_iterations=1, workers=1, on_plan=plans.append)
    assert plans[0].start_pass is not None and "deep enough" in plans[0].depth
    again = invert(survey.picks, run_mesh(run), run.start_velocity, InversionSettings(max_iterations=1, workers=1))
    np.testing.assert_array_equal(again.velocity, run.velocity)
