"""Travel-time tomography: regularised Gauss-Newton updates to the noise level.

Each iteration linearises the travel times about the current model with the ray
matrix G (``tomo.rays``) and solves, with ``scipy.sparse.linalg.lsmr`` (Fong & Saunders
2011, SIAM J. Sci. Comput. 33) or ``lsqr`` (Paige & Saunders 1982, ACM TOMS 8), the
damped least-squares problem for the update u of the model parameters m::

    minimise  || W (r - J u) ||^2 + lam^2 ( || R (m + u - m0) ||^2 + beta^2 || m + u - m_ref ||^2 )

r = observed - computed times (s), W = diag(1/sigma), J = G ds/dm the Jacobian in the
chosen parameter (slowness s, or log-velocity with ds/dlog v = -s), R the stacked first
differences across cells (horizontal rows weighted by ``smooth_x``, vertical rows by
``smooth_z``), m0 the starting model and m_ref the reference model of the damping term
(the starting model unless given). Regularising the departure from the starting model
keeps what the data do not constrain at the starting model.

The regularisation weight lam starts from the ratio of the Frobenius norms of W J and R
(times ``lambda_start``, then calibrated by a few short solves so that the linearised
chi2 does not promise a fall below ``max_reduction`` times the current one) and is
multiplied by ``lambda_cooling`` each iteration while the misfit is above target (up to
three more times while the linear prediction stays well above that aim). Within
``HOLD_BELOW`` times the target it is held for one iteration when the prediction
undershoots the aim; it is held after a step the line search had to cut below a
half, as in Levenberg-Marquardt damping; if no step along the update reduces chi2,
the update is solved once more with lam lowered by ``lambda_cooling``^2 before the
run stops. This is the discrepancy principle as used in Occam's inversion (Constable,
Parker & Constable 1987, Geophysics 52, 289-300): stop at the smoothest model that
fits the picks to their uncertainty, chi2 = mean((r / sigma)^2) = 1.

Step control: the step along u is accepted only if the true (non-linear) chi2 falls;
otherwise it is halved (a backtracking line search; Nocedal & Wright 2006, Numerical
Optimization, sec. 3.1). A step that would overshoot the target (chi2 below
``chi2_target - chi2_tolerance``) is shortened by linear interpolation towards the
target, so the picks are not overfitted. Parameters are clipped to the velocity bounds
after every update (projection; common practice).

Pick uncertainties come from the pick file's sigma_ms; where it has none, every pick
gets ``default_sigma_ms`` (1 ms: pick errors of 0.5-2 ms are usual, common practice) and
the run file's notes say so.

Stops: chi2 at target (within ``chi2_tolerance``), too little improvement (relative
drop of chi2 below ``min_improvement`` twice running, or no step that reduces it), or
the maximum number of iterations; ``RunData.stop_reason`` says which.
"""

from __future__ import annotations

import json
import math
import mmap
import time as _time
from dataclasses import asdict, dataclass, field, fields, replace

import numpy as np
import scipy.sparse as sp
from scipy.sparse.linalg import lsmr, lsqr

from ..core.errors import InputError, SolverError
from ..core.version import __version__
from .forward import DEFAULT_SOURCE_RADIUS, _map, node_speed, sample_field, solve_field
from .rays import BOOKINGS, DEFAULT_BOOKING, DEFAULT_STEP, time_gradient, trace_many
from .run import RunData

__all__ = ["InversionSettings", "IterationInfo", "InversionInterrupted", "invert",
           "forward_pass", "trace_pass", "PassResult", "smoothness_operator", "MIN_PICKS",
           "MAX_CELLS_PER_PICK"]

#: Fewer picks than this cannot support a tomogram (use the layered interpretation).
MIN_PICKS = 20
#: More ground cells per pick than this is a mesh far too fine for the data.
MAX_CELLS_PER_PICK = 100.0

#: lam is held for an iteration only while chi2 is below this many times the target:
#: further up, holding cost iterations for little gain (benchmarks/invert.py line (b):
#: at target in 18 iterations with this limit, in 20 without)
HOLD_BELOW = 3.0

STOP_TARGET = "chi2 at target"
STOP_STALLED = "too little improvement"
STOP_NO_STEP = "too little improvement (no step reduced the misfit)"
STOP_MAX = "maximum iterations"


@dataclass(frozen=True)
class InversionSettings:
    """Every setting of an inversion (recorded in the run file so a run can be repeated).

    Attributes
    ----------
    max_iterations : int
        Most Gauss-Newton iterations.
    chi2_target : float
        Target of chi2 = mean((residual / sigma)^2); 1 fits the picks to their noise.
    chi2_tolerance : float
        Stop once chi2 <= target + tolerance; a step is shortened if it would take chi2
        below target - tolerance. 0.1 by default: stopping at 1.2 leaves the model
        smoother than the noise asks for (the discrepancy principle aims at 1), while
        the noise alone scatters chi2 of n picks by sqrt(2 / n) (0.1 for 200 picks,
        0.03 for 2,000; chi-squared distribution), so a closer stop means little.
    min_improvement : float
        Relative drop of chi2 per iteration below which an iteration counts as stalled;
        two stalled iterations running stop the run.
    default_sigma_ms : float
        Pick uncertainty used when the pick file gives none, ms (pick errors of
        0.5-2 ms are usual: common practice).
    parameter : {"logv", "slowness"}
        Model parameter of the linearised problem: log-velocity (default; scale-free
        smoothing from 300 to 5000 m/s) or slowness.
    smooth_x, smooth_z : float
        Weights of the horizontal and vertical first-difference rows of R. Defaults
        0.5 and 0.2 (common practice: layered ground is smoothed more along the line
        than in depth, but a bedrock surface still varies over a few station
        spacings); with smooth_x = 1 the horizontal smoothing rounded a 4 m trough
        under 8 m of cover by 10 % of its depth and pushed the flat shoulders beside it
        10-15 % too deep (tests/test_inversion.py, measured over noise seeds 1-6).
    damping : float
        beta, weight of the damping toward the reference model relative to smoothing.
    lambda_start : float
        Starting regularisation weight relative to ||W J||_F / ||R||_F.
    lambda_cooling : float
        Factor applied to lam each iteration (0 < c <= 1); applied up to three more
        times in one iteration while the linearised chi2 stays above 1.5 times the
        aim (see ``max_reduction``).
    max_reduction : float
        The weight is held (not lowered) when the linearised prediction of chi2 falls
        below max(chi2_target, max_reduction x current chi2): a Gauss-Newton step on
        travel times is trusted only that far (common practice).
    v_min_m_s, v_max_m_s : float or None
        Velocity bounds, m/s; None chooses them from the starting model
        (min(150, start min / 2), max(7000, 2 x start max)).
    solver : {"lsmr", "lsqr"}
    solver_iterations : int
        Iteration limit of the sparse least-squares solver.
    solver_tol : float
        ``atol`` = ``btol`` of the sparse solver.
    line_search_steps : int
        Most step halvings per iteration.
    workers : int
        Processes for the forward solves and ray tracing (1: in this process).
    order : {1, 2}
        Fast-marching order.
    source_radius : float
        Exactly-timed start radius around each source, node spacings.
    ray_step : float or None
        Ray-tracing step, node spacings (None: one model cell).
    ray_booking : {"nearest", "bilinear"}
        How ray lengths are shared among forward nodes (``tomo.rays.DEFAULT_BOOKING``).
    reciprocity : bool
        Solve fields from the geophones when there are fewer geophones than shots.
    """

    max_iterations: int = 20
    chi2_target: float = 1.0
    chi2_tolerance: float = 0.1
    min_improvement: float = 0.02
    default_sigma_ms: float = 1.0
    parameter: str = "logv"
    smooth_x: float = 0.5
    smooth_z: float = 0.2
    damping: float = 0.05
    lambda_start: float = 1.0
    lambda_cooling: float = 0.5
    max_reduction: float = 0.3
    v_min_m_s: float | None = None
    v_max_m_s: float | None = None
    solver: str = "lsmr"
    solver_iterations: int = 100
    solver_tol: float = 1e-4
    line_search_steps: int = 3
    workers: int = 2
    order: int = 2
    source_radius: float = DEFAULT_SOURCE_RADIUS
    ray_step: float | None = DEFAULT_STEP
    ray_booking: str = DEFAULT_BOOKING
    reciprocity: bool = True

    def check(self):
        """Raise InputError naming the setting when a value is out of range."""
        def bad(name, message):
            raise InputError(f"setting {name} = {getattr(self, name)!r}: {message}", field=name)
        if int(self.max_iterations) < 0:
            bad("max_iterations", "must be >= 0")
        for name in ("chi2_target", "default_sigma_ms", "lambda_start"):
            if not (math.isfinite(getattr(self, name)) and getattr(self, name) > 0):
                bad(name, "must be positive")
        for name in ("chi2_tolerance", "min_improvement", "smooth_x", "smooth_z", "damping"):
            if not (math.isfinite(getattr(self, name)) and getattr(self, name) >= 0):
                bad(name, "must be >= 0")
        if self.smooth_x == 0 and self.smooth_z == 0 and self.damping == 0:
            bad("damping", "smoothing and damping are all zero: the problem has no regularisation")
        if not 0 < self.max_reduction < 1:
            bad("max_reduction", "must be in (0, 1)")
        if not 0 < self.lambda_cooling <= 1:
            bad("lambda_cooling", "must be in (0, 1]")
        if self.parameter not in ("logv", "slowness"):
            bad("parameter", "expected 'logv' or 'slowness'")
        if self.solver not in ("lsmr", "lsqr"):
            bad("solver", "expected 'lsmr' or 'lsqr'")
        if self.order not in (1, 2):
            bad("order", "expected 1 or 2")
        if self.ray_booking not in BOOKINGS:
            bad("ray_booking", f"expected one of {', '.join(BOOKINGS)}")
        if self.ray_step is not None and not self.ray_step > 0:
            bad("ray_step", "must be positive")
        for name in ("v_min_m_s", "v_max_m_s"):
            v = getattr(self, name)
            if v is not None and not (math.isfinite(v) and v > 0):
                bad(name, "must be a positive velocity")
        if self.v_min_m_s is not None and self.v_max_m_s is not None and self.v_min_m_s >= self.v_max_m_s:
            bad("v_min_m_s", f"must be below v_max_m_s = {self.v_max_m_s:g}")
        return self

    def as_dict(self):
        return asdict(self)

    @classmethod
    def from_dict(cls, values):
        """Settings from a dict (e.g. a run file's); unknown keys are an InputError."""
        names = {f.name for f in fields(cls)}
        unknown = set(values) - names
        if unknown:
            raise InputError(f"unknown setting (expected one of {', '.join(sorted(names))})", field=sorted(unknown)[0])
        return cls(**values)


@dataclass
class IterationInfo:
    """Progress of one iteration (entry 0 is the starting model); ``str()`` is the line."""

    iteration: int
    max_iterations: int
    chi2: float
    rms_ms: float
    lam: float
    step: float
    elapsed_s: float
    left_s: float | None
    timing: dict = field(default_factory=dict)

    def __str__(self):
        lam = "-" if not math.isfinite(self.lam) else f"{self.lam:.3g}"
        left = "" if self.left_s is None else f", about {_duration(self.left_s)} left at most"
        head = "start" if self.iteration == 0 else f"iteration {self.iteration}/{self.max_iterations}"
        return (f"{head}: chi2 {self.chi2:.3f}, RMS {self.rms_ms:.3f} ms, lambda {lam}, "
                f"step {self.step:.2f}, {_duration(self.elapsed_s)} elapsed{left}")


def _duration(seconds):
    seconds = max(float(seconds), 0.0)
    if seconds < 90:
        return f"{seconds:.0f} s"
    return f"{seconds / 60:.1f} min"


class InversionInterrupted(KeyboardInterrupt):
    """Raised when an inversion is interrupted (Ctrl-C); ``run`` is the last finished
    iteration (also given to the checkpoint when there is one), ``message`` says so."""

    def __init__(self, message, run=None, checkpoint=None):
        super().__init__(message)
        self.message = message
        self.run = run
        self.checkpoint = checkpoint


# --- forward solves and rays, in worker processes --------------------------------------

_STATE = {}


@dataclass
class PassResult:
    """Computed times (s), the ray matrix (picks x cells, m) and timings of one pass.

    ``matrix`` is None while the rays are pending (``forward_pass(..., rays=False)``);
    ``trace_pass`` traces them from the kept time fields.
    """

    time_s: np.ndarray
    matrix: sp.csr_matrix | None
    forward_s: float
    rays_s: float
    wall_s: float
    fallbacks: list
    unfinished: int
    pending: dict | None = field(default=None, repr=False)


def _field_chunk(chunk):
    """Solve the fields of a chunk of origins: times at the targets; each time field
    goes into the pass's field array (shared with the parent) for ``_ray_chunk``."""
    mesh, slowness, speed, origins, groups, targets, opts, kept = (
        _STATE[k] for k in ("mesh", "slowness", "speed", "origins", "groups", "targets", "opts", "fields"))
    t0 = _time.perf_counter()
    fields_ = [solve_field(mesh, slowness, origins[k, 0], origins[k, 1], order=opts["order"],
                           source_radius=opts["source_radius"], speed=speed) for k in chunk]
    rows = np.concatenate([groups[k] for k in chunk])
    times = np.concatenate([sample_field(mesh, f, targets[groups[k], 0], targets[groups[k], 1])
                            for f, k in zip(fields_, chunk)])
    for f, k in zip(fields_, chunk):
        kept[k] = f.time
    pending = {"origins": list(chunk), "rows": rows, "starts": targets[rows],
               "which": np.concatenate([np.full(groups[k].size, n) for n, k in enumerate(chunk)]),
               "sources": np.array([f.source for f in fields_]), "radii": np.array([f.radius for f in fields_])}
    fallbacks = [f.source for f in fields_ if f.fallback]
    return rows, times, pending, _time.perf_counter() - t0, fallbacks


def _shared_array(shape, dtype, shared):
    """An array that forked workers write into and the parent reads (an anonymous
    shared memory map), or a plain one when everything runs in this process."""
    if not shared:
        return np.empty(shape, dtype)
    size = int(np.prod(shape)) * np.dtype(dtype).itemsize
    return np.frombuffer(mmap.mmap(-1, max(size, 1)), dtype, count=int(np.prod(shape))).reshape(shape)


def _ray_chunk(index):
    """Trace the rays of one chunk of a pass from its kept time fields; sparse rows."""
    mesh, part, opts = _STATE["mesh"], _STATE["pending"]["chunks"][index], _STATE["opts"]
    t0 = _time.perf_counter()
    kept = _STATE["pending"]["fields"]
    grad = np.empty((len(part["origins"]),) + mesh.node_shape, np.complex64)
    for g, k in zip(grad, part["origins"]):
        g.real, g.imag = time_gradient(mesh, kept[k])
    rays = trace_many(mesh, grad, part["sources"], part["radii"], part["starts"], part["which"],
                      step=opts["ray_step"], ground_only=True, booking=opts["ray_booking"])
    return part["rows"], rays.matrix, _time.perf_counter() - t0, rays.unfinished


def _pass_options(settings):
    return {"order": settings.order, "source_radius": settings.source_radius,
            "ray_step": settings.ray_step, "ray_booking": settings.ray_booking}


def forward_pass(mesh, cell_slowness, picks, settings=None, rays=True):
    """Computed times and the ray matrix for a cell slowness model (s/m, (nz, nx)).

    The matrix has one row per pick and one column per *ground* cell (in row-major
    order of ``mesh.ground``): path length in m. With ``rays=False`` only the times
    are computed and the time fields kept (in memory shared with the workers), so that
    a trial model the line search rejects costs no ray tracing; ``trace_pass`` then
    traces the rays of one it keeps.

    Fields are solved from the shots (or from the geophones when there are fewer of
    them and ``settings.reciprocity``), in ``settings.workers`` forked processes.
    """
    settings = settings or InversionSettings()
    t_start = _time.perf_counter()
    slowness = mesh.cells_to_nodes(np.where(mesh.ground, cell_slowness, 0.0))
    src, src_index = picks.sources()
    rec, rec_index = picks.receivers()
    if settings.reciprocity and len(rec) < len(src):
        origins, origin_index, targets = rec, rec_index, np.column_stack([picks.source_x, picks.source_z])
    else:
        origins, origin_index, targets = src, src_index, np.column_stack([picks.receiver_x, picks.receiver_z])
    groups = [np.flatnonzero(origin_index == k) for k in range(len(origins))]
    workers = max(1, min(int(settings.workers), len(origins)))
    # chunks of several origins: tracing many rays at once amortises numpy overhead,
    # while a few chunks per worker balance the load
    n_chunks = min(len(origins), max(1, workers * 2)) if workers > 1 else 1
    order = np.argsort([-g.size for g in groups])  # big groups first
    chunks = [sorted(order[k::n_chunks].tolist()) for k in range(n_chunks)]
    kept = _shared_array((len(origins),) + mesh.node_shape, np.float64, workers > 1)
    _STATE.update(mesh=mesh, slowness=slowness, speed=node_speed(mesh, slowness), origins=origins, groups=groups,
                  targets=targets, opts=_pass_options(settings), fields=kept)
    try:
        parts = list(_map(_field_chunk, chunks, workers))
    finally:
        _STATE.clear()
    times = np.empty(len(picks))
    for rows, t, *_ in parts:
        times[rows] = t
    if not np.all(np.isfinite(times)):
        raise SolverError("some stations were not reached by the wavefront (isolated by the air mask?)")
    result = PassResult(times, None, sum(p[3] for p in parts), 0.0, _time.perf_counter() - t_start,
                        [fb for p in parts for fb in p[4]], 0, {"fields": kept, "chunks": [p[2] for p in parts]})
    if rays:
        trace_pass(mesh, result, settings)
    return result


def trace_pass(mesh, result, settings=None):
    """Trace the pending rays of a ``forward_pass(..., rays=False)`` result in place.

    Sets ``result.matrix`` and adds the ray-tracing time to ``rays_s`` and ``wall_s``;
    returns the seconds (CPU summed over workers, wall) this call took.
    """
    if result.pending is None:
        return 0.0, 0.0
    settings = settings or InversionSettings()
    t_start = _time.perf_counter()
    pending = result.pending
    workers = max(1, min(int(settings.workers), len(pending["chunks"])))
    _STATE.update(mesh=mesh, pending=pending, opts=_pass_options(settings))
    try:
        parts = list(_map(_ray_chunk, range(len(pending["chunks"])), workers))
    finally:
        _STATE.clear()
    n = len(result.time_s)
    perm = np.concatenate([p[0] for p in parts])
    inverse = np.empty(n, int)
    inverse[perm] = np.arange(n)
    result.matrix = sp.vstack([p[1] for p in parts]).tocsr()[inverse]
    result.unfinished = sum(p[3] for p in parts)
    result.pending = None
    rays_s, wall_s = sum(p[2] for p in parts), _time.perf_counter() - t_start
    result.rays_s += rays_s
    result.wall_s += wall_s
    return rays_s, wall_s


# --- regularisation -----------------------------------------------------------------

def smoothness_operator(mesh, smooth_x=1.0, smooth_z=1.0):
    """Stacked first differences between neighbouring ground cells.

    Returns a sparse matrix over the ground cells (in row-major order of
    ``mesh.ground``): horizontal rows weighted by ``smooth_x``, vertical rows by
    ``smooth_z``. Differences are per cell (dimensionless), so the weight of a
    roughness does not depend on the cell size.
    """
    ground = mesh.ground
    index = np.full(ground.shape, -1)
    index[ground] = np.arange(int(ground.sum()))
    n = int(ground.sum())
    blocks = []
    for weight, a, b in ((smooth_x, index[:, :-1], index[:, 1:]), (smooth_z, index[:-1, :], index[1:, :])):
        if weight <= 0:
            continue
        ok = (a >= 0) & (b >= 0)
        a, b = a[ok], b[ok]
        m = a.size
        rows = np.repeat(np.arange(m), 2)
        cols = np.column_stack([a, b]).ravel()
        vals = np.tile([-weight, weight], m)
        blocks.append(sp.csr_matrix((vals, (rows, cols)), shape=(m, n)))
    if not blocks:
        return sp.csr_matrix((0, n))
    return sp.vstack(blocks).tocsr()


# --- the inversion ------------------------------------------------------------------

def _to_param(velocity, parameter):
    return np.log(velocity) if parameter == "logv" else 1.0 / velocity


def _to_velocity(m, parameter):
    return np.exp(m) if parameter == "logv" else 1.0 / m


def _bounds_in_param(v_min, v_max, parameter):
    if parameter == "logv":
        return math.log(v_min), math.log(v_max)
    return 1.0 / v_max, 1.0 / v_min


def _check_inputs(picks, mesh, start_velocity, settings):
    n = len(picks)
    if picks.time_s is None:
        raise InputError("the picks have no times (a layout file?); the inversion needs first-arrival times",
                         path=picks.path, field="time_ms")
    n_src = len(picks.sources()[0])
    if n < MIN_PICKS or n_src < 2:
        raise InputError(f"too few picks for a tomogram: {n} picks from {n_src} shot(s); at least "
                         f"{MIN_PICKS} picks from 2 or more shots are needed (use 'tomo layers' for so few)",
                         path=picks.path)
    n_cells = int(mesh.ground.sum())
    if n_cells > MAX_CELLS_PER_PICK * n:
        raise InputError(f"too few picks for the mesh: {n} picks for {n_cells} ground cells (more than "
                         f"{MAX_CELLS_PER_PICK:g} cells per pick); use larger cells (mesh cell_m, now {mesh.cell:g} m)",
                         path=picks.path)
    xs = np.concatenate([picks.source_x, picks.receiver_x])
    zs = np.concatenate([picks.source_z, picks.receiver_z])
    bad = ~mesh.contains(xs, zs)
    if np.any(bad):
        k = int(np.flatnonzero(bad)[0])
        role = "shot" if k < n else "geophone"
        line = None if picks.line is None else int(picks.line[k % n])
        raise InputError(f"the mesh does not cover the {role} at x = {xs[k]:g} m, z = {zs[k]:g} m "
                         f"(mesh: {mesh.describe()})", path=picks.path, line=line)
    v = np.asarray(start_velocity, float)
    if v.shape != mesh.shape:
        raise InputError(f"starting model has shape {v.shape}, expected the mesh's {mesh.shape}")
    vg = v[mesh.ground]
    if not np.all(np.isfinite(vg)) or np.any(vg <= 0):
        raise InputError("starting model has a non-finite or non-positive velocity in the ground")
    v_lo, v_hi = float(vg.min()), float(vg.max())
    v_min = settings.v_min_m_s if settings.v_min_m_s is not None else min(150.0, 0.5 * v_lo)
    v_max = settings.v_max_m_s if settings.v_max_m_s is not None else max(7000.0, 2.0 * v_hi)
    if v_min >= v_max:
        raise InputError(f"velocity bounds {v_min:g} to {v_max:g} m/s are empty", field="v_min_m_s")
    if v_lo < v_min * (1 - 1e-9) or v_hi > v_max * (1 + 1e-9):
        raise InputError(f"velocity bounds {v_min:g} to {v_max:g} m/s exclude the starting model "
                         f"(its velocities span {v_lo:.0f} to {v_hi:.0f} m/s)",
                         field="v_min_m_s" if v_lo < v_min else "v_max_m_s")
    return v_min, v_max


def invert(picks, mesh, start_velocity, settings=None, progress=None, checkpoint=None, layered=None,
           notes=None, extra_settings=None, reference_velocity=None):
    """Invert first-arrival picks for a gridded velocity model (see module docstring).

    Parameters
    ----------
    picks : Picks
        Observed times (s) and uncertainties (s; ``settings.default_sigma_ms`` where
        absent).
    mesh : Mesh
        Model grid (the unknowns) and forward grid.
    start_velocity : ndarray (nz, nx)
        Starting model, m/s (NaN or anything in the air).
    settings : InversionSettings, optional
    progress : callable, optional
        Called with an :class:`IterationInfo` after the starting model and after each
        finished iteration (``str(info)`` is a one-line summary). An exception raised
        in it stops the run; KeyboardInterrupt becomes :class:`InversionInterrupted`.
    checkpoint : callable, optional
        Called with the :class:`RunData` of the starting model and of every finished
        iteration, and of the last one again when the run is interrupted (e.g.
        :class:`tomo.results.runfile.RunWriter`, which rewrites a run file atomically).
    layered : dict, optional
        Layered interpretation used for the start, stored in the run file.
    notes : list of str, optional
        Notes stored in the run file.
    extra_settings : dict, optional
        More entries for the recorded settings (start kind, mesh spec, files).
    reference_velocity : ndarray (nz, nx), optional
        Reference model of the damping term, m/s (default: the starting model).

    Returns
    -------
    RunData
    """
    settings = (settings or InversionSettings()).check()
    v_min, v_max = _check_inputs(picks, mesh, start_velocity, settings)
    notes = list(notes or [])
    par = settings.parameter
    ground = mesh.ground
    gidx = np.flatnonzero(ground.ravel())
    start = np.where(ground, np.asarray(start_velocity, float), np.nan)
    if reference_velocity is None:
        ref_v = start
    else:
        ref_v = np.asarray(reference_velocity, float)
        if ref_v.shape != mesh.shape or not np.all(np.isfinite(ref_v[ground])) or np.any(ref_v[ground] <= 0):
            raise InputError("reference model must be positive and finite in the ground, shaped like the mesh")
    lo, hi = _bounds_in_param(v_min, v_max, par)
    m0 = _to_param(start[ground], par)
    m_ref = np.clip(_to_param(ref_v[ground], par), lo, hi)
    if picks.sigma_s is None:
        sigma = np.full(len(picks), settings.default_sigma_ms * 1e-3)
        notes.append(f"the picks give no uncertainties: sigma = {settings.default_sigma_ms:g} ms assumed for every pick")
    else:
        sigma = np.asarray(picks.sigma_s, float)
    observed = np.asarray(picks.time_s, float)
    weight = 1.0 / sigma
    R = smoothness_operator(mesh, settings.smooth_x, settings.smooth_z)
    n_par = gidx.size
    recorded = settings.as_dict()
    recorded.update(v_min_m_s_used=v_min, v_max_m_s_used=v_max, sigma_default_used=picks.sigma_s is None)
    recorded.update(extra_settings or {})

    def velocity_grid(m):
        v = np.full(mesh.shape, np.nan)
        v[ground] = _to_velocity(m, par)
        return v

    def evaluate(m, rays=False):
        # the rays of a trial wait until the line search keeps it (trace below)
        v = velocity_grid(m)
        res = forward_pass(mesh, np.where(ground, 1.0 / v, 0.0), picks, settings, rays=rays)
        r = observed - res.time_s
        chi2 = float(np.mean((r * weight) ** 2))
        return res, r, chi2

    timing = {"forward_s": 0.0, "rays_s": 0.0, "solve_s": 0.0, "passes": 0, "pass_wall_s": 0.0}
    t_begin = _time.perf_counter()

    def account(res):
        timing["forward_s"] += res.forward_s
        timing["rays_s"] += res.rays_s
        timing["pass_wall_s"] += res.wall_s
        timing["passes"] += 1

    def trace(res):
        rays_s, wall_s = trace_pass(mesh, res, settings)
        timing["rays_s"] += rays_s
        timing["pass_wall_s"] += wall_s

    res, r, chi2 = evaluate(m0, rays=True)
    account(res)
    m = m0.copy()
    history = {"chi2": [chi2], "rms_ms": [_rms_ms(r)], "lambda": [float("nan")], "step": [0.0]}
    models = []
    state = {"run": None}

    def snapshot(stop_reason="", converged=False):
        cov = np.zeros(mesh.shape)
        cov[ground] = np.asarray(res.matrix.sum(axis=0)).ravel()
        run = RunData(
            x=mesh.x.copy(), z=mesh.z.copy(), velocity=velocity_grid(m), coverage=np.where(ground, cov, 0.0),
            start_velocity=start.copy(), terrain_x=mesh.terrain.x.copy(), terrain_z=mesh.terrain.z.copy(),
            picks={"source_x": picks.source_x.copy(), "source_z": picks.source_z.copy(),
                   "receiver_x": picks.receiver_x.copy(), "receiver_z": picks.receiver_z.copy(),
                   "observed_ms": observed * 1e3, "computed_ms": res.time_s * 1e3, "sigma_ms": sigma * 1e3},
            history={k: np.array(v, float) for k, v in history.items()},
            iteration_models=list(models), chi2=history["chi2"][-1], rms_ms=history["rms_ms"][-1],
            iterations=len(models), converged=bool(converged), stop_reason=stop_reason,
            settings=json.loads(json.dumps(recorded, default=_plain)), mesh=mesh.as_dict(),
            layered=layered, notes=list(notes), tomo_version=__version__,
        )
        if res.fallbacks:
            run.notes.append(f"{len(res.fallbacks)} field(s) solved at first order after a second-order failure")
        if res.unfinished:
            run.notes.append(f"{res.unfinished} ray(s) did not reach their source and were closed straight")
        state["run"] = run
        if checkpoint is not None:
            checkpoint(run)
        return run

    def report(k, lam, step, t_iter):
        if progress is None:
            return
        elapsed = _time.perf_counter() - t_begin
        left = None
        if k > 0 and k < settings.max_iterations:
            per = (elapsed - state["start_s"]) / k  # mean time of the finished iterations
            left = per * (settings.max_iterations - k)
        progress(IterationInfo(k, settings.max_iterations, history["chi2"][-1], history["rms_ms"][-1],
                               lam, step, elapsed, left, dict(timing)))

    target_hi = settings.chi2_target + settings.chi2_tolerance
    target_lo = max(settings.chi2_target - settings.chi2_tolerance, 0.0)
    try:
        snapshot("running (starting model)")
        state["start_s"] = _time.perf_counter() - t_begin
        report(0, float("nan"), 0.0, 0.0)
        stop, converged = None, False
        if chi2 <= target_hi:
            stop, converged = STOP_TARGET, True
        lam_prev = None
        stalled = 0
        held = 0
        alpha_prev, cut_prev = 1.0, False
        k = 0
        run = None
        while stop is None:
            if k >= settings.max_iterations:
                stop = STOP_MAX
                break
            k += 1
            t_iter = _time.perf_counter()
            G = res.matrix
            if par == "logv":
                J = G @ sp.diags(-np.exp(-m))  # ds/dlog v = -s
            else:
                J = G
            A = sp.diags(weight) @ J
            b = weight * r
            t_solve = _time.perf_counter()
            # the linearised prediction should not promise more than a fall of chi2 to
            # max_reduction times its value (the linearisation is not trusted further)
            aim = max(settings.chi2_target, settings.max_reduction * chi2)
            if lam_prev is None:
                norm_a = math.sqrt(float(A.multiply(A).sum()))
                norm_r = math.sqrt(float(R.multiply(R).sum()) + settings.damping ** 2 * n_par)
                lam = settings.lambda_start * norm_a / max(norm_r, 1e-30)
                # calibrate the first weight by factors of 4 until the prediction
                # brackets the aim, with short solves (at most four), then solve fully
                quick = replace(settings, solver_iterations=min(30, settings.solver_iterations))
                u, predicted = _solve_predict(A, b, R, m - m0, m - m_ref, lam, quick, None)
                direction = 4.0 if predicted < aim else 0.25
                for _ in range(3):
                    lam_c = lam * direction
                    u_c, pred_c = _solve_predict(A, b, R, m - m0, m - m_ref, lam_c, quick, u)
                    if direction > 1:
                        lam, u, predicted = lam_c, u_c, pred_c
                        if pred_c >= aim:
                            break
                    else:
                        if pred_c < aim:
                            break
                        lam, u, predicted = lam_c, u_c, pred_c
                u, predicted = _solve_predict(A, b, R, m - m0, m - m_ref, lam, settings, u)
            else:
                quick = replace(settings, solver_iterations=min(30, settings.solver_iterations))
                u, solved_at = None, None
                if alpha_prev < 0.5 and not held:
                    # the last step had to be cut to less than half: the linearisation
                    # is poor here, so keep lam rather than lower it (as in
                    # Levenberg-Marquardt damping; Nocedal & Wright 2006, sec. 10.3),
                    # near the target too (lowering it after cut steps there left line
                    # (b) of benchmarks/invert.py creeping at chi2 1.15 with steps of
                    # 0.1; holding it, at target). Raising it after a cut below a
                    # quarter stalled that line from a sharp two-layer start at chi2
                    # 10.5 (holding: 4.8 after 20 iterations).
                    lam = lam_prev
                    held = 0
                else:
                    lam = lam_prev * settings.lambda_cooling
                    # a full solve: kept as the update when lam stays at this value
                    u, predicted = _solve_predict(A, b, R, m - m0, m - m_ref, lam, settings, None)
                    solved_at = lam
                    if (predicted < aim and held < 1 and settings.lambda_cooling < 1
                            and chi2 < HOLD_BELOW * settings.chi2_target):
                        # near the target, where the linear prediction undershoots the
                        # aim: hold lam for one iteration so as not to overfit (holding
                        # longer stalls at the regularised minimum; far above the target
                        # a held iteration only re-linearises and gains little, measured)
                        lam = lam_prev
                        held += 1
                    else:
                        held = 0
                        # while the prediction stays well above the aim, lower lam
                        # further (at most three more short solves): convergence is then
                        # set by how far the linearisation is trusted, not by the cooling
                        for _ in range(3 if settings.lambda_cooling < 1 else 0):
                            if predicted <= 1.5 * aim:
                                break
                            lam_c = lam * settings.lambda_cooling
                            u_c, pred_c = _solve_predict(A, b, R, m - m0, m - m_ref, lam_c, quick, u)
                            if pred_c < aim:
                                break
                            lam, u, predicted = lam_c, u_c, pred_c
                if u is None or lam != solved_at:
                    u, predicted = _solve_predict(A, b, R, m - m0, m - m_ref, lam, settings, u)
            timing["solve_s"] += _time.perf_counter() - t_solve
            def line_search(u, alpha):
                # line search on the true misfit: full step first; if it fails, the minimum
                # of the parabola through chi2(0), its slope at 0 (from the linearisation) and
                # chi2(alpha) (Nocedal & Wright 2006, sec. 3.5), then halving
                slope0 = -2.0 * float(np.mean(b * (A @ u)))
                best = None
                for _ in range(settings.line_search_steps + 1):
                    trial = np.clip(m + alpha * u, lo, hi)
                    res_t, r_t, chi2_t = evaluate(trial)
                    account(res_t)
                    if chi2_t < chi2:
                        best = (trial, res_t, r_t, chi2_t, alpha)
                        if chi2_t < target_lo and chi2 > settings.chi2_target:
                            # overshoot: shorten the step towards the target (chi2 is close
                            # to linear in alpha over a step this size)
                            a2 = alpha * (chi2 - settings.chi2_target) / (chi2 - chi2_t)
                            trial2 = np.clip(m + a2 * u, lo, hi)
                            res_2, r_2, chi2_2 = evaluate(trial2)
                            account(res_2)
                            if chi2_2 < chi2 and abs(chi2_2 - settings.chi2_target) < abs(chi2_t - settings.chi2_target):
                                best = (trial2, res_2, r_2, chi2_2, a2)
                        break
                    curve = (chi2_t - chi2 - slope0 * alpha) / alpha ** 2
                    a_min = -slope0 / (2.0 * curve) if curve > 0 and slope0 < 0 else 0.5 * alpha
                    alpha = float(np.clip(a_min, 0.1 * alpha, 0.7 * alpha))
                return best

            # after a short step, try the same again first (the problem is then
            # strongly non-linear, often for several iterations), or twice it if it was
            # taken at the first try: a failed trial costs a whole forward pass
            first_try = min(1.0, alpha_prev * (1.0 if cut_prev else 2.0))
            best = line_search(u, first_try)
            if best is None and settings.lambda_cooling < 1:
                # no step reduced chi2 at this weight (near its regularised optimum):
                # one more try with a lower weight before giving up
                t_solve = _time.perf_counter()
                lam = lam * settings.lambda_cooling ** 2
                u, predicted = _solve_predict(A, b, R, m - m0, m - m_ref, lam, settings, u)
                timing["solve_s"] += _time.perf_counter() - t_solve
                best = line_search(u, 1.0)
            lam_prev = lam
            if best is None:
                stop = STOP_NO_STEP
                break
            m, res, r, chi2_new, alpha = best
            trace(res)
            cut_prev = alpha < 0.9 * first_try
            alpha_prev = alpha
            improvement = (chi2 - chi2_new) / chi2
            chi2 = chi2_new
            models.append(velocity_grid(m))
            for key, val in (("chi2", chi2), ("rms_ms", _rms_ms(r)), ("lambda", lam), ("step", alpha)):
                history[key].append(val)
            if chi2 <= target_hi:
                stop, converged = STOP_TARGET, True
            elif improvement < settings.min_improvement:
                stalled += 1
                if stalled >= 2:
                    stop = STOP_STALLED
            else:
                stalled = 0
            if stop is None and k >= settings.max_iterations:
                stop = STOP_MAX
            # the file first, then the progress line: a Ctrl-C in the callback finds the
            # iteration it reports already written
            run = snapshot(stop or f"running (iteration {k} finished)", converged)
            report(k, lam, alpha, _time.perf_counter() - t_iter)
        if run is None or run.stop_reason != stop:
            run = snapshot(stop, converged)
    except KeyboardInterrupt:
        last = state["run"]
        n_done = 0 if last is None else last.iterations
        if last is not None:
            last.stop_reason = "interrupted"
            if checkpoint is not None:
                try:
                    checkpoint(last)  # a run file is written atomically: a second Ctrl-C keeps the previous one
                except KeyboardInterrupt:
                    pass
        if checkpoint is not None and last is not None:
            message = (f"interrupted; {checkpoint} holds the last finished iteration "
                       f"({n_done} of {settings.max_iterations})")
        else:
            message = f"interrupted after {n_done} finished iteration(s); nothing was written"
        raise InversionInterrupted(message, last, checkpoint) from None
    # not part of the run file: how the time was spent (benchmarks/invert.py prints it)
    run.timing = dict(timing, total_s=_time.perf_counter() - t_begin)
    return run


def _plain(value):
    if isinstance(value, (np.floating, np.integer, np.bool_)):
        return value.item()
    if isinstance(value, np.ndarray):
        return value.tolist()
    return str(value)


def _rms_ms(r):
    return float(np.sqrt(np.mean(r ** 2)) * 1e3)


def _solve_predict(A, b, R, rough, dev, lam, settings, x0):
    u = _solve(A, b, R, rough, dev, lam, settings, x0)
    return u, float(np.mean((b - A @ u) ** 2))


def _solve(A, b, R, rough, dev, lam, settings, x0=None):
    """Solve the stacked damped least-squares system for the update u."""
    n = A.shape[1]
    beta = settings.damping
    blocks = [A]
    rhs = [b]
    if R.shape[0]:
        blocks.append(lam * R)
        rhs.append(-lam * (R @ rough))
    if beta > 0:
        blocks.append(sp.identity(n, format="csr") * (lam * beta))
        rhs.append(-lam * beta * dev)
    M = sp.vstack(blocks).tocsr()
    y = np.concatenate(rhs)
    tol = settings.solver_tol
    if settings.solver == "lsmr":
        out = lsmr(M, y, atol=tol, btol=tol, maxiter=settings.solver_iterations, x0=x0)
    else:
        out = lsqr(M, y, atol=tol, btol=tol, iter_lim=settings.solver_iterations, x0=x0)
    u = out[0]
    if not np.all(np.isfinite(u)):
        raise SolverError("the least-squares update is not finite (check the picks for gross errors)")
    return u


