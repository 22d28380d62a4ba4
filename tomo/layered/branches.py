"""Travel-time branches: a concave piecewise-linear fit of time against offset per shot side.

On each side of a shot the first arrivals of a layered ground with velocity increasing
downward follow the lower envelope of straight lines, ``t = a_k + s_k |x|``: the direct
wave (``a_1 = 0``) and one head wave per refractor, each deeper branch faster (smaller
slowness ``s_k``) and with a larger intercept ``a_k`` (Telford, Geldart & Sheriff 1990,
Applied Geophysics, sec. 4.3). The curve is therefore concave and piecewise linear.

Fit. The picks of a side, sorted by |offset|, are split into 1 to 5 contiguous groups,
each fitted by a weighted least-squares line (weights ``1/sigma^2``). The split with the
least chi-squared for each branch count is found exactly by dynamic programming over
all splits, keeping only those in which the slowness decreases from each branch to the
next (by at least ``min_contrast``) — the concavity of a first-arrival curve.

Choice of the branch count. We compute the Bayesian information criterion
``BIC = chi2 + p ln(m)`` (Schwarz 1978, Ann. Statist. 6) for each count and take the
fewest branches whose BIC is within 10 of the least (a difference above 10 is "very
strong" evidence, Kass & Raftery 1995, JASA 90), ``chi2`` the sum of
squared residuals divided by the pick variance, ``m`` the number of picks and ``p`` the
number of free parameters (two per branch, one less when the first branch is held
through the origin, plus one per break offset). Because ``chi2`` is scaled by the pick
sigma, a break is only accepted when it lowers the misfit by several times the noise:
with 24 picks one more branch must lower chi2 by ``3 ln 24 + 10 = 19.5``. The pick sigma comes
from the pick file or, failing that, from the ``sigma_ms`` option (default 0.5 ms, the
low end of usual pick errors, common practice); a sigma set too small makes the
criterion accept spurious breaks, one set too large merges real branches. Because the
break positions are the best of many, a chosen break must also pass a test: the slopes
either side differ by more than three standard errors (``slope_z``), else one branch
fewer is taken.

The count and the break offsets can be given instead (per side, or for all sides).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

__all__ = ["Branch", "SideFit", "SideProblem", "fit_side", "fit_side_robust", "fit_shots", "shot_sides",
           "pick_sigma", "model_time", "MAX_BRANCHES", "DEFAULT_SIGMA_MS", "OUTLIER_SIGMA"]

#: Most branches fitted on one side (five layers is more than shallow refraction resolves).
MAX_BRANCHES = 5
#: Pick sigma assumed when the pick file gives none, ms (low end of usual 0.5-2 ms, common practice).
DEFAULT_SIGMA_MS = 0.5
#: A pick this many robust sigmas from its branch is an outlier (common practice).
OUTLIER_SIGMA = 4.0
#: BIC difference that counts as very strong evidence for more branches (Kass & Raftery 1995).
BIC_MARGIN = 10.0
#: Fewest picks a branch may have (two define a line; three are needed to see its misfit).
MIN_PICKS_PER_BRANCH = 2
#: Fewest picks on a side for any fit (common practice: a line from two picks cannot be checked).
MIN_PICKS_PER_SIDE = 3


@dataclass
class Branch:
    """One straight branch ``t = intercept_s + slowness_s_m * |offset|``.

    Attributes
    ----------
    index : int
        1 for the branch nearest the shot.
    slowness_s_m : float
        Slope, s/m; ``velocity_m_s`` is its inverse (an apparent velocity where the
        refractor dips).
    intercept_s : float
        Time at zero offset, s.
    offset_min_m, offset_max_m : float
        |offset| range of its picks, m.
    n_picks : int
    rms_s : float
        Root-mean-square residual of its picks, s.
    slowness_sigma_s_m, intercept_sigma_s : float
        One-sigma uncertainties from the least-squares covariance with the pick sigma.
    """

    index: int
    slowness_s_m: float
    intercept_s: float
    offset_min_m: float
    offset_max_m: float
    n_picks: int
    rms_s: float
    slowness_sigma_s_m: float = float("nan")
    intercept_sigma_s: float = float("nan")

    @property
    def velocity_m_s(self):
        return 1.0 / self.slowness_s_m

    def time(self, offset_m):
        """Time (s) of the branch line at |offset| ``offset_m`` (m)."""
        return self.intercept_s + self.slowness_s_m * np.abs(np.asarray(offset_m, float))

    def to_dict(self):
        return {
            "index": self.index, "velocity_m_s": self.velocity_m_s,
            "slowness_s_m": self.slowness_s_m, "intercept_ms": self.intercept_s * 1e3,
            "slowness_sigma_s_m": _finite_or_none(self.slowness_sigma_s_m),
            "intercept_sigma_ms": _finite_or_none(self.intercept_sigma_s * 1e3),
            "offset_min_m": self.offset_min_m, "offset_max_m": self.offset_max_m,
            "n_picks": self.n_picks, "rms_ms": self.rms_s * 1e3,
        }

    @classmethod
    def from_dict(cls, d):
        return cls(index=int(d["index"]), slowness_s_m=float(d["slowness_s_m"]),
                   intercept_s=float(d["intercept_ms"]) * 1e-3,
                   offset_min_m=float(d["offset_min_m"]), offset_max_m=float(d["offset_max_m"]),
                   n_picks=int(d["n_picks"]), rms_s=float(d["rms_ms"]) * 1e-3,
                   slowness_sigma_s_m=_nan_if_none(d.get("slowness_sigma_s_m")),
                   intercept_sigma_s=_nan_if_none(d.get("intercept_sigma_ms")) * 1e-3)


def _finite_or_none(v):
    return float(v) if v is not None and math.isfinite(v) else None


def _nan_if_none(v):
    return float("nan") if v is None else float(v)


@dataclass
class SideFit:
    """The branch fit of one side of one shot.

    Attributes
    ----------
    shot_x, shot_z : float
        Shot position, m.
    side : int
        +1 for geophones at larger x than the shot ("right"), -1 for smaller x ("left").
    branches : list of Branch
        Nearest the shot first; empty when the side could not be fitted.
    crossovers_m : list of float
        |offset| where consecutive branch lines cross, m.
    pick_index : ndarray of int
        Indices (into the Picks given to :func:`fit_shots`) of the side's picks, sorted
        by |offset|.
    branch_of_pick : ndarray of int
        Branch index (1-based) of each of those picks; 0 when the side was not fitted.
    chosen_by : str
        "criterion", "count" or "breaks".
    bic : dict
        Branch count -> BIC for the counts tried.
    sigma_s : float
        Pick sigma used (median over the side), s.
    messages : list of str
        What went wrong or was changed on this side, one line each.
    """

    shot_x: float
    shot_z: float
    side: int
    branches: list = field(default_factory=list)
    crossovers_m: list = field(default_factory=list)
    pick_index: np.ndarray = field(default_factory=lambda: np.zeros(0, int))
    branch_of_pick: np.ndarray = field(default_factory=lambda: np.zeros(0, int))
    chosen_by: str = "criterion"
    bic: dict = field(default_factory=dict)
    sigma_s: float = float("nan")
    offsets_m: np.ndarray = field(default_factory=lambda: np.zeros(0))
    times_s: np.ndarray = field(default_factory=lambda: np.zeros(0))
    messages: list = field(default_factory=list)

    @property
    def label(self):
        return f"shot at x = {self.shot_x:g} m, {'right' if self.side > 0 else 'left'} side"

    @property
    def ok(self):
        return bool(self.branches)

    def residuals_s(self):
        """Pick time minus its branch line, s (NaN when not fitted)."""
        out = np.full(self.times_s.shape, np.nan)
        for b in self.branches:
            sel = self.branch_of_pick == b.index
            out[sel] = self.times_s[sel] - b.time(self.offsets_m[sel])
        return out

    def to_dict(self):
        return {
            "shot_x": self.shot_x, "shot_z": self.shot_z,
            "side": "right" if self.side > 0 else "left",
            "branches": [b.to_dict() for b in self.branches],
            "crossovers_m": [float(c) for c in self.crossovers_m],
            "chosen_by": self.chosen_by,
            "bic": {str(k): float(v) for k, v in self.bic.items()},
            "sigma_ms": _finite_or_none(self.sigma_s * 1e3),
            "pick_index": [int(i) for i in self.pick_index],
            "offset_m": [float(u) for u in self.offsets_m],
            "time_ms": [float(t) * 1e3 for t in self.times_s],
            "branch_of_pick": [int(b) for b in self.branch_of_pick],
            "messages": list(self.messages),
        }

    @classmethod
    def from_dict(cls, d):
        return cls(
            shot_x=float(d["shot_x"]), shot_z=float(d["shot_z"]),
            side=1 if d["side"] == "right" else -1,
            branches=[Branch.from_dict(b) for b in d["branches"]],
            crossovers_m=[float(c) for c in d["crossovers_m"]],
            pick_index=np.asarray(d["pick_index"], int),
            branch_of_pick=np.asarray(d["branch_of_pick"], int),
            chosen_by=d["chosen_by"], bic={int(k): float(v) for k, v in d["bic"].items()},
            sigma_s=_nan_if_none(d.get("sigma_ms")) * 1e-3,
            offsets_m=np.asarray(d["offset_m"], float), times_s=np.asarray(d["time_ms"], float) * 1e-3,
            messages=list(d["messages"]),
        )


@dataclass
class SideProblem:
    """Picks of one side of one shot, ready to fit (internal hand-over)."""

    shot_x: float
    shot_z: float
    side: int
    pick_index: np.ndarray
    offset_m: np.ndarray
    time_s: np.ndarray
    sigma_s: np.ndarray


def pick_sigma(picks, sigma_ms=DEFAULT_SIGMA_MS):
    """Pick sigmas (s): the file's where given and positive, else ``sigma_ms`` (ms)."""
    sigma = np.full(len(picks), sigma_ms * 1e-3)
    if picks.sigma_s is not None:
        # a zero or missing sigma (possible from Python, not from a file) takes the default
        good = np.isfinite(picks.sigma_s) & (picks.sigma_s > 0)
        sigma = np.where(good, picks.sigma_s, sigma)
    return sigma


def shot_sides(picks, sigma_ms=DEFAULT_SIGMA_MS):
    """Split picks into shot sides, each sorted by |offset|.

    Returns
    -------
    list of SideProblem
        In order of shot x, left side before right side; only sides with picks.
    """
    src, src_index = picks.sources()
    sigma = pick_sigma(picks, sigma_ms)
    offset = picks.offset
    out = []
    for k, (sx, sz) in enumerate(src):
        for side in (-1, 1):
            sel = np.flatnonzero((src_index == k) & (np.sign(offset) == side))
            if sel.size == 0:
                continue
            u = np.abs(offset[sel])
            order = np.argsort(u, kind="stable")
            sel = sel[order]
            out.append(SideProblem(float(sx), float(sz), side, sel, np.abs(offset[sel]),
                                   picks.time_s[sel], sigma[sel]))
    return out


# --- segment costs ---------------------------------------------------------------

def _segment_tables(u, t, w):
    """Weighted least-squares line fits of every contiguous run of picks.

    Returns ``(chi2, slope, intercept)`` arrays of shape (m+1, m+1) indexed by
    ``[i, j]`` for the run ``i .. j-1``; runs of fewer than two picks are NaN. Row 0
    also gets through-origin fits in ``chi2_0, slope_0``.
    """
    m = u.size
    # centre the offsets and times so the sums do not cancel badly
    uc, tc = u - u.mean(), t - t.mean()
    def cum(a):
        return np.concatenate([[0.0], np.cumsum(a)])
    W, U, T = cum(w), cum(w * uc), cum(w * tc)
    UU, UT, TT = cum(w * uc * uc), cum(w * uc * tc), cum(w * tc * tc)
    i, j = np.meshgrid(np.arange(m + 1), np.arange(m + 1), indexing="ij")
    sw, su, st = W[j] - W[i], U[j] - U[i], T[j] - T[i]
    suu, sut, stt = UU[j] - UU[i], UT[j] - UT[i], TT[j] - TT[i]
    with np.errstate(invalid="ignore", divide="ignore"):
        mu, mt = su / sw, st / sw
        sxx = suu - sw * mu * mu
        sxy = sut - sw * mu * mt
        syy = stt - sw * mt * mt
        slope = sxy / sxx
        chi2 = np.maximum(syy - slope * sxy, 0.0)
        intercept = (mt + t.mean()) - slope * (mu + u.mean())
    valid = (j - i) >= MIN_PICKS_PER_BRANCH
    valid &= sxx > 1e-12 * np.maximum(suu, 1e-300)
    chi2 = np.where(valid, chi2, np.nan)
    slope = np.where(valid, slope, np.nan)
    intercept = np.where(valid, intercept, np.nan)
    # through the origin from pick 0: t = s u (raw, not centred)
    Wr, UUr, UTr, TTr = cum(w), cum(w * u * u), cum(w * u * t), cum(w * t * t)
    jj = np.arange(m + 1)
    with np.errstate(invalid="ignore", divide="ignore"):
        s0 = UTr[jj] / UUr[jj]
        c0 = np.maximum(TTr[jj] - s0 * UTr[jj], 0.0)
    ok0 = jj >= MIN_PICKS_PER_BRANCH
    s0 = np.where(ok0, s0, np.nan)
    c0 = np.where(ok0, c0, np.nan)
    return chi2, slope, intercept, c0, s0


def _best_splits(chi2, slope, chi2_0, slope_0, max_k, through_origin, min_contrast):
    """Least-chi2 concave split for each branch count 1..max_k by dynamic programming.

    Returns a dict k -> (chi2, list of run boundaries [0, b1, ..., m]).
    """
    m = chi2.shape[0] - 1
    inf = np.inf
    first_chi2 = chi2_0 if through_origin else chi2[0]
    first_slope = slope_0 if through_origin else slope[0]
    cost = np.where(np.isfinite(chi2) & (slope > 0), chi2, inf)
    results = {}
    # best[i, j]: least chi2 covering picks 0..j-1 with the last run i..j-1
    best = np.full((m + 1, m + 1), inf)
    last_slope = np.full((m + 1, m + 1), np.nan)
    ok = np.isfinite(first_chi2) & (first_slope > 0)
    best[0, ok] = first_chi2[ok]
    last_slope[0, :] = first_slope
    parents = []
    if np.isfinite(best[0, m]):
        results[1] = (float(best[0, m]), [0, m])
    for k in range(2, max_k + 1):
        new = np.full((m + 1, m + 1), inf)
        parent = np.full((m + 1, m + 1), -1, dtype=int)
        for i in range(1, m):
            prev = best[:, i]  # over h: runs h..i-1
            if not np.any(np.isfinite(prev)):
                continue
            prev_slope = last_slope[:, i]
            s_next = slope[i, :]  # runs i..j-1
            allowed = prev_slope[:, None] * (1.0 - min_contrast) > s_next[None, :]
            total = np.where(allowed & np.isfinite(prev)[:, None], prev[:, None], inf)
            h_best = np.argmin(total, axis=0)
            value = total[h_best, np.arange(m + 1)] + cost[i, :]
            new[i, :] = value
            parent[i, :] = h_best
        new_slope = np.where(np.isfinite(new), slope, np.nan)
        parents.append(parent)
        best, last_slope = new, new_slope
        i_end = int(np.argmin(best[:, m]))
        if np.isfinite(best[i_end, m]):
            bounds = [m, i_end]
            i, j = i_end, m
            for p in reversed(parents):
                h = int(p[i, j])
                i, j = h, i
                bounds.append(i)
            results[k] = (float(best[i_end, m]), bounds[::-1])
    return results


def _line_fit(u, t, w, through_origin):
    """Weighted least-squares line; returns slope, intercept and their one-sigma errors."""
    if through_origin:
        a = u[:, None]
    else:
        a = np.column_stack([u, np.ones_like(u)])
    sw = np.sqrt(w)
    coef, *_ = np.linalg.lstsq(a * sw[:, None], t * sw, rcond=None)
    try:
        cov = np.linalg.inv((a * w[:, None]).T @ a)
        err = np.sqrt(np.maximum(np.diag(cov), 0.0))
    except np.linalg.LinAlgError:
        err = np.full(a.shape[1], np.nan)
    if through_origin:
        return float(coef[0]), 0.0, float(err[0]), 0.0
    return float(coef[0]), float(coef[1]), float(err[0]), float(err[1])


def _branches_from_bounds(u, t, w, bounds, through_origin):
    branches = []
    labels = np.zeros(u.size, int)
    for k in range(len(bounds) - 1):
        i, j = bounds[k], bounds[k + 1]
        origin = through_origin and k == 0
        s, a, ds, da = _line_fit(u[i:j], t[i:j], w[i:j], origin)
        res = t[i:j] - (a + s * u[i:j])
        branches.append(Branch(k + 1, s, a, float(u[i]), float(u[j - 1]), j - i,
                               float(np.sqrt(np.mean(res**2))), ds, da))
        labels[i:j] = k + 1
    return branches, labels


def _refine(u, t, w, branches, through_origin):
    """Least-squares fit of the whole first-arrival model ``t = min_k(a_k + s_k u)``.

    The split search fits each branch to its own run of picks, so a pick near a
    crossover can only pull on one branch and the run ends are free to take the picks
    that suit them, which biases short branches. Here all lines are fitted together
    to the lower envelope (each pick to whichever line is earliest at its offset), starting
    from the split fit (scipy.optimize.least_squares, trust-region reflective). The
    result is kept only if it keeps every branch with at least two picks and the
    slowness decreasing.
    """
    from scipy.optimize import least_squares

    k = len(branches)
    if k < 2:
        return branches, None
    sw = np.sqrt(w)
    free_first = not through_origin

    def unpack(p):
        s = p[:k]
        a = np.concatenate([[p[k]] if free_first else [0.0], p[k + (1 if free_first else 0):]])
        return s, a

    def resid(p):
        s, a = unpack(p)
        return (np.min(a[:, None] + s[:, None] * u[None, :], axis=0) - t) * sw

    def jac(p):
        s, a = unpack(p)
        which = np.argmin(a[:, None] + s[:, None] * u[None, :], axis=0)
        j = np.zeros((u.size, p.size))
        rows = np.arange(u.size)
        j[rows, which] = u * sw
        col_a = which + k - (0 if free_first else 1)
        ok = (which > 0) | free_first
        j[rows[ok], col_a[ok]] = sw[ok]
        return j

    p0 = [b.slowness_s_m for b in branches] + [b.intercept_s for b in branches][(0 if free_first else 1):]
    try:
        sol = least_squares(resid, np.array(p0, float), jac=jac, method="trf", x_scale="jac")
    except (ValueError, np.linalg.LinAlgError):
        return branches, None
    s, a = unpack(sol.x)
    which = np.argmin(a[:, None] + s[:, None] * u[None, :], axis=0)
    counts = np.bincount(which, minlength=k)
    if np.any(counts < MIN_PICKS_PER_BRANCH) or np.any(np.diff(s) >= 0) or np.any(s <= 0):
        return branches, None
    if np.any(np.diff(which) < 0):
        return branches, None
    try:
        cov = np.linalg.inv(sol.jac.T @ sol.jac)
        err = np.sqrt(np.maximum(np.diag(cov), 0.0))
    except np.linalg.LinAlgError:
        err = np.full(sol.x.size, np.nan)
    ds = err[:k]
    da = np.concatenate([[err[k]] if free_first else [0.0], err[k + (1 if free_first else 0):]])
    out = []
    for i in range(k):
        sel = which == i
        res = t[sel] - (a[i] + s[i] * u[sel])
        out.append(Branch(i + 1, float(s[i]), float(a[i]), float(u[sel].min()), float(u[sel].max()),
                          int(sel.sum()), float(np.sqrt(np.mean(res**2))), float(ds[i]), float(da[i])))
    return out, which + 1


def _crossovers(branches):
    out = []
    for b1, b2 in zip(branches[:-1], branches[1:]):
        ds = b1.slowness_s_m - b2.slowness_s_m
        out.append(float((b2.intercept_s - b1.intercept_s) / ds) if ds != 0 else float("nan"))
    return out


def _distinct(b1, b2, z):
    """True when two neighbouring branches' slownesses differ by more than z standard errors."""
    se = math.hypot(b1.slowness_sigma_s_m, b2.slowness_sigma_s_m)
    if not math.isfinite(se):
        return True
    return (b1.slowness_s_m - b2.slowness_s_m) > z * se


def check_branch_count(value, name="branches"):
    """Raise InputError naming ``name`` unless ``value`` is a branch count 1 to MAX_BRANCHES."""
    from ..core.errors import InputError

    if not 1 <= int(value) <= MAX_BRANCHES:
        raise InputError(f"{name} must be 1 to {MAX_BRANCHES}, got {value}", field=name.lstrip("-"))


def fit_side(problem, n_branches=None, breaks_m=None, max_branches=MAX_BRANCHES,
             through_origin=True, min_contrast=0.02, slope_z=3.0, refine=True):
    """Fit the branches of one shot side.

    Parameters
    ----------
    problem : SideProblem
        Picks of the side sorted by |offset| (see :func:`shot_sides`).
    n_branches : int, optional
        Fit exactly this many branches (reduced, with a message, when the picks do not
        allow it). Default: chosen by the BIC (module docstring).
    breaks_m : sequence of float, optional
        |offset| (m) of the breaks between branches; picks at or below a break belong to
        the branch before it. Overrides ``n_branches``.
    max_branches : int
        Most branches tried by the criterion (1 to 5).
    through_origin : bool
        Hold the first branch through t = 0 at zero offset when it starts within
        ``1.5`` pick spacings of the shot (a direct wave from a surface shot). Off-end
        shots, whose first pick is far away, are always fitted freely.
    min_contrast : float
        Least fractional decrease of slowness from one branch to the next (0.02: each
        deeper branch at least 2 % faster).
    slope_z : float
        With the count chosen by the criterion, a break is kept only where the slowness
        drops by more than ``slope_z`` standard errors of the two slopes (a two-sided
        test at about 0.3 % for 3; the BIC alone accepts too many breaks because the
        best of many break positions is chosen, a known property of change-point
        searches).
    refine : bool
        Refit all branches together as the lower envelope of their lines (see
        ``_refine``); not done when break offsets are given.

    Returns
    -------
    SideFit
    """
    fit = SideFit(problem.shot_x, problem.shot_z, problem.side, pick_index=problem.pick_index,
                  offsets_m=problem.offset_m, times_s=problem.time_s,
                  branch_of_pick=np.zeros(problem.pick_index.size, int))
    u, t, sig = problem.offset_m, problem.time_s, problem.sigma_s
    m = u.size
    fit.sigma_s = float(np.median(sig)) if m else float("nan")
    if m < MIN_PICKS_PER_SIDE:
        fit.messages.append(f"{fit.label}: only {m} pick(s), at least {MIN_PICKS_PER_SIDE} are needed "
                            f"for a branch fit; side skipped")
        return fit
    w = 1.0 / sig**2
    # a first pick close to the shot: the first branch is the direct wave through the origin
    spacing = float(np.median(np.diff(u))) if m > 1 else 1.0
    origin = bool(through_origin and u[0] <= 1.5 * max(spacing, 1e-9) + 1e-9)
    s_all = _line_fit(u, t, w, False)[0]
    if not s_all > 0:
        fit.messages.append(
            f"{fit.label}: times decrease with offset ({t[0] * 1e3:.2f} ms at {u[0]:g} m to "
            f"{t[-1] * 1e3:.2f} ms at {u[-1]:g} m); side skipped (check the shot position and the picks)")
        return fit

    if breaks_m is not None and len(breaks_m) > 0:
        edges = sorted(float(b) for b in breaks_m)
        bounds = [0] + [int(np.searchsorted(u, b, side="right")) for b in edges] + [m]
        kept = [0]
        for b in bounds[1:]:
            if b - kept[-1] >= MIN_PICKS_PER_BRANCH:
                kept.append(b)
            else:
                if b == m:
                    kept[-1] = m
        if kept[-1] != m:
            kept[-1] = m
        if len(kept) - 1 < len(edges) + 1:
            listed = ", ".join(f"{b:g}" for b in edges)
            fit.messages.append(f"{fit.label}: breaks at {listed} m leave a branch with fewer than "
                                f"{MIN_PICKS_PER_BRANCH} picks; fitted {len(kept) - 1} branch(es)")
        if len(kept) < 2:
            kept = [0, m]
        fit.branches, fit.branch_of_pick = _branches_from_bounds(u, t, w, kept, origin)
        fit.chosen_by = "breaks"
    else:
        allowed = min(MAX_BRANCHES, max_branches if n_branches is None else n_branches, m // MIN_PICKS_PER_BRANCH)
        allowed = max(allowed, 1)
        chi2, slope, _, c0, s0 = _segment_tables(u, t, w)
        splits = _best_splits(chi2, slope, c0, s0, allowed, origin, min_contrast)
        if not splits:
            fit.messages.append(f"{fit.label}: no increasing branch fits these picks; side skipped")
            return fit
        lnm = math.log(m)
        bic = {}
        for k, (c, _) in splits.items():
            p = 3 * k - 1 - (1 if origin else 0)
            bic[k] = c + p * lnm
        fit.bic = bic
        # a curve that bends the wrong way (a later branch slower) cannot be layered
        # ground with velocity increasing downward: compare with splits free of the
        # concavity constraint
        free = _best_splits(chi2, slope, c0, s0, allowed, origin, -1e9)
        free_bic = min(c + (3 * k - 1 - (1 if origin else 0)) * lnm for k, (c, _) in free.items()) if free else np.inf
        if free_bic < min(bic.values()) - BIC_MARGIN:
            fit.messages.append(
                f"{fit.label}: the times bend the wrong way for flat layers (a later stretch is slower "
                f"than an earlier one): the refractor deepens away from the shot there, or the velocity "
                f"changes laterally or decreases with depth; an irregular refractor can also pass for an "
                f"extra layer (consider fixing the branch count)")
        if n_branches is not None:
            k = int(n_branches)
            if k not in splits:
                best_k = max(splits)
                limit = m // MIN_PICKS_PER_BRANCH
                why = (f"{m} picks allow at most {min(limit, MAX_BRANCHES)}" if k > limit or k > MAX_BRANCHES
                       else f"no split into {k} branches with velocity increasing by {min_contrast:.0%} each")
                fit.messages.append(f"{fit.label}: {k} branches requested but {why}; fitted {best_k}")
                k = best_k
            fit.chosen_by = "count"
        else:
            # the fewest branches whose BIC is within BIC_MARGIN of the least: more branches
            # must be "very strongly" preferred (Kass & Raftery 1995, JASA 90, sec. 3.2)
            least = min(bic.values())
            k = min(c for c, v in bic.items() if v - least < BIC_MARGIN)
            # keep a break only where the slopes on its two sides differ significantly
            while k > 1:
                trial, _ = _branches_from_bounds(u, t, w, splits[k][1], origin)
                if all(_distinct(b1, b2, slope_z) for b1, b2 in zip(trial[:-1], trial[1:])):
                    break
                k -= 1
                while k > 1 and k not in splits:
                    k -= 1
        fit.branches, fit.branch_of_pick = _branches_from_bounds(u, t, w, splits[k][1], origin)
    if refine and fit.chosen_by != "breaks":
        refined, labels = _refine(u, t, w, fit.branches, origin)
        if labels is not None:
            fit.branches, fit.branch_of_pick = refined, labels
    fit.crossovers_m = _crossovers(fit.branches)
    for b in fit.branches:
        if b.n_picks < 3:
            fit.messages.append(f"{fit.label}: branch {b.index} ({b.velocity_m_s:.0f} m/s) rests on only {b.n_picks} picks")
    return fit


def model_time(fit, offset_m):
    """First-arrival time (s) of a fitted side at |offset| (m): the least of its branch lines."""
    return np.min([b.time(offset_m) for b in fit.branches], axis=0)


def _flag_outliers(fit, problem, outlier_sigma):
    resid = problem.time_s - model_time(fit, problem.offset_m)
    mad = 1.4826 * float(np.median(np.abs(resid - np.median(resid))))
    scale = np.maximum(problem.sigma_s, mad)
    return np.abs(resid) > outlier_sigma * scale, resid


def fit_side_robust(problem, outlier_sigma=OUTLIER_SIGMA, **options):
    """Fit a side, set aside the picks far from the fit, and fit again without them.

    A pick is an outlier when it lies more than ``outlier_sigma`` times the larger of its
    sigma and the side's robust scatter (1.4826 x the median absolute deviation of the
    residuals, consistent with the normal sigma; Hampel 1974, JASA 69) from the
    first-arrival model (the least of the branch lines). The side is refitted without
    the flagged picks, and all picks judged again, until the flagged set is stable.

    Returns
    -------
    fit : SideFit
        Fitted without the outliers (its ``pick_index`` lacks them).
    outlier : ndarray of bool
        Per pick of ``problem``.
    residual_s : ndarray
        Per pick of ``problem``, time minus the final model, s (NaN if not fitted).
    """
    fit = fit_side(problem, **options)
    m = problem.offset_m.size
    if not fit.ok:
        return fit, np.zeros(m, bool), np.full(m, np.nan)
    flagged, resid = _flag_outliers(fit, problem, outlier_sigma)
    excluded = np.zeros(m, bool)
    # refit without the flagged picks until the flagged set stops changing (a gross
    # outlier can distort the first fit and make good picks look bad)
    for _ in range(4):
        if np.array_equal(flagged, excluded) or (~flagged).sum() < MIN_PICKS_PER_SIDE:
            break
        keep = ~flagged
        sub = SideProblem(problem.shot_x, problem.shot_z, problem.side, problem.pick_index[keep],
                          problem.offset_m[keep], problem.time_s[keep], problem.sigma_s[keep])
        refit = fit_side(sub, **options)
        if not refit.ok:
            break
        fit, excluded = refit, flagged
        flagged, resid = _flag_outliers(fit, problem, outlier_sigma)
    if not np.array_equal(flagged, excluded):
        flagged = excluded  # report what the fit actually left out
    if np.any(flagged):
        fit.messages.append(f"{fit.label}: {int(flagged.sum())} outlier pick(s) left out of the fit")
    return fit, flagged, resid


def fit_shots(picks, n_branches=None, breaks_m=None, sigma_ms=DEFAULT_SIGMA_MS, outlier_sigma=None, **options):
    """Fit the branches of every shot side of a line.

    Parameters
    ----------
    picks : Picks
    n_branches : int or dict, optional
        One count for every side, or ``{(shot_x, side): count}`` with side +1/-1 (or
        "right"/"left"); sides not in the dict use the criterion.
    breaks_m : sequence or dict, optional
        Break offsets (m) for every side, or a dict like ``n_branches``.
    sigma_ms : float
        Pick sigma (ms) when the picks carry none.
    outlier_sigma : float, optional
        Leave out picks this many robust sigmas from the first fit and fit again
        (:func:`fit_side_robust`); None or 0: keep every pick.
    **options
        Passed to :func:`fit_side`.

    Returns
    -------
    list of SideFit
    """
    fits = []
    for problem in shot_sides(picks, sigma_ms=sigma_ms):
        kw = dict(options, n_branches=_per_side(n_branches, problem), breaks_m=_per_side(breaks_m, problem))
        if outlier_sigma:
            fits.append(fit_side_robust(problem, outlier_sigma=outlier_sigma, **kw)[0])
        else:
            fits.append(fit_side(problem, **kw))
    return fits


def _per_side(value, problem):
    if not isinstance(value, dict):
        return value
    for (x, side), v in value.items():
        s = {"right": 1, "left": -1}.get(side, side)
        if abs(float(x) - problem.shot_x) < 1e-3 and s == problem.side:
            return v
    # a dict may carry a value for every other side
    return getattr(value, "default", None)
