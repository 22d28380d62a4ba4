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

import numpy as np

from ..core.defaults import DEFAULT_SIGMA_MS
from .codes import notice
from .sidefit import Branch, SideFit, SideProblem
from .splits import (
    MIN_PICKS_PER_BRANCH,
    best_splits,
    branches_from_bounds,
    crossovers,
    line_fit,
    refine_envelope,
    segment_tables,
    slopes_distinct,
    starts_at_shot,
)

__all__ = ["Branch", "SideFit", "SideProblem", "fit_side", "fit_side_robust", "fit_shots", "shot_sides",
           "pick_sigma", "model_time", "check_branch_count", "MAX_BRANCHES", "DEFAULT_SIGMA_MS", "OUTLIER_SIGMA",
           "MIN_PICKS_PER_BRANCH"]

#: Most branches fitted on one side (five layers is more than shallow refraction resolves).
MAX_BRANCHES = 5
#: A pick this many robust sigmas from its branch is an outlier (common practice).
OUTLIER_SIGMA = 4.0
#: BIC difference that counts as very strong evidence for more branches (Kass & Raftery 1995).
BIC_MARGIN = 10.0
#: Fewest picks on a side for any fit (common practice: a line from two picks cannot be checked).
MIN_PICKS_PER_SIDE = 3


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
        :func:`tomo.layered.splits.refine_envelope`); not done when break offsets are given.

    Returns
    -------
    SideFit
    """
    fit = SideFit(problem.shot_x, problem.shot_z, problem.side, pick_index=problem.pick_index,
                  offsets_m=problem.offset_m, times_s=problem.time_s,
                  branch_of_pick=np.zeros(problem.pick_index.size, int))
    u, t, sig = problem.offset_m, problem.time_s, problem.sigma_s
    fit.sigma_s = float(np.median(sig)) if u.size else float("nan")
    unusable = _unusable(fit, u, t, sig)
    if unusable is not None:
        fit.messages.append(unusable)
        return fit
    w = 1.0 / sig**2
    # a first pick close to the shot: the first branch is the direct wave through the origin
    origin = bool(through_origin and starts_at_shot(u))
    if breaks_m is not None and len(breaks_m) > 0:
        fit.branches, fit.branch_of_pick = _fit_at_breaks(fit, u, t, w, breaks_m, origin)
        fit.chosen_by = "breaks"
    else:
        chosen = _fit_by_count(fit, u, t, w, origin, n_branches, max_branches, min_contrast, slope_z)
        if chosen is None:
            return fit
        fit.branches, fit.branch_of_pick = chosen
    if refine and fit.chosen_by != "breaks":
        refined, labels = refine_envelope(u, t, w, fit.branches, origin)
        if labels is not None:
            fit.branches, fit.branch_of_pick = refined, labels
    fit.crossovers_m = crossovers(fit.branches)
    for b in fit.branches:
        if b.n_picks < 3:
            fit.messages.append(notice(
                "branch-few-picks", f"{fit.label}: branch {b.index} ({b.velocity_m_s:.0f} m/s) rests on only "
                f"{b.n_picks} picks", branch=b.index, fit=fit))
    return fit


def _unusable(fit, u, t, sig):
    """The notice that the side cannot be fitted (too few picks, times falling), or None."""
    m = u.size
    if m < MIN_PICKS_PER_SIDE:
        return notice("side-too-few-picks", f"{fit.label}: only {m} pick(s), at least {MIN_PICKS_PER_SIDE} are "
                      f"needed for a branch fit; side skipped", fit=fit)
    if not line_fit(u, t, 1.0 / sig**2, False)[0] > 0:
        return notice("side-times-decrease",
                      f"{fit.label}: times decrease with offset ({t[0] * 1e3:.2f} ms at {u[0]:g} m to "
                      f"{t[-1] * 1e3:.2f} ms at {u[-1]:g} m); side skipped (check the shot position and the picks)",
                      fit=fit)
    return None


def _fit_at_breaks(fit, u, t, w, breaks_m, origin):
    """Branches between the given break offsets (m); a run under two picks joins the one before."""
    m = u.size
    edges = sorted(float(b) for b in breaks_m)
    bounds = [0] + [int(np.searchsorted(u, b, side="right")) for b in edges] + [m]
    kept = [0]
    for b in bounds[1:]:
        if b - kept[-1] >= MIN_PICKS_PER_BRANCH:
            kept.append(b)
        elif b == m:
            kept[-1] = m
    if kept[-1] != m:
        kept[-1] = m
    if len(kept) - 1 < len(edges) + 1:
        listed = ", ".join(f"{b:g}" for b in edges)
        fit.messages.append(notice("breaks-too-close", f"{fit.label}: breaks at {listed} m leave a branch with fewer "
                                   f"than {MIN_PICKS_PER_BRANCH} picks; fitted {len(kept) - 1} branch(es)", fit=fit))
    if len(kept) < 2:
        kept = [0, m]
    return branches_from_bounds(u, t, w, kept, origin)


def _bic(splits, m, origin):
    """``BIC = chi2 + p ln(m)`` per branch count (Schwarz 1978), p = 3k - 1 parameters (two per
    branch and one per break), one less with the first branch through the origin."""
    lnm = math.log(m)
    return {k: c + (3 * k - 1 - (1 if origin else 0)) * lnm for k, (c, _) in splits.items()}


def _fit_by_count(fit, u, t, w, origin, n_branches, max_branches, min_contrast, slope_z):
    """Branches of the best concave split, the count given or chosen by the criterion
    (module docstring); None, with a notice, when no split has the velocity increasing."""
    m = u.size
    allowed = min(MAX_BRANCHES, max_branches if n_branches is None else n_branches, m // MIN_PICKS_PER_BRANCH)
    allowed = max(allowed, 1)
    chi2, slope, _, c0, s0 = segment_tables(u, t, w)
    splits = best_splits(chi2, slope, c0, s0, allowed, origin, min_contrast)
    if not splits:
        fit.messages.append(notice("side-no-increasing-fit",
                                   f"{fit.label}: no increasing branch fits these picks; side skipped", fit=fit))
        return None
    fit.bic = _bic(splits, m, origin)
    # a curve that bends the wrong way (a later branch slower) cannot be layered ground
    # with velocity increasing downward: compare with splits free of the concavity constraint
    free = best_splits(chi2, slope, c0, s0, allowed, origin, -1e9)
    free_bic = min(_bic(free, m, origin).values()) if free else np.inf
    if free_bic < min(fit.bic.values()) - BIC_MARGIN:
        fit.messages.append(notice(
            "times-bend-wrong-way",
            f"{fit.label}: the times bend the wrong way for flat layers (a later stretch is slower "
            f"than an earlier one): the refractor deepens away from the shot there, or the velocity "
            f"changes laterally or decreases with depth; an irregular refractor can also pass for an "
            f"extra layer (consider fixing the branch count)", fit=fit))
    if n_branches is not None:
        k = _requested_count(fit, splits, int(n_branches), m, min_contrast)
        fit.chosen_by = "count"
    else:
        k = _criterion_count(splits, fit.bic, u, t, w, origin, slope_z)
    return branches_from_bounds(u, t, w, splits[k][1], origin)


def _requested_count(fit, splits, k, m, min_contrast):
    """The count asked for, or the largest the picks allow (with a notice saying why)."""
    if k in splits:
        return k
    best_k = max(splits)
    limit = m // MIN_PICKS_PER_BRANCH
    why = (f"{m} picks allow at most {min(limit, MAX_BRANCHES)}" if k > limit or k > MAX_BRANCHES
           else f"no split into {k} branches with velocity increasing by {min_contrast:.0%} each")
    fit.messages.append(notice("branch-count-reduced", f"{fit.label}: {k} branches requested but {why}; "
                               f"fitted {best_k}", fit=fit))
    return best_k


def _criterion_count(splits, bic, u, t, w, origin, slope_z):
    """The fewest branches whose BIC is within ``BIC_MARGIN`` of the least (more branches
    must be "very strongly" preferred, Kass & Raftery 1995, JASA 90, sec. 3.2), lowered
    until every break separates slopes that differ by ``slope_z`` standard errors."""
    least = min(bic.values())
    k = min(c for c, v in bic.items() if v - least < BIC_MARGIN)
    while k > 1:
        trial, _ = branches_from_bounds(u, t, w, splits[k][1], origin)
        if all(slopes_distinct(b1, b2, slope_z) for b1, b2 in zip(trial[:-1], trial[1:])):
            break
        k -= 1
        while k > 1 and k not in splits:
            k -= 1
    return k


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
        fit.messages.append(notice("outliers-left-out",
                                   f"{fit.label}: {int(flagged.sum())} outlier pick(s) left out of the fit", fit=fit))
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
