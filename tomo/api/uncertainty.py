"""The public API's uncertainty steps: ensembles of inversions and their depth bands."""

from __future__ import annotations

import os
from collections.abc import Callable, Sequence
from pathlib import Path
from typing import Any, Literal

from ..core.errors import InputError
from ..layered.result import LayeredResult
from ..results.run import Run
from ..survey.boreholes import Boreholes
from ..survey.meshspec import MeshSpec
from ..survey.survey import Survey
from .workflow import PathLike, _check_start, _plan, _settings, read_layers

__all__ = ["ensemble", "ensemble_summary"]


def ensemble(survey: Survey, members: int = 32, seed: int = 0, workers: int | None = None,
             scheduler: str | None = None, out: PathLike | None = None, resume: bool = False,
             start: Literal["layered", "gradient"] = "layered", layers: LayeredResult | PathLike | None = None,
             mesh: PathLike | MeshSpec | None = None,
             progress: Callable[[int, int, float, float | None], object] | None = None, *,
             bounds: bool = True, bound_x: Sequence[float] = (), contour_m_s: float | None = None,
             boreholes: PathLike | Boreholes | None = None, **settings: Any) -> Run:
    """An ensemble of inversions of a survey: the range of models the picks allow.

    Members differ in the pick noise, the starting model, the smoothing ratio, the chi2
    target and the placement of the grid (:mod:`tomo.uncertainty.members`); they run as
    Dask tasks (:mod:`tomo.uncertainty.ensemble`). Returns the central member's
    :class:`Run` with ``run.ensemble`` holding every member; ``run.band(v)`` gives the
    depth band of the ``v`` m/s surface.

    Parameters
    ----------
    members : int
        Members, the central one included (at least 2).
    seed : int
        The same seed gives the same ensemble on any number of workers.
    workers : int, optional
        Local worker processes (default: the cores); ignored with ``scheduler``.
    scheduler : str, optional
        Address of a running Dask scheduler (``tcp://host:8786``).
    out : path, optional
        Ensemble file (a run file with an ``/ensemble`` group), rewritten after every
        member, so an interrupted ensemble keeps what it finished.
    resume : bool
        Complete the ensemble in ``out`` instead of starting again.
    progress : callable, optional
        ``progress(done, total, elapsed_s, left_s)`` after every member.
    bounds : bool
        Also push the surface as deep and as shallow as the picks allow at its deepest and
        shallowest points and at ``bound_x`` (extremal bounds,
        :mod:`tomo.uncertainty.bounds`); they widen the band there.
    bound_x : sequence of float
        More columns to bound, m along the line.
    contour_m_s : float, optional
        Velocity of the bounded surface (default: the layered refractor's contour), and
        of the surface the boreholes lie on.
    boreholes : path or Boreholes, optional
        Boreholes every member (and every extremal push) honours, as :func:`invert` does
        (point constraints beside the picks): the band is then conditional on them, and
        the layered start is tied to them.
    start, layers, mesh, **settings
        As for :func:`invert`.
    """
    from ..tomography.starting import fit_gradient
    from ..uncertainty.ensemble import EnsembleSettings, run_ensemble
    from ..uncertainty.record import member_results, record_of

    opts = _settings(settings)
    smoothing = _check_start(start, layers, None, None)
    ens = EnsembleSettings(members=members, seed=seed).check()
    layered: LayeredResult | None = None
    if layers is not None:
        layered = layers if isinstance(layers, LayeredResult) else read_layers(layers, survey)
    resumed = _resumed(out, ens, survey) if resume else None  # before any work on the grid
    terrain, notes = survey.ground()
    # the grid, its depth and the layered start exactly as tomo invert chooses them, so
    # the central member is the run tomo invert would make (the depth from the starting
    # model's rays; boreholes placed and the start tied to them)
    grid, spec, _, start_layers, _, _, placed, plan = _plan(survey, terrain, mesh, start, layered, None, smoothing,
                                                            notes, opts, None, boreholes,
                                                            None if boreholes is None else contour_m_s)
    workers = workers or os.cpu_count() or 1
    _check_memory(plan.estimate, 1 if scheduler else min(workers, members - 1), survey.picks_path)
    layered = LayeredResult.from_dict(start_layers) if isinstance(start_layers, dict) else start_layers
    points, extra_boreholes = _borehole_points(survey, grid, terrain, layered, placed, contour_m_s)
    fit = fit_gradient(survey.picks)
    extra = {"start": "layered" if layered is not None else "gradient", "mesh_spec": spec.as_dict(),
             "picks_file": survey.picks_path, "terrain_file": survey.terrain_path,
             **extra_boreholes}
    if resumed is not None:
        _check_same_setup(resumed, out, grid, extra)
    done, central = (), resumed

    def keep(result: Any) -> Run:
        run = Run.from_data(result.central)
        run.settings = {**extra, **run.settings}
        run.notes = list(dict.fromkeys(list(survey.notices) + notes + list(run.notes)))
        run.stations, run.ensemble, run.boreholes = survey.stations, record_of(result), placed
        if layered is not None and start == "layered":
            run.layered = layered.to_dict()
        if out is not None:
            run.write(out)
        return run

    result = run_ensemble(survey.picks, grid, opts, ens, layered if start == "layered" else None,
                          (fit["v0_m_s"], fit["k_per_s"]), smoothing, workers, scheduler,
                          done=member_results(central.ensemble) if central is not None else done,
                          central=central, progress=progress, on_member=keep, points=points)
    run = keep(result)
    if bounds or bound_x:
        run = _with_bounds(run, result, survey, grid, opts, contour_m_s, bound_x, workers, scheduler, points)
        if out is not None:
            run.write(out)
    return run


def _check_memory(estimate: Any, concurrent: int, picks_path: str | None) -> None:
    """Refuse an ensemble whose members, ``concurrent`` at a time on this machine, would
    not fit in the memory available (each member's peak taken as one inversion's)."""
    if estimate.available_bytes is None or concurrent <= 1:
        return  # one at a time: the planning of the grid has checked it already
    from ..tomography.budget import USABLE_SHARE

    need = concurrent * estimate.memory_bytes
    if need > USABLE_SHARE * estimate.available_bytes:
        raise InputError(f"{concurrent} members at a time would need about {need / 1e9:.1f} GB of memory, "
                         f"{estimate.available_bytes / 1e9:.1f} GB is available: use fewer --workers "
                         "or larger model cells", path=picks_path, field="--workers")


def _borehole_points(survey: Survey, grid: Any, terrain: Any, layered: LayeredResult | None,
                     placed: Boreholes | None, contour_m_s: float | None) -> tuple[Any, dict[str, Any]]:
    """The contour points of the boreholes every member honours and the run's settings
    about them; (None, {}) without boreholes."""
    if placed is None:
        return None, {}
    from ..tomography.borehole_runs import contour_points

    points = contour_points(placed, grid, survey.picks, layered, terrain, contour_m_s).check(grid)
    return points, {"boreholes_file": placed.path, "borehole_contours_m_s": [float(v) for v in points.velocity_m_s]}


def _with_bounds(run: Run, result: Any, survey: Survey, grid: Any, opts: Any, contour_m_s: float | None,
                 bound_x: Sequence[float], workers: int, scheduler: str | None, points: Any = None) -> Run:
    """``run`` with extremal bounds of its surface (:mod:`tomo.uncertainty.bounds`)."""
    from ..analysis.surface import check_contour
    from ..uncertainty.bands import default_band_contour
    from ..uncertainty.bounds import bound_columns, compute_bounds

    value = check_contour(run, default_band_contour(run) if contour_m_s is None else contour_m_s)
    xs = bound_columns(run.band(value), bound_x)
    found = compute_bounds(result.central, survey.picks, grid, opts, value, xs, workers, scheduler, points)
    record: Any = run.ensemble
    record.bounds = [b.to_dict() for b in found]
    return run


def _resumed(out: PathLike | None, ens: Any, survey: Survey) -> Run:
    """The finished members of the ensemble file ``out``, checked against this request."""
    from ..analysis.digest import picks_digest

    if out is None or not Path(out).exists():
        raise InputError("--resume needs the ensemble file of the interrupted run", path=out, field="--resume")
    run = Run.read(out)
    record: Any = run.ensemble
    if record is None:
        raise InputError("not an ensemble file (no /ensemble group)", path=out)
    if (record.settings.members, record.settings.seed) != (ens.members, ens.seed):
        raise InputError(f"the file holds an ensemble of {record.settings.members} members with seed "
                         f"{record.settings.seed}; resume it with the same --members and --seed", path=out)
    if picks_digest(run.picks) != picks_digest(_picks_table(survey)):
        raise InputError("the ensemble file holds other picks than these (tomo ensemble --resume completes an "
                         "ensemble of the same picks)", path=out)
    return run


def _check_same_setup(run: Run, out: PathLike | None, grid: Any, extra: dict[str, Any]) -> None:
    """Refuse to complete an ensemble whose members were made on another grid or with
    other boreholes than this request's: the band would mix members of two ensembles."""
    import json

    import numpy as np

    def same(key: str) -> bool:
        def text(v: Any) -> str:
            return json.dumps(v, sort_keys=True, default=str)
        return text(run.settings.get(key)) == text(extra.get(key))

    for key, what in (("mesh_spec", "grid"), ("boreholes_file", "boreholes"),
                      ("borehole_contours_m_s", "borehole contour velocities")):
        if not same(key):
            raise InputError(f"the ensemble file's members were made with other {what} than this request's "
                             f"({run.settings.get(key)!r} against {extra.get(key)!r}); resume with the same options "
                             "or start a new ensemble", path=out, field="--resume")
    if np.shape(run.velocity) != (grid.nz, grid.nx):
        raise InputError(f"the ensemble file's grid has {np.shape(run.velocity)} cells, this request's "
                         f"{(grid.nz, grid.nx)}; start a new ensemble", path=out, field="--resume")


def _picks_table(survey: Survey) -> dict[str, Any]:
    """The survey's picks as a run file stores them (ms), to compare digests."""
    import numpy as np

    p = survey.picks
    sigma = p.sigma_s if p.sigma_s is not None else np.full(len(p), np.nan)
    return {"source_x": p.source_x, "source_z": p.source_z, "receiver_x": p.receiver_x, "receiver_z": p.receiver_z,
            "observed_ms": np.asarray(p.time_s, float) * 1e3, "sigma_ms": np.asarray(sigma, float) * 1e3}


def ensemble_summary(run: Run, contour_m_s: float | None = None) -> list[str]:
    """Lines saying what an ensemble holds: members kept, rejected and failed, and the
    band of the ``contour_m_s`` surface (default: the layered result's deepest refractor)."""
    from ..results.ensemble_text import describe_ensemble

    return describe_ensemble(run, contour_m_s)
