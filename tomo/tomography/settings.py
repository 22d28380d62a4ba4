"""The settings of an inversion, each with its default and the reason for it.

Recorded whole in the run file, so that a run can be explained and repeated.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass, fields

from ..core.defaults import DEFAULT_SIGMA_MS
from ..core.errors import InputError
from .fields import DEFAULT_SOURCE_RADIUS
from .rays import BOOKINGS, DEFAULT_BOOKING, DEFAULT_STEP

__all__ = ["InversionSettings", "DEFAULT_SIGMA_MS"]



@dataclass(frozen=True)
class InversionSettings:
    """Every setting of an inversion (the objective is stated in :mod:`tomo.tomography.inversion`).

    Attributes
    ----------
    max_iterations : int
        Most Gauss-Newton iterations.
    chi2_target : float
        Target of chi2 = mean((residual / sigma)^2); 1 fits the picks to their noise
        (the discrepancy principle).
    chi2_tolerance : float
        chi2 within target +- tolerance counts as at the target. 0.1 by default: the
        noise alone scatters chi2 of n picks by sqrt(2 / n) (0.1 for 200 picks, 0.03 for
        2,000; chi-squared distribution), so a closer target means little.
    min_improvement : float
        Relative change below which an iteration counts as making no progress: of chi2
        while above the target (two such iterations running stop the run), of the
        model's roughness ||R m|| once at the target (the smoothest model that fits has
        been reached: Occam's stopping rule, Constable, Parker & Constable 1987).
    default_sigma_ms : float
        Pick uncertainty where the pick file gives none, ms (:data:`DEFAULT_SIGMA_MS`).
    parameter : {"logv", "slowness"}
        Model parameter: log-velocity (default; the roughness of relative changes, the
        same from 300 to 5000 m/s) or slowness.
    smooth_x, smooth_z : float
        Weights of the horizontal and vertical first differences in the roughness
        ||R m||. Defaults 0.5 and 0.2: layered ground varies less along the line than
        with depth, so vertical changes are penalised less (common practice), while a
        rock surface still varies over a few station spacings.
    damping : float
        Weight of ||m - m_ref|| relative to the roughness. 0 (off) by default: damping
        pulls unconstrained cells toward the reference, which is then part of the
        answer; when used, the reference is the one given to :func:`invert`, or the
        starting model (and the run's notes say so).
    trust_reduction : float
        Largest fall of chi2 one Gauss-Newton step is first trusted to deliver (the
        linearised chi2 is aimed at max(target, trust_reduction x chi2)). The fraction
        adapts from then on to how well the previous step's prediction came true, as
        a trust region does (Nocedal & Wright 2006, Numerical Optimization, alg. 4.1).
    lambda_tolerance : float
        The regularisation weight is searched until the linearised chi2 lies within this
        fraction of its aim.
    v_min_m_s, v_max_m_s : float or None
        Velocity bounds, m/s; None chooses them from the starting model
        (min(150, start min / 2), max(7000, 2 x start max)).
    solver : {"lsmr", "lsqr"}
        Sparse least-squares solver (Fong & Saunders 2011; Paige & Saunders 1982).
    solver_tol : float
        ``atol`` = ``btol`` of the solver on the column-scaled system: the relative
        accuracy of the update. 1e-6 keeps the linearised chi2 exact to well under the
        search tolerance.
    solver_iterations : int or None
        Iteration limit of the solver; None: from the problem size (see
        :func:`tomo.tomography.solver.iteration_limit`).
    line_search_steps : int
        Most step reductions per iteration.
    workers : int
        Processes for the forward solves and ray tracing (1: in this process).
    order : {1, 2}
        Fast-marching order.
    source_radius : float
        Exactly-timed start radius around each source, node spacings.
    ray_step : float or None
        Ray-tracing step, node spacings (None: one model cell).
    ray_booking : {"nearest", "bilinear"}
        How ray lengths are shared among forward nodes (``tomo.tomography.rays``).
    reciprocity : bool
        Solve fields from the geophones when there are fewer geophones than shots.
    windows : bool
        Solve each field on its window of the grid, proved to hold every first-arrival
        ray of its picks (:mod:`tomo.tomography.windows`; same times to the solver's
        precision, in time proportional to the line's length); False solves every field
        on the whole grid (to check the windows).
    """

    max_iterations: int = 20
    chi2_target: float = 1.0
    chi2_tolerance: float = 0.1
    min_improvement: float = 0.02
    default_sigma_ms: float = DEFAULT_SIGMA_MS
    parameter: str = "logv"
    smooth_x: float = 0.5
    smooth_z: float = 0.2
    damping: float = 0.0
    trust_reduction: float = 0.3
    lambda_tolerance: float = 0.05
    v_min_m_s: float | None = None
    v_max_m_s: float | None = None
    solver: str = "lsmr"
    solver_tol: float = 1e-6
    solver_iterations: int | None = None
    line_search_steps: int = 3
    workers: int = 2
    order: int = 2
    source_radius: float = DEFAULT_SOURCE_RADIUS
    ray_step: float | None = DEFAULT_STEP
    ray_booking: str = DEFAULT_BOOKING
    reciprocity: bool = True
    windows: bool = True

    def check(self):
        """Raise InputError naming the setting when a value is out of range; returns self."""
        def bad(name, message):
            raise InputError(f"setting {name} = {getattr(self, name)!r}: {message}", field=name)
        if int(self.max_iterations) < 0:
            bad("max_iterations", "must be >= 0")
        if int(self.workers) < 1:
            bad("workers", "must be >= 1")
        for name in ("chi2_target", "default_sigma_ms", "solver_tol", "lambda_tolerance"):
            if not (math.isfinite(getattr(self, name)) and getattr(self, name) > 0):
                bad(name, "must be positive")
        for name in ("chi2_tolerance", "min_improvement", "smooth_x", "smooth_z", "damping"):
            if not (math.isfinite(getattr(self, name)) and getattr(self, name) >= 0):
                bad(name, "must be >= 0")
        if self.smooth_x == 0 and self.smooth_z == 0 and self.damping == 0:
            bad("damping", "smoothing and damping are all zero: the problem has no regularisation")
        if not 0 < self.trust_reduction < 1:
            bad("trust_reduction", "must be in (0, 1)")
        if self.parameter not in ("logv", "slowness"):
            bad("parameter", "expected 'logv' or 'slowness'")
        if self.solver not in ("lsmr", "lsqr"):
            bad("solver", "expected 'lsmr' or 'lsqr'")
        if self.solver_iterations is not None and int(self.solver_iterations) < 1:
            bad("solver_iterations", "must be >= 1 (or None: from the problem size)")
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
