"""Travel-time tomography: the smoothest model that fits the picks to their uncertainty.

The objective (Occam's inversion: Constable, Parker & Constable 1987, Geophysics 52,
289-300; in two dimensions deGroot-Hedlin & Constable 1990, Geophysics 55)::

    minimise  || R (m - m_r) ||^2 + beta^2 || m - m_r ||^2 + lam^-2 sum_b (g_b (z_b - z_b(m)) / sigma_b)^2
    subject to chi2(m) = mean(((t_obs - t(m)) / sigma)^2) = chi2_target

m is the model (log-velocity or slowness of the ground cells), t(m) the computed first
arrivals (fast marching, ``tomo.tomography.forward``), R the anisotropic first-difference
roughness (``tomo.tomography.regularisation``), m_r a reference model (none unless the user
names one: m_r = 0, so the roughness of the model itself is penalised and nothing of the
starting model is kept for free) and beta a damping weight (0, off, unless asked for).
The starting model is only where the iterations begin. The last term is there only when
boreholes are given (``points``): z_b(m) the iso-velocity surface at each borehole,
z_b its logged elevation, sigma_b its uncertainty, g_b a weight raised while the
surface misses the borehole by more than sigma_b, lam the regularisation weight of the
iteration (``tomo.tomography.constraints``). The boreholes never count in chi2.

Each iteration linearises t(m) about the current model with the ray matrix
(``tomo.tomography.passes``) and solves the regularised least-squares problem of
``tomo.tomography.solver`` for the update, with the regularisation weight searched so that
the linearised chi2 reaches its aim: the target, or, while chi2 is far above it, the fall
one Gauss-Newton step is trusted with (a trust region on the misfit, adapted from how
well the last prediction came true; Nocedal & Wright 2006, Numerical Optimization,
alg. 4.1). The step along the update is accepted only if the true misfit falls (or, at
the target, if the model gets smoother while still fitting); otherwise it is shortened
(backtracking with a quadratic model, Nocedal & Wright 2006, sec. 3.5), and a step that
would overshoot the target is cut back to it, so the picks are not overfitted. Parameters
are clipped to the velocity bounds (projection; common practice).

Stops: at the target, once the last step was the smoothest at the target (a full step of
a search aimed at the target) or the model's roughness no longer falls by
``min_improvement``, and no borehole's weight is still rising; too little improvement
above the target (twice running, or no step found); or the maximum number of
iterations. ``RunData.stop_reason`` says which.
"""

from __future__ import annotations

import json
import time as _time
from dataclasses import dataclass, field

import numpy as np
import scipy.sparse as sp
from threadpoolctl import threadpool_limits

from ..core.errors import InputError
from ..core.version import __version__
from ..survey.units import GROUND_VELOCITY_M_S
from .constraints import PointPenalty
from .depth import shallow_warning
from .fields import origin_kind
from .meter import Meter
from .passes import forward_pass, trace_pass
from .progress import InversionInterrupted, IterationInfo, interrupted
from .regularisation import parameter_bounds, smoothness_operator, to_parameter, to_velocity
from .run import RunData
from .settings import InversionSettings
from .solver import LinearProblem, search_weight
from .workers import Workers

__all__ = ["InversionSettings", "IterationInfo", "InversionInterrupted", "invert", "smoothness_operator",
           "MIN_PICKS", "MAX_CELLS_PER_PICK", "STOP_TARGET", "STOP_STALLED", "STOP_NO_STEP", "STOP_MAX"]

#: Fewer picks than this cannot support a tomogram (use the layered interpretation).
MIN_PICKS = 20
#: More ground cells per pick than this is a mesh far too fine for the data.
MAX_CELLS_PER_PICK = 100.0

STOP_TARGET = "chi2 at target"
STOP_STALLED = "too little improvement"
STOP_NO_STEP = "too little improvement (no step reduced the misfit)"
STOP_MAX = "maximum iterations"

#: Least ratio of the true to the predicted fall of the objective for a step to be
#: taken at once (the trust-region acceptance test, Nocedal & Wright 2006, alg. 4.1).
RATIO_POOR = 0.25


# --- the problem, fixed for the whole run ---------------------------------------------

@dataclass
class Problem:
    """What does not change during a run: data, weights, operators, bounds, records."""

    picks: object
    mesh: object
    settings: InversionSettings
    observed_s: np.ndarray
    sigma_s: np.ndarray
    R: sp.csr_matrix
    m_start: np.ndarray
    m_ref: np.ndarray
    bounds: tuple
    start_velocity: np.ndarray
    notes: list
    recorded: dict
    layered: dict | None = None
    points: object = None  # ContourPoints the surfaces must pass through (tomo.tomography.constraints)

    @property
    def weight(self):
        return 1.0 / self.sigma_s

    def velocity_grid(self, m):
        v = np.full(self.mesh.shape, np.nan)
        v[self.mesh.ground] = to_velocity(m, self.settings.parameter)
        return v

    def roughness(self, m):
        """The regularisation term (without the weight): ||R (m - m_r)||^2 + beta^2 ||m - m_r||^2."""
        d = m - self.m_ref
        return float(np.sum((self.R @ d) ** 2) + self.settings.damping ** 2 * np.sum(d ** 2))


def _check_inputs(picks, mesh, start_velocity, settings):
    """Refuse what cannot make a tomogram; returns the velocity bounds (m/s)."""
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
    return _velocity_bounds(mesh, start_velocity, settings)


def _check_physical(v_ground, settings):
    """Refuse a starting model whose median velocity lies outside that of near-surface
    ground (:data:`tomo.survey.units.GROUND_VELOCITY_M_S`) unless the bounds set allow
    it: such a start comes from picks in the wrong units, and its travel times can fit
    them at once (chi-squared at target after 0 iterations) with a meaningless model.
    The median, because a gradient start may pass the upper limit at the grid's bottom."""
    lo, hi = GROUND_VELOCITY_M_S
    allowed_lo = lo if settings.v_min_m_s is None else min(lo, settings.v_min_m_s)
    allowed_hi = hi if settings.v_max_m_s is None else max(hi, settings.v_max_m_s)
    median = float(np.median(v_ground))
    if not allowed_lo <= median <= allowed_hi:
        raise InputError(f"the starting model's median velocity is {median:,.0f} m/s, outside what near-surface "
                         f"ground gives ({lo:g} to {hi:g} m/s): check the units of the picks (times in seconds? "
                         "positions in feet?) or set v_min/v_max to allow it", field="start")


def _velocity_bounds(mesh, start_velocity, settings):
    v = np.asarray(start_velocity, float)
    if v.shape != mesh.shape:
        raise InputError(f"starting model has shape {v.shape}, expected the mesh's {mesh.shape}")
    vg = v[mesh.ground]
    if not np.all(np.isfinite(vg)) or np.any(vg <= 0):
        raise InputError("starting model has a non-finite or non-positive velocity in the ground")
    v_lo, v_hi = float(vg.min()), float(vg.max())
    _check_physical(vg, settings)
    v_min = settings.v_min_m_s if settings.v_min_m_s is not None else min(150.0, 0.5 * v_lo)
    v_max = settings.v_max_m_s if settings.v_max_m_s is not None else max(7000.0, 2.0 * v_hi)
    if v_min >= v_max:
        raise InputError(f"velocity bounds {v_min:g} to {v_max:g} m/s are empty", field="v_min_m_s")
    if v_lo < v_min * (1 - 1e-9) or v_hi > v_max * (1 + 1e-9):
        raise InputError(f"velocity bounds {v_min:g} to {v_max:g} m/s exclude the starting model "
                         f"(its velocities span {v_lo:.0f} to {v_hi:.0f} m/s)",
                         field="v_min_m_s" if v_lo < v_min else "v_max_m_s")
    return v_min, v_max


def build_problem(picks, mesh, start_velocity, settings, reference_velocity=None, notes=None,
                  extra_settings=None, layered=None, points=None):
    """Check the inputs and set up the :class:`Problem` of a run (see :func:`invert`)."""
    settings = (settings or InversionSettings()).check()
    v_min, v_max = _check_inputs(picks, mesh, start_velocity, settings)
    notes = list(notes or [])
    par, ground = settings.parameter, mesh.ground
    start = np.where(ground, np.asarray(start_velocity, float), np.nan)
    lo, hi = parameter_bounds(v_min, v_max, par)
    if reference_velocity is not None:
        ref_v = np.asarray(reference_velocity, float)
        if ref_v.shape != mesh.shape or not np.all(np.isfinite(ref_v[ground])) or np.any(ref_v[ground] <= 0):
            raise InputError("reference model must be positive and finite in the ground, shaped like the mesh")
        m_ref, reference = np.clip(to_parameter(ref_v[ground], par), lo, hi), "given"
    elif settings.damping > 0:
        m_ref, reference = to_parameter(start[ground], par), "starting model"
        notes.append("damping toward the starting model: cells the rays do not constrain keep its values")
    else:
        m_ref, reference = np.zeros(int(ground.sum())), "none"
    if picks.sigma_s is None:
        sigma = np.full(len(picks), settings.default_sigma_ms * 1e-3)
        notes.append(f"the picks give no uncertainties: sigma = {settings.default_sigma_ms:g} ms assumed "
                     "for every pick")
    else:
        sigma = np.asarray(picks.sigma_s, float)
    recorded = settings.as_dict()
    recorded.update(v_min_m_s_used=v_min, v_max_m_s_used=v_max, sigma_default_used=picks.sigma_s is None,
                    reference=reference)
    recorded.update(extra_settings or {})
    return Problem(picks, mesh, settings, np.asarray(picks.time_s, float), sigma,
                   smoothness_operator(mesh, settings.smooth_x, settings.smooth_z),
                   to_parameter(start[ground], par), m_ref, (lo, hi), start, notes, recorded, layered,
                   None if points is None or not len(points) else points.check(mesh))


# --- the state of a run --------------------------------------------------------------

@dataclass
class State:
    """The current model, its pass and misfit, and what the run has recorded so far."""

    m: np.ndarray
    res: object
    r: np.ndarray
    chi2: float
    lam: float | None = None
    bias: float = 0.0
    history: dict = field(default_factory=dict)
    models: list = field(default_factory=list)
    timing: dict = field(default_factory=dict)
    stalled: int = 0
    last_step: float = 1.0
    penalty: object = None  # PointPenalty of the borehole rows, when there are any
    pending: bool = False  # a borehole row's weight was just raised: the run goes on


class _Evaluator:
    """Forward passes of trial models, with their cost booked in ``timing``."""

    def __init__(self, problem, workers, timing, meter=None):
        self.problem, self.workers, self.timing = problem, workers, timing
        self.meter = meter or Meter()

    def __call__(self, m, rays=False):
        p = self.problem
        v = p.velocity_grid(m)
        return self.book(forward_pass(p.mesh, np.where(p.mesh.ground, 1.0 / v, 0.0), p.picks, p.settings,
                                      self.workers, rays, progress=self.meter.callback("fields")))

    def book(self, res):
        """A pass's cost into ``timing``; returns it with its residuals (s) and chi2."""
        p = self.problem
        self.timing["forward_s"] += res.forward_s
        self.timing["rays_s"] += res.rays_s
        self.timing["pass_wall_s"] += res.wall_s
        self.timing["passes"] += 1
        r = p.observed_s - res.time_s
        return res, r, float(np.mean((r * p.weight) ** 2))

    def trace(self, res):
        rays_s, wall_s = trace_pass(self.problem.mesh, res, self.problem.settings, self.workers,
                                    progress=self.meter.callback("rays"))
        self.timing["rays_s"] += rays_s
        self.timing["pass_wall_s"] += wall_s


# --- one iteration ---------------------------------------------------------------------

def linear_problem(problem, state):
    """The regularised least-squares problem at the current model (``tomo.tomography.solver``)."""
    s = problem.settings
    J = state.res.matrix @ sp.diags(-np.exp(-state.m)) if s.parameter == "logv" else state.res.matrix
    A = sp.diags(problem.weight) @ J
    rows = None if state.penalty is None else state.penalty.rows(problem.mesh, state.m, s.parameter)
    return LinearProblem(A, problem.weight * state.r, problem.R, state.m - problem.m_ref, s.damping,
                         s.solver_tol, s.solver, s.solver_iterations, constraints=rows)


def choose_update(problem, state, linear):
    """Search the weight for this iteration's aim; returns (update, SolveInfo, aim).

    The aim is the target, or ``trust_reduction`` times the current chi2 while that is
    higher (the structure of the model then grows gradually, largest features first: a
    continuation in the weight, as the Occam search's first phase; Constable et al.
    1987). Where the iterations settle above the target at the weight the linearised
    problem chose (the ray matrix is a few per cent off the true sensitivities, so the
    linearisation promises a fit the model does not deliver), the aim is lowered by the
    excess (``state.bias``, at most twice the tolerance): a correction standing in for
    Occam's search of the weight on the true misfit.
    """
    s = problem.settings
    final = s.trust_reduction * state.chi2 <= s.chi2_target
    aim = s.chi2_target - state.bias if final else s.trust_reduction * state.chi2
    lam0 = state.lam if state.lam is not None else linear.natural_weight()
    u, info = search_weight(linear, aim, lam0, s.lambda_tolerance)
    return u, info, aim, final


def line_search(problem, state, evaluate, u, linear, lam):
    """The step along ``u`` to take, as (m, pass, residual, chi2, step), or None.

    The merit is the objective the update minimises at this weight, Phi(m) = n chi2(m)
    + lam^2 ||R (m - m_r)||^2 (+ damping, + the boreholes' term). A step is taken when
    the true Phi falls by at least :data:`RATIO_POOR` of the fall the linearised problem predicts for it
    (sufficient decrease against the Gauss-Newton model, as a trust region accepts a
    step; Nocedal & Wright 2006, sec. 4.1); otherwise it is shortened to the minimum of
    a parabola through Phi(0), its slope at 0 and Phi at the trial (sec. 3.5), at most
    ``line_search_steps`` times; failing that, the trial with the lowest Phi below the
    current one is taken. A step that takes chi2 below the target band is cut back to
    the target by linear interpolation, so the picks are not overfitted.
    """
    s = problem.settings
    lo, hi = problem.bounds
    n = len(state.r)

    def merit(m, chi2):
        return n * chi2 + lam ** 2 * problem.roughness(m) + linear.constraint_misfit_at(m)

    phi0 = merit(state.m, state.chi2)
    slope0 = linear.objective_slope(u, lam)
    alpha, best = 1.0, None
    for _ in range(s.line_search_steps + 1):
        trial = np.clip(state.m + alpha * u, lo, hi)
        res, r, chi2 = evaluate(trial)
        phi = merit(trial, chi2)
        predicted_fall = phi0 - linear.objective(alpha * u, lam)
        if chi2 < s.chi2_target - s.chi2_tolerance < state.chi2:
            return _toward_target(problem, state, evaluate, u, alpha, chi2) or (trial, res, r, chi2, alpha)
        if phi < phi0 and (predicted_fall <= 0 or (phi0 - phi) >= RATIO_POOR * predicted_fall):
            return trial, res, r, chi2, alpha
        if phi < phi0 and (best is None or phi < best[0]):
            best = (phi, (trial, res, r, chi2, alpha))
        curve = (phi - phi0 - slope0 * alpha) / alpha ** 2
        a_min = -slope0 / (2.0 * curve) if curve > 0 and slope0 < 0 else 0.5 * alpha
        alpha = float(np.clip(a_min, 0.1 * alpha, 0.7 * alpha))
    return None if best is None else best[1]


def _dt_dm(problem, state, u):
    """The change of cell slowness per unit step along u (ds = -s dlog v for log-velocity)."""
    return -np.exp(-state.m) * u if problem.settings.parameter == "logv" else u


def _toward_target(problem, state, evaluate, u, alpha, chi2_t):
    """A step that overshot the target, cut back to it (chi2 is close to linear in the
    step over one step); None when that does not land closer to the target."""
    s = problem.settings
    lo, hi = problem.bounds
    a2 = alpha * (state.chi2 - s.chi2_target) / (state.chi2 - chi2_t)
    trial = np.clip(state.m + a2 * u, lo, hi)
    res, r, chi2 = evaluate(trial)
    if chi2 < state.chi2 and abs(chi2 - s.chi2_target) < abs(chi2_t - s.chi2_target):
        return trial, res, r, chi2, a2
    return None


@dataclass
class Step:
    """What one iteration did: the solves, the weight, the step taken and what was aimed at."""

    solves: list
    lam: float
    alpha: float
    aim: float
    final: bool
    predicted: float
    rough_before: float
    rough_after: float


def iterate(problem, state, evaluate):
    """One Gauss-Newton iteration in place; returns the :class:`Step`, or None when no
    step along the update (at a smaller trusted fall too) improved the model."""
    linear = linear_problem(problem, state)
    t0 = _time.perf_counter()
    u, info, aim, final = choose_update(problem, state, linear)
    state.timing["solve_s"] += _time.perf_counter() - t0
    best = line_search(problem, state, evaluate, u, linear, info.lam)
    state.lam = info.lam
    if best is None:
        return None
    rough_before = problem.roughness(state.m)
    m, res, r, chi2, alpha = best
    evaluate.trace(res)
    settings = problem.settings
    gain = (state.chi2 - chi2) / state.chi2
    slow = gain < settings.min_improvement
    if final and 0 <= gain < settings.min_improvement and chi2 > settings.chi2_target + settings.chi2_tolerance:
        # settling above the target at this weight (the linearised problem thinks it
        # fits): aim lower by the excess, at most twice the tolerance below the target
        cap = 2.0 * settings.chi2_tolerance
        if state.bias < cap:
            state.bias = min(state.bias + chi2 - settings.chi2_target, cap)
            slow = False  # a lower aim is still to be tried: not a stall
    step = Step(list(linear.solves), info.lam, alpha, aim, final, info.predicted_chi2, rough_before,
                problem.roughness(m))
    state.m, state.res, state.r, state.last_step = m, res, r, alpha
    if state.penalty is not None:
        # a borehole's weight grows only once the update aims at the target (before
        # that the model has not grown the structure the borehole is read in); the
        # picks may fit worse while it grows: no stall then
        state.pending = final and state.penalty.raise_missed(problem.mesh, m, settings.parameter)
        slow = slow and not state.pending
    state.stalled = state.stalled + 1 if slow else 0
    state.chi2 = chi2
    return step


def stop_reason(problem, state, step, k):
    """Why the run stops after iteration ``k`` (None: go on), and whether it converged."""
    s = problem.settings
    if step is None:
        at_target = abs(state.chi2 - s.chi2_target) <= s.chi2_tolerance
        return (STOP_TARGET, True) if at_target else (STOP_NO_STEP, False)
    if abs(state.chi2 - s.chi2_target) <= s.chi2_tolerance:
        smoothest = step.final and step.alpha >= 0.9
        settled = step.rough_before > 0 and abs(step.rough_before - step.rough_after) / step.rough_before \
            < s.min_improvement
        if (smoothest or settled) and not state.pending:
            return STOP_TARGET, True
    elif state.chi2 > s.chi2_target and state.stalled >= 2:
        return STOP_STALLED, False
    if k >= s.max_iterations:
        return STOP_MAX, False
    return None, False


# --- the record ------------------------------------------------------------------------

def _plain(value):
    if isinstance(value, (np.floating, np.integer, np.bool_)):
        return value.item()
    if isinstance(value, np.ndarray):
        return value.tolist()
    return str(value)


def snapshot(problem, state, stop_reason="", converged=False):
    """The :class:`RunData` of the current model."""
    mesh, picks, ground = problem.mesh, problem.picks, problem.mesh.ground
    cov = np.zeros(mesh.shape)
    cov[ground] = np.asarray(state.res.matrix.sum(axis=0)).ravel()
    notes = list(problem.notes)
    if state.res.fallbacks:
        notes.append(f"{len(state.res.fallbacks)} field(s) solved at first order after a second-order failure")
    if state.res.unfinished:
        notes.append(f"{state.res.unfinished} ray(s) did not reach their source and were closed straight")
    limited = int(np.sum(state.history.get("solver_at_limit", [])))
    if limited:
        notes.append(f"{limited} least-squares solve(s) stopped at the solver's iteration limit")
    return RunData(
        x=mesh.x.copy(), z=mesh.z.copy(), velocity=problem.velocity_grid(state.m),
        coverage=np.where(ground, cov, 0.0), start_velocity=problem.start_velocity.copy(),
        terrain_x=mesh.terrain.x.copy(), terrain_z=mesh.terrain.z.copy(),
        picks={"source_x": picks.source_x.copy(), "source_z": picks.source_z.copy(),
               "receiver_x": picks.receiver_x.copy(), "receiver_z": picks.receiver_z.copy(),
               "observed_ms": problem.observed_s * 1e3, "computed_ms": state.res.time_s * 1e3,
               "sigma_ms": problem.sigma_s * 1e3},
        history={k: np.array(v, float) for k, v in state.history.items()},
        iteration_models=list(state.models), chi2=state.history["chi2"][-1], rms_ms=state.history["rms_ms"][-1],
        iterations=len(state.models), converged=bool(converged), stop_reason=stop_reason,
        settings=json.loads(json.dumps(problem.recorded, default=_plain)), mesh=mesh.as_dict(),
        layered=problem.layered, notes=notes, tomo_version=__version__,
    )


def _record(problem, state, step):
    h = state.history
    solves = step.solves if step else []
    for key, value in (("chi2", state.chi2), ("rms_ms", float(np.sqrt(np.mean(state.r ** 2)) * 1e3)),
                       ("lambda", step.lam if step else float("nan")), ("step", step.alpha if step else 0.0),
                       ("predicted_chi2", step.predicted if step else float("nan")),
                       ("roughness", problem.roughness(state.m)),
                       ("solver_iterations", max((s.iterations for s in solves), default=0)),
                       ("solver_solves", len(solves)), ("solver_at_limit", sum(s.at_limit for s in solves))):
        h.setdefault(key, []).append(value)


# --- the run ----------------------------------------------------------------------------

def invert(picks, mesh, start_velocity, settings=None, progress=None, checkpoint=None, layered=None,
           notes=None, extra_settings=None, reference_velocity=None, points=None, pass_progress=None,
           start_pass=None):
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
    layered, notes, extra_settings : dict, list of str, dict, optional
        Stored with the run: the layered interpretation used for the start, notes, and
        more entries for the recorded settings (start kind, mesh spec, files).
    reference_velocity : ndarray (nz, nx), optional
        Reference model m_r of the objective, m/s (default: none).
    points : ContourPoints, optional
        Borehole depths the iso-velocity surfaces must pass through
        (:mod:`tomo.tomography.constraints`): extra weighted rows of every update,
        outside the picks' chi2.
    pass_progress : callable, optional
        Called with a :class:`~tomo.tomography.meter.PassProgress` as each iteration's
        fields and rays get done (for a progress bar).
    start_pass : PassResult, optional
        The starting model's pass with rays on ``mesh`` with these settings (the depth
        probe of ``tomo.api.planning``), taken instead of solving it again.

    Returns a :class:`RunData`.
    """
    problem = build_problem(picks, mesh, start_velocity, settings, reference_velocity, notes, extra_settings,
                            layered, points)
    s = problem.settings
    # one BLAS thread: the solver's vectors are short, and BLAS threads competing for
    # the cores with the worker processes made the solves 15 times slower (measured on
    # the demo line: 4.1 s against 0.26 s for 14 solves)
    with threadpool_limits(1, user_api="blas"), Workers(s.workers) as workers:
        return _run(problem, workers, progress, checkpoint, Meter(pass_progress, origin_kind(picks, s.reciprocity)),
                    start_pass)


def _run(problem, workers, progress, checkpoint, meter=None, start_pass=None):
    s = problem.settings
    t_begin = _time.perf_counter()
    timing = {"forward_s": 0.0, "rays_s": 0.0, "solve_s": 0.0, "passes": 0, "pass_wall_s": 0.0}
    evaluate = _Evaluator(problem, workers, timing, meter)
    res, r, chi2 = evaluate(problem.m_start, rays=True) if start_pass is None else evaluate.book(start_pass)
    state = State(problem.m_start.copy(), res, r, chi2, timing=timing,
                  penalty=None if problem.points is None else PointPenalty(problem.points))
    _record(problem, state, None)
    last = {"run": None}

    def keep(stop, converged):
        run = snapshot(problem, state, stop, converged)
        last["run"] = run
        if checkpoint is not None:
            checkpoint(run)
        return run

    def report(k, step, start_s):
        if progress is None:
            return
        elapsed = _time.perf_counter() - t_begin
        left = (elapsed - start_s) / k * (s.max_iterations - k) if 0 < k < s.max_iterations else None
        progress(IterationInfo(k, s.max_iterations, state.chi2, state.history["rms_ms"][-1],
                               step.lam if step else float("nan"), step.alpha if step else 0.0,
                               elapsed, left, dict(timing), step.solves if step else []))

    try:
        keep("running (starting model)", False)
        start_s = _time.perf_counter() - t_begin
        report(0, None, start_s)
        stop, converged, k = None, False, 0
        if chi2 <= s.chi2_target + s.chi2_tolerance and not _points_missed(problem, state):
            stop, converged = STOP_TARGET, True  # the starting model already fits
        elif s.max_iterations == 0:
            stop = STOP_MAX
        while stop is None:
            k += 1
            evaluate.meter.begin(k)
            step = iterate(problem, state, evaluate)
            if step is not None:
                state.models.append(problem.velocity_grid(state.m))
                _record(problem, state, step)
            stop, converged = stop_reason(problem, state, step, k)
            if step is not None:
                # the file first, then the progress line: a Ctrl-C in the callback finds
                # the iteration it reports already written
                keep(stop or f"running (iteration {k} finished)", converged)
                report(k, step, start_s)
        shallow = shallow_warning(problem.mesh, state.res.matrix, problem.picks)
        if shallow:
            problem.notes.append(shallow)
        run = last["run"] if last["run"].stop_reason == stop and not shallow else keep(stop, converged)
    except KeyboardInterrupt:
        raise interrupted(last["run"], checkpoint, s) from None
    run.timing = dict(timing, total_s=_time.perf_counter() - t_begin)
    return run


def _points_missed(problem, state):
    """Some borehole missed by more than its sigma (false without boreholes)."""
    return state.penalty is not None and bool(state.penalty.missed(problem.mesh, state.m,
                                                                   problem.settings.parameter).any())

