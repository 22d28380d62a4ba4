"""The public API's resolution tests: what size of structure a run's line can bring back."""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import replace
from pathlib import Path
from typing import cast

from ..core.errors import InputError
from ..results.run import Run
from ..tomography.inversion import IterationInfo
from ..tomography.run import RunData
from ..uncertainty.resolution import DEFAULT_AMPLITUDE_PCT, MAX_AMPLITUDE_PCT, SEMBLANCE_THRESHOLD, ResolutionRecord
from .workflow import PathLike

__all__ = ["resolve", "resolution_summary", "plot_resolution", "DEFAULT_AMPLITUDE_PCT", "MAX_AMPLITUDE_PCT",
           "SEMBLANCE_THRESHOLD"]


def resolve(run: RunData | PathLike, checker_m: float | None = None, amplitude_pct: float = DEFAULT_AMPLITUDE_PCT,
            target: PathLike | None = None, seed: int = 0, window_m: float | None = None,
            workers: int | None = None, out: PathLike | None = None,
            progress: Callable[[IterationInfo], object] | None = None) -> Run:
    """A resolution test of a run: a checkerboard of ``checker_m`` squares, or the
    bodies of the model file ``target``, added to the final model, synthetic picks at
    the run's geometry with each pick's noise, inverted with the run's settings from
    its final model; the recovered perturbation is scored cell by cell against the
    true one (:mod:`tomo.uncertainty.resolution`).

    Parameters
    ----------
    run : Run, RunData or path
        The run (or run file) to test.
    checker_m : float, optional
        Side of the checker squares, m: at least a model cell, at most the line.
    amplitude_pct : float
        Checker amplitude, % of velocity, in (0, 50].
    target : path, optional
        Instead of a checkerboard: a model file (``tomo.survey.model``) whose
        ``[[body]]`` tables are the hypothesised feature, measured against its layers.
    seed : int
        Seed of the pick noise.
    window_m : float, optional
        Side of the score window, m (default: the checker side, or the smallest side
        of the target's bodies).
    workers : int, optional
        Processes for the test inversion (default: the run's setting).
    out : path, optional
        Run file to write the run with its ``/resolution`` group to (atomically).

    Returns
    -------
    Run
        A copy of the run with ``run.resolution`` (a ``ResolutionRecord``) set; section
        figures then hatch the cells it did not resolve.

    Raises
    ------
    InputError
        For a run file that is not a run, a checker below a cell or above the line, an
        amplitude outside (0, 50] %, neither or both of checker and target, a target
        without bodies or outside the grid.

    Notes
    -----
    The test shows what the line brings back of that pattern, at that size and
    strength, under the run's settings; it is no proof that the real model is right,
    and says nothing of structure of another shape (Rawlinson & Spakman 2016,
    Geophys. J. Int. 206, from memory).
    """
    from ..survey.model import read_model
    from ..uncertainty.resolution import (
        check_checker,
        checker_pattern,
        feature_size,
        resolution_test,
        run_mesh,
        run_picks,
        target_pattern,
    )

    if (checker_m is None) == (target is None):
        raise InputError("give either a checker size or a target model (not both, not neither)", field="--checker")
    run = Run.from_data(run) if isinstance(run, RunData) else Run.read(run)
    mesh, picks = run_mesh(run), run_picks(run)
    if checker_m is not None:
        size = float(checker_m)
        check_checker(size, float(amplitude_pct), mesh, picks)
        true = checker_pattern(mesh, size, float(amplitude_pct), float(picks.receiver_x.min()))
        kind, amp, name = "checker", float(amplitude_pct), None
    else:
        model = read_model(target)
        true = target_pattern(model, mesh)
        if not (abs(true[mesh.ground]) > 1e-6).any():
            raise InputError("the model's bodies lie outside the run's grid: nothing to recover", path=target,
                             field="body")
        kind, size, amp, name = "target", feature_size(model), math.nan, Path(str(target)).name
    if window_m is not None and not (math.isfinite(window_m) and window_m > 0):
        raise InputError(f"score window {window_m:g} m must be positive", field="--window")
    record = resolution_test(run, true, kind, size, amp, seed=seed, window_m=window_m, workers=workers,
                             progress=progress, target_file=name)
    tested = replace(run, resolution=record)
    if out is not None:
        tested.write(out)
    return tested


def resolution_summary(run: Run) -> list[str]:
    """Lines saying what the run's resolution test found (over the well-covered cells)."""
    record = cast("ResolutionRecord | None", run.resolution)
    if record is None:
        return ["the run holds no resolution test"]
    s = record.summary(run)
    lines = [f"resolution test, {record.label()}: chi2 of the synthetic picks {record.chi2_start:.2f} at the final "
             f"model, {record.chi2:.2f} after {record.iterations} iteration(s) ({record.stop_reason})"]
    if record.iterations == 0:
        lines.append("the pattern changes the picks by less than their noise: the line cannot see it at all")
    if s["cells"]:
        lines.append(f"well-covered cells scored: {s['cells']}; median semblance {s['semblance']:.2f}, median "
                     f"correlation {s['correlation']:.2f}, amplitude recovered {100 * s['amplitude']:.0f} %; "
                     f"{100 * s['resolved_share']:.0f} % resolved (semblance >= {record.threshold:g})")
    else:
        lines.append("no well-covered cell has a score")
    return lines


def plot_resolution(run: Run, path: PathLike) -> Path:
    """Save the resolution figure of a run (true and recovered perturbation, score;
    PNG or PDF by extension)."""
    from ..figures import style
    from ..figures.resolution import resolution_figure

    if run.resolution is None:
        raise InputError("the run holds no resolution test (run 'tomo resolve' first)")
    return style.save(resolution_figure(run), path)
