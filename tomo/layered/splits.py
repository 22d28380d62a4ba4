"""The split-point search of a shot side's branches and the line fits it rests on.

The picks of a side, sorted by |offset|, are split into contiguous runs, each fitted by a
weighted least-squares line (weights ``1/sigma^2``); the split with the least chi-squared
for each branch count is found exactly by dynamic programming over all splits, keeping
only those in which the slowness decreases from one branch to the next (the concavity
of a first-arrival curve over layers whose velocity increases downward; Telford,
Geldart & Sheriff 1990, Applied Geophysics, sec. 4.3). :func:`refine_envelope` then
fits all lines together as the lower envelope of the picks. The choice of the branch
count is :mod:`tomo.layered.branches`'s.
"""

from __future__ import annotations

import math

import numpy as np

from .sidefit import Branch

__all__ = ["segment_tables", "best_splits", "line_fit", "branches_from_bounds", "refine_envelope",
           "crossovers", "slopes_distinct", "pick_step", "starts_at_shot", "MIN_PICKS_PER_BRANCH"]

#: Fewest picks a branch may have (two define a line; three are needed to see its misfit).
MIN_PICKS_PER_BRANCH = 2


def pick_step(offsets_m):
    """Median step (m) between the sorted |offsets| of one shot side's picks; 1 m with
    fewer than two picks.

    This is the side's own pick spacing, used to tell whether its first pick is next
    to the shot; the line's geophone spacing is :func:`tomo.survey.geometry.station_spacing`.
    """
    u = np.asarray(offsets_m, float)
    return float(np.median(np.diff(u))) if u.size > 1 else 1.0


def starts_at_shot(offsets_m):
    """True when the side's first pick is within 1.5 pick steps of the shot, so that its
    first branch is the direct wave (common practice)."""
    u = np.asarray(offsets_m, float)
    if u.size < 2:
        return False
    return bool(u[0] <= 1.5 * max(pick_step(u), 1e-9) + 1e-9)


# --- segment costs ---------------------------------------------------------------

def segment_tables(u, t, w):
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
    UUr, UTr, TTr = cum(w * u * u), cum(w * u * t), cum(w * t * t)
    jj = np.arange(m + 1)
    with np.errstate(invalid="ignore", divide="ignore"):
        s0 = UTr[jj] / UUr[jj]
        c0 = np.maximum(TTr[jj] - s0 * UTr[jj], 0.0)
    ok0 = jj >= MIN_PICKS_PER_BRANCH
    s0 = np.where(ok0, s0, np.nan)
    c0 = np.where(ok0, c0, np.nan)
    return chi2, slope, intercept, c0, s0


def best_splits(chi2, slope, chi2_0, slope_0, max_k, through_origin, min_contrast):
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


def line_fit(u, t, w, through_origin):
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


def branches_from_bounds(u, t, w, bounds, through_origin):
    """Branches fitted to the runs ``bounds[k] .. bounds[k+1]-1`` of the picks, and the
    1-based branch of each pick; the first held through the origin with ``through_origin``."""
    branches = []
    labels = np.zeros(u.size, int)
    for k in range(len(bounds) - 1):
        i, j = bounds[k], bounds[k + 1]
        origin = through_origin and k == 0
        s, a, ds, da = line_fit(u[i:j], t[i:j], w[i:j], origin)
        res = t[i:j] - (a + s * u[i:j])
        branches.append(Branch(k + 1, s, a, float(u[i]), float(u[j - 1]), j - i,
                               float(np.sqrt(np.mean(res**2))), ds, da))
        labels[i:j] = k + 1
    return branches, labels


def refine_envelope(u, t, w, branches, through_origin):
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


def crossovers(branches):
    """|offset| (m) where consecutive branch lines cross, ``(a_2 - a_1)/(s_1 - s_2)``
    (Telford et al. 1990, sec. 4.3); NaN for parallel lines."""
    out = []
    for b1, b2 in zip(branches[:-1], branches[1:]):
        ds = b1.slowness_s_m - b2.slowness_s_m
        out.append(float((b2.intercept_s - b1.intercept_s) / ds) if ds != 0 else float("nan"))
    return out


def slopes_distinct(b1, b2, z):
    """True when two neighbouring branches' slownesses differ by more than z standard errors."""
    se = math.hypot(b1.slowness_sigma_s_m, b2.slowness_sigma_s_m)
    if not math.isfinite(se):
        return True
    return (b1.slowness_s_m - b2.slowness_s_m) > z * se
