"""Extremal bounds: how deep and how shallow the picks let a surface lie at one column.

Every member of an ensemble is smoothed the same way, so at a narrow, steep feature (the
bottom of a channel) all of them can miss the truth together. An extremal bound asks
the picks directly, in the spirit of most-squares inversion (Jackson 1976, "Most
squares inversion", J. Geophys. Res. 81, 1027-1030; Meju 1994, Geophysical Data
Analysis, SEG, ch. 5): push the surface at one column as deep (or as shallow) as it goes
while the misfit stays within a tolerance of its minimum. Here a push is an inversion
of the picks from the central model with point constraints holding the surface at the
trial depth below the ground (parallel to it) across one station spacing either side of
that column
(``tomo.tomography.constraints``, the rows boreholes use; a push at one point alone is
met by a pocket narrower than the rays resolve, which bounds nothing),
and the trial depth is stepped out from the central surface (one cell, then doubling)
until the picks refuse it, then bisected. The tolerance is two standard deviations of
chi2 for n picks, 2 sqrt(2/n) (the chi-squared distribution's variance is 2n), above the
central member's chi2: a model within it fits the picks as well as the noise can tell.

A bound is a statement about one column; the band widens around it over a few columns
(``tomo.uncertainty.bands``). It assumes what the inversion does (a smooth 2-D model,
first arrivals); a deeper surface that the smoothing forbids everywhere else is not
explored.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass, field, replace

import numpy as np

from ..analysis.surface import contour_surface
from ..survey.geometry import station_spacing
from ..tomography.constraints import ContourPoints
from ..tomography.inversion import invert

__all__ = ["BoundTask", "ExtremalBound", "bound_columns", "extremal_bound", "compute_bounds", "chi2_tolerance",
           "MAX_STEPS", "BISECTIONS", "BOUND_ITERATIONS"]

#: Doublings of the push before giving up on finding where the picks refuse it.
MAX_STEPS = 5
#: Bisections between the last accepted and the first refused depth.
BISECTIONS = 3
#: Most iterations of one push (it starts from the central model, close to a fit).
BOUND_ITERATIONS = 8


def chi2_tolerance(n_picks):
    """Two standard deviations of the mean chi2 of ``n_picks`` picks: 2 sqrt(2/n)."""
    return 2.0 * math.sqrt(2.0 / max(int(n_picks), 1))


@dataclass
class ExtremalBound:
    """The depths (m below ground) the picks allow for the ``velocity_m_s`` surface at ``x``.

    ``tests`` lists every push as (depth_m, chi2, accepted).
    """

    x: float
    velocity_m_s: float
    central_m: float
    shallow_m: float
    deep_m: float
    chi2_limit: float
    tests: list = field(default_factory=list)
    method: str = "extremal (most-squares) bound"

    def to_dict(self):
        return asdict(self)


@dataclass
class BoundTask:
    """One column and direction to push (plain data for a worker)."""

    picks: object
    mesh: object
    central: object
    settings: object
    velocity_m_s: float
    x: float
    direction: int
    chi2_limit: float
    half_width_m: float = 0.0
    #: boreholes every push honours too (ContourPoints), as the ensemble's members do
    fixed: object = None


def bound_columns(surface, extra_x=()):
    """Columns to bound: the deepest and shallowest constrained points of ``surface``
    (a Surface or SurfaceBand), and any ``extra_x`` (m), as x values."""
    ok = np.asarray(surface.constrained, bool) & np.isfinite(surface.depth_m)
    xs = []
    if np.any(ok):
        depth = np.where(ok, surface.depth_m, np.nan)
        xs += [float(surface.x[np.nanargmax(depth)]), float(surface.x[np.nanargmin(depth)])]
    xs += [float(x) for x in extra_x]
    return list(dict.fromkeys(xs))


def _push_columns(task):
    """The x (m) of the points of a push: every cell within a station spacing of
    ``task.x``. A push narrower than the rays can resolve (a pocket the first arrivals go
    round) tells nothing, and bounds exist only for averages over resolvable widths
    (Oldenburg 1983, "Funnel functions in linear and nonlinear appraisal", J. Geophys.
    Res. 88)."""
    mesh = task.mesh
    k = max(int(round(task.half_width_m / mesh.cell)), 0)
    xs = task.x + mesh.cell * np.arange(-k, k + 1)
    return xs[(xs > mesh.x0) & (xs < mesh.x1)]


def _push(task, depth):
    """chi2 of the picks with the surface held at ``depth`` (m) below the ground at
    every column of :func:`_push_columns`, and whether the surface reached it."""
    mesh = task.mesh
    xs = _push_columns(task)
    ground = mesh.terrain.elevation(xs, extrapolate=True)
    points = ContourPoints(xs, ground - depth, np.full(xs.size, mesh.cell / 4.0),
                           np.full(xs.size, task.velocity_m_s), tuple(f"bound {i}" for i in range(xs.size)))
    if task.fixed is not None and len(task.fixed):
        f = task.fixed
        points = ContourPoints(*(np.concatenate([getattr(f, a), getattr(points, a)])
                                 for a in ("x", "z", "sigma_m", "velocity_m_s")), tuple(f.label) + points.label)
    settings = replace(task.settings, workers=1, max_iterations=BOUND_ITERATIONS)
    run = invert(task.picks, mesh, task.central.velocity, settings, points=points)
    reached = contour_surface(run, task.velocity_m_s).depth_m
    j = int(np.argmin(np.abs(run.x - task.x)))
    held = np.isfinite(reached[j]) and abs(reached[j] - depth) <= mesh.cell / 2.0
    return float(run.chi2), bool(held)


def extremal_bound(task):
    """The extreme depth (m) in ``task.direction`` (+1 deeper, -1 shallower) and the
    pushes tried, as (depth, [(depth, chi2, accepted), ...])."""
    mesh = task.mesh
    j = int(np.argmin(np.abs(np.asarray(task.central.x) - task.x)))
    start = float(contour_surface(task.central, task.velocity_m_s).depth_m[j])
    # every point of the push must lie a cell above the grid's bottom
    deepest = float(np.min(mesh.terrain.elevation(_push_columns(task), extrapolate=True))) - mesh.z_bottom - mesh.cell
    tests, good, bad = [], start, None
    step = mesh.cell
    for _ in range(MAX_STEPS):
        trial = start + task.direction * step
        if trial < mesh.cell / 2.0 or trial > deepest:
            break
        chi2, held = _push(task, trial)
        accepted = held and chi2 <= task.chi2_limit
        tests.append((trial, chi2, accepted))
        if not accepted:
            bad = trial
            break
        good, step = trial, 2.0 * step
    for _ in range(BISECTIONS if bad is not None else 0):
        trial = 0.5 * (good + bad)
        chi2, held = _push(task, trial)
        accepted = held and chi2 <= task.chi2_limit
        tests.append((trial, chi2, accepted))
        good, bad = (trial, bad) if accepted else (good, trial)
    return good, tests


def compute_bounds(central, picks, mesh, settings, velocity_m_s, xs, workers=1, scheduler=None, fixed=None):
    """Extremal bounds of the ``velocity_m_s`` surface at every x in ``xs`` (m), deeper
    and shallower, as tasks on the ensemble's workers; a list of :class:`ExtremalBound`.

    ``central`` is the central member's run (its model is every push's start and its
    chi2 the minimum the tolerance is added to); ``fixed`` are boreholes (ContourPoints)
    every push honours as the members did.
    """
    from .ensemble import run_tasks

    limit = float(central.chi2) + chi2_tolerance(len(picks))
    width = station_spacing(picks)
    tasks = [BoundTask(picks, mesh, central, settings, float(velocity_m_s), float(x), d, limit, width, fixed)
             for x in xs for d in (1, -1)]
    found = {}

    def report(key, result, error):
        found[key] = (result, error)

    run_tasks(extremal_bound, tasks, [f"bound-{k}" for k in range(len(tasks))], report, workers, scheduler)
    def result(k):
        value, _ = found.get(f"bound-{k}", (None, "not run"))
        return (np.nan, []) if value is None else value  # a failed push leaves no bound

    out = []
    for k in range(0, len(tasks), 2):
        deep, deep_tests = result(k)
        shallow, shallow_tests = result(k + 1)
        x = tasks[k].x
        j = int(np.argmin(np.abs(np.asarray(central.x) - x)))
        start = float(contour_surface(central, velocity_m_s).depth_m[j])
        out.append(ExtremalBound(x, float(velocity_m_s), start, float(shallow), float(deep), limit,
                                 sorted(shallow_tests + deep_tests)))
    return out
