"""The linearised, regularised least-squares problem of one Gauss-Newton iteration, and
the search for its regularisation weight.

At the current model m (ground cells), with the weighted Jacobian A = W J (W =
diag(1/sigma)) and the weighted residual b = W (t_obs - t(m)), the update u solves::

    minimise  || b - A u ||^2 + lam^2 ( || R (m + u - m_r) ||^2 + beta^2 || m + u - m_r ||^2 )

(R the roughness operator, m_r the reference model, zero unless the user names one,
beta the damping weight, 0 unless asked for). Points an iso-velocity surface must pass
through (boreholes, :mod:`tomo.tomography.constraints`) add weighted rows C u = d beside
the picks' rows, the term || d - C u ||^2 in the objective; they count in the objective
but never in the picks' chi2 below. It is solved as one stacked sparse
least-squares system with scipy's LSMR (Fong & Saunders 2011, SIAM J. Sci. Comput. 33)
or LSQR (Paige & Saunders 1982, ACM TOMS 8) after scaling every column to unit length,
the diagonal preconditioning that makes their convergence independent of how the cells
happen to be scaled by their ray lengths (Paige & Saunders 1982, sec. 9; Hansen 1998,
Rank-Deficient and Discrete Ill-Posed Problems, SIAM, sec. 6.4). The solver's own stop
code is kept for every solve.

The weight lam is chosen by the discrepancy principle on the linearised problem (Occam's
inversion: Constable, Parker & Constable 1987, Geophysics 52, 289-300; Hansen 1992, SIAM
Rev. 34 on choosing the weight): the predicted chi2(lam) = mean((b - A u(lam))^2) of the
pick rows alone rises with lam, and the search finds the largest lam whose prediction reaches the aim (the
target, or the fall of chi2 one step is trusted with). Where even the smallest lam
searched cannot reach the aim, the one with the least predicted misfit is taken, as
Occam does.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp
from scipy.sparse.linalg import LinearOperator, lsmr, lsqr

from ..core.errors import SolverError

__all__ = ["LinearProblem", "SolveInfo", "search_weight", "iteration_limit", "STOP_REASONS"]

#: Stop codes shared by LSMR and LSQR (scipy.sparse.linalg documentation).
STOP_REASONS = {
    0: "the zero update is the solution",
    1: "converged (residual within tolerance)",
    2: "converged (least-squares solution within tolerance)",
    3: "stopped: condition number estimate too large",
    4: "converged (residual at machine precision)",
    5: "converged (least-squares solution at machine precision)",
    6: "stopped: condition number beyond machine precision",
    7: "stopped at the iteration limit",
}
#: Factor between the weights tried while bracketing the aim.
BRACKET_FACTOR = 4.0
#: Solver tolerance of the search's trial solves: each predicts chi2 well within the
#: search's 5 % tolerance (measured: the predictions of solves at 1e-3 and at 1e-6 agree
#: to under 1 % on the demo line), and the chosen weight is solved again at full accuracy.
SEARCH_TOL = 1e-4
#: Most bracketing and refining solves in one search.
MAX_BRACKET = 8
MAX_REFINE = 8


def iteration_limit(n_rows, n_cols):
    """Iteration limit of the sparse solver for an (n_rows x n_cols) stacked system.

    In exact arithmetic LSQR and LSMR finish in at most n_cols iterations; on the
    column-scaled, regularised systems here they converge in a few hundred (measured on
    the benchmark lines: ``benchmarks/invert.py`` prints them). The limit of
    max(500, 4 sqrt(n_cols)) only stops a solve that has gone wrong; a solve that
    reaches it is reported.
    """
    return int(min(max(n_rows, 1), max(n_cols, 1), max(500, 4 * math.sqrt(n_cols))))


@dataclass
class SolveInfo:
    """One solve: the weight, the solver's iterations and stop code, the predicted chi2."""

    lam: float
    iterations: int
    stop: int
    predicted_chi2: float

    @property
    def reason(self):
        return STOP_REASONS.get(self.stop, f"stop code {self.stop}")

    @property
    def at_limit(self):
        return self.stop == 7


class LinearProblem:
    """The regularised least-squares problem of one iteration (module docstring).

    Parameters
    ----------
    A : sparse matrix (n_picks, n_cells)
        Weighted Jacobian W J (1/sigma times s per parameter unit).
    b : ndarray (n_picks,)
        Weighted residual W r (dimensionless).
    R : sparse matrix (n_rough, n_cells)
        Roughness operator.
    rough_from : ndarray (n_cells,)
        m - m_r: the model whose roughness is penalised (m itself without a reference).
    damping : float
        beta, weight of || m + u - m_r || relative to the roughness.
    tol : float
        ``atol`` = ``btol`` of the solver.
    solver : {"lsmr", "lsqr"}
    max_iterations : int or None
        Solver iteration limit (None: :func:`iteration_limit`).
    constraints : ConstraintRows, optional
        Weighted rows C u = d of points the model must honour
        (:class:`tomo.tomography.constraints.ConstraintRows`); data-like rows, weight 1
        at every lam, outside the picks' chi2.
    """

    def __init__(self, A, b, R, rough_from, damping=0.0, tol=1e-6, solver="lsmr", max_iterations=None,
                 constraints=None):
        self.A, self.b, self.R = sp.csr_matrix(A), np.asarray(b, float), sp.csr_matrix(R)
        self.rough_from = np.asarray(rough_from, float)
        self.damping, self.tol, self.solver = float(damping), float(tol), solver
        n = self.A.shape[1]
        self.constraints = constraints
        self.C = sp.csr_matrix((0, n)) if constraints is None else sp.csr_matrix(constraints.C)
        self.d = np.zeros(0) if constraints is None else np.asarray(constraints.d, float)
        blocks = [self.A, self.C, self.R] + ([sp.identity(n, format="csr") * self.damping] if self.damping > 0 else [])
        # the stacked matrix is built once; each weight only rescales its rows and columns
        self._K = sp.vstack(blocks).tocsr()
        self._KT = self._K.T.tocsr()
        self._n_data = self.A.shape[0] + self.C.shape[0]
        self.max_iterations = max_iterations or iteration_limit(self._K.shape[0], n)
        # squared column norms of the blocks: the scaling for any lam follows from them
        col_picks = np.asarray(self.A.multiply(self.A).sum(axis=0)).ravel()
        self._norm_a = math.sqrt(float(col_picks.sum()))
        self._col_a = col_picks + np.asarray(self.C.multiply(self.C).sum(axis=0)).ravel()
        self._col_r = np.asarray(self.R.multiply(self.R).sum(axis=0)).ravel()
        self._rhs_reg = -np.concatenate([self.R @ self.rough_from] +
                                        ([self.damping * self.rough_from] if self.damping > 0 else []))
        self.solves = []

    def natural_weight(self):
        """||A||_F / ||R||_F (the picks' rows alone): the weight at which both terms carry
        equal weight."""
        norm_r = math.sqrt(float(self._col_r.sum()) + self.damping ** 2 * self.A.shape[1])
        return self._norm_a / max(norm_r, 1e-300)

    def _operator(self, lam):
        """The stacked system at weight lam with unit columns, as a LinearOperator."""
        rows = np.ones(self._K.shape[0])
        rows[self._n_data:] = lam
        scale = np.sqrt(self._col_a + lam ** 2 * (self._col_r + self.damping ** 2))
        scale[scale == 0] = 1.0
        inv = 1.0 / scale
        K, KT = self._K, self._KT
        op = LinearOperator(K.shape, matvec=lambda y: rows * (K @ (inv * y)),
                            rmatvec=lambda z: inv * (KT @ (rows * z)), dtype=float)
        return op, scale

    def solve(self, lam, x0=None, tol=None):
        """The update u (parameter units) for weight ``lam`` and its :class:`SolveInfo`
        (``tol``: the solver's atol = btol for this solve, default the problem's)."""
        op, scale = self._operator(lam)
        y0 = None if x0 is None else np.asarray(x0, float) * scale
        rhs = np.concatenate([self.b, self.d, lam * self._rhs_reg])
        tol = self.tol if tol is None else tol
        if self.solver == "lsmr":
            out = lsmr(op, rhs, atol=tol, btol=tol, maxiter=self.max_iterations, x0=y0)
        else:
            out = lsqr(op, rhs, atol=tol, btol=tol, iter_lim=self.max_iterations, x0=y0)
        u = out[0] / scale
        if not np.all(np.isfinite(u)):
            raise SolverError("the least-squares update is not finite (check the picks for gross errors)")
        info = SolveInfo(float(lam), int(out[2]), int(out[1]), self.predicted_chi2(u))
        self.solves.append(info)
        return u, info

    def objective(self, u, lam):
        """The linearised objective after the update u at weight lam:
        ||b - A u||^2 + ||d - C u||^2 + lam^2 (||R (m + u - m_r)||^2 + beta^2 ||m + u - m_r||^2)."""
        d = self.rough_from + u
        reg = float(np.sum((self.R @ d) ** 2)) + self.damping ** 2 * float(np.sum(d ** 2))
        return float(np.sum((self.b - self.A @ u) ** 2)) + self.constraint_misfit(u) + lam ** 2 * reg

    def objective_slope(self, u, lam):
        """d/dalpha of :meth:`objective` (alpha u) at alpha = 0."""
        d = self.rough_from
        reg = float(np.sum((self.R @ d) * (self.R @ u))) + self.damping ** 2 * float(np.sum(d * u))
        data = float(np.sum(self.b * (self.A @ u))) + float(np.sum(self.d * (self.C @ u)))
        return -2.0 * data + 2.0 * lam ** 2 * reg

    def constraint_misfit_at(self, m):
        """The constraint rows' misfit at the model ``m`` itself (not linearised; the
        rows' own ``misfit_at``); 0 without constraints."""
        return 0.0 if self.constraints is None else self.constraints.misfit_at(m)

    def constraint_misfit(self, u):
        """||d - C u||^2: the constraint rows' misfit after the update u (exact: the rows
        are linear in the model); 0 without constraints."""
        return float(np.sum((self.d - self.C @ u) ** 2)) if self.d.size else 0.0

    def predicted_chi2(self, u):
        """Linearised chi2 after the update: mean((b - A u)^2)."""
        return float(np.mean((self.b - self.A @ u) ** 2))


def search_weight(problem, aim, lam0, tolerance=0.05):
    """The largest weight whose predicted chi2 reaches ``aim`` (module docstring).

    Brackets the aim by factors of :data:`BRACKET_FACTOR` from ``lam0``, then refines by
    the secant rule on (log lam, log chi2) until the prediction is within ``tolerance``
    (relative) of the aim. Each solve starts from the solution at the nearest weight;
    the trial solves are to :data:`SEARCH_TOL`, the chosen one to the problem's tolerance.

    Returns
    -------
    u : ndarray
        The update at the chosen weight.
    info : SolveInfo
    """
    tried = []  # (lam, u, info)

    def run(lam):
        near = min(tried, key=lambda t: abs(math.log(t[0] / lam)), default=None)
        u, info = problem.solve(lam, None if near is None else near[1], tol=max(problem.tol, SEARCH_TOL))
        tried.append((lam, u, info))
        return info.predicted_chi2

    def close(pred):
        return abs(pred / aim - 1.0) <= tolerance

    pred = run(lam0)
    lo = hi = None  # weights with prediction below / above the aim
    if pred <= aim:
        lo = lam0
    else:
        hi = lam0
    for _ in range(MAX_BRACKET):
        if close(pred) or (lo is not None and hi is not None):
            break
        lam = (lo * BRACKET_FACTOR) if hi is None else (hi / BRACKET_FACTOR)
        pred = run(lam)
        if pred <= aim:
            lo = lam
        else:
            hi = lam
    for _ in range(MAX_REFINE):
        if close(pred) or lo is None or hi is None:
            break
        p_lo = next(t[2].predicted_chi2 for t in tried if t[0] == lo)
        p_hi = next(t[2].predicted_chi2 for t in tried if t[0] == hi)
        # secant on log-log (chi2 rises smoothly with lam), kept inside the bracket
        f = (math.log(aim) - math.log(p_lo)) / max(math.log(p_hi) - math.log(p_lo), 1e-12)
        f = min(max(f, 0.1), 0.9)
        lam = math.exp(math.log(lo) + f * (math.log(hi) - math.log(lo)))
        pred = run(lam)
        if pred <= aim:
            lo = lam
        else:
            hi = lam
    # the closest to the aim; where none reaches it, the least misfit (Occam's rule);
    # solved again to full accuracy from the search's solution
    best = min(tried, key=lambda t: abs(math.log(t[2].predicted_chi2 / aim)))
    if lo is None:
        best = min(tried, key=lambda t: t[2].predicted_chi2)
    return problem.solve(best[0], best[1])
