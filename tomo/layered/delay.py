"""Delay times under every geophone: the plus-minus method and the generalized
reciprocal method (GRM), giving an irregular refractor profile.

For a refractor seen from a shot A on the left and a shot B on the right (a reversed
pair), with ``t_AG``, ``t_BG`` the head-wave times at geophone G and ``t_AB`` the
reciprocal time between the shots:

- plus time ``T+ = t_AG + t_BG - t_AB`` is twice the delay time at G, and minus time
  ``T- = t_AG - t_BG - t_AB`` grows with x at ``2/V`` (V the refractor velocity)
  (Hagedoorn 1959, Geophysical Prospecting 7, "The plus-minus method of interpreting
  seismic refraction sections");
- GRM: with X and Y a distance XY apart around G, velocity analysis function
  ``T_V = (T_AY - T_BX + T_AB)/2`` (slope ``1/V'``) and generalized time-depth
  ``T_G = (T_AY + T_BX - (T_AB + XY/V'))/2`` (Palmer 1980, The Generalized Reciprocal
  Method of Seismic Refraction Interpretation, SEG). XY = 0 gives the plus-minus time
  depth ``T+/2``.

A time-depth ``T`` over layers of velocity ``V_i`` above a refractor of velocity ``V_n``
is ``T = sum_i h_i sqrt(V_n^2 - V_i^2)/(V_i V_n)``; the deepest unknown thickness follows
with the shallower ones taken from the refractor above (where profiled) or the
intercept-time depths (:mod:`tomo.layered.thickness`). The depth is measured below the geophone
and is strictly the distance to the refractor along its normal; for a refractor dipping
by ``d`` a vertical depth differs by a factor ``1/cos d`` (1.5 % at 10 deg), which we
neglect.

Optimum XY. For a given refractor, the rays to X and Y leave the refractor at one point
when ``XY = 2 sum_i h_i tan(theta_in)`` (Palmer 1980); we find that XY as the fixed point of
this relation with the GRM depths themselves (starting from the plus-minus depths),
averaged over the geophones. As Palmer's own check, each pair also records the XY
whose velocity-analysis function is the smoothest over a scan (``grm_xy_smoothest_m``,
:func:`grm_xy_scan`); over an irregular refractor the two agree (tests).

Reciprocal time. ``t_AB`` comes from the head-wave pick of each shot nearest the other
shot (within one geophone spacing, moved along the branch slope). For a pair without
one (off-end shots) it is chosen so that the pair's plus times agree, in the median,
with those of pairs that have one, since the delay time under a geophone does not depend
on the shot; failing that, from the branch lines, which assumes a plane refractor.

Uncertainty. Linear propagation of the pick sigmas of ``t_AG``, ``t_BG`` and ``t_AB`` and
of the standard error of the refractor velocity from the minus-time regression into the
depth; it says nothing about hidden layers or velocity inversions, which bias depths.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..core.errors import InputError
from ..survey.geometry import station_spacing
from .branches import pick_sigma
from .codes import notice
from .profile import COLUMNS, DelayPair, RefractorProfile
from .result import interface_depths

__all__ = ["delay_time_profile", "depth_from_time_depth", "plus_minus_times", "grm_times", "grm_xy_scan",
           "head_waves", "HeadWaves", "PairTimes", "reversed_pair_times", "match_reciprocal_times",
           "pooled_velocity"]

#: Reversed geophones (distinct) a minus-time velocity needs to overrule the line velocity
#: (common practice: a slope from a handful of points cannot be checked).
MINUS_TIME_MIN_GEOPHONES = 10
#: Largest relative standard error of such a minus-time velocity (common practice).
MINUS_TIME_MAX_REL_SIGMA = 0.05


def depth_from_time_depth(time_depth_s, velocities_above_m_s, v_refractor_m_s, upper_thicknesses_m=()):
    """Thickness (m) of the deepest layer above a refractor from a time-depth.

    ``T = sum_{i<n} h_i sqrt(V_n^2 - V_i^2)/(V_i V_n)`` solved for the last ``h``
    (Hagedoorn 1959; Palmer 1980). Returns the depth of the refractor below the
    surface (sum of all thicknesses), m; works on arrays of ``time_depth_s``.
    """
    vs = [float(v) for v in velocities_above_m_s]
    vn = float(v_refractor_m_s)
    upper = [np.asarray(h, float) for h in upper_thicknesses_m]
    if len(upper) != len(vs) - 1:
        raise InputError(f"need {len(vs) - 1} upper thicknesses, got {len(upper)}")
    if not vn > vs[-1]:
        return np.full(np.shape(time_depth_s), np.nan)
    t = np.asarray(time_depth_s, float)
    above = sum(h * math.sqrt(vn * vn - v * v) / (v * vn) for h, v in zip(upper, vs[:-1]))
    last = (t - above) * vs[-1] * vn / math.sqrt(vn * vn - vs[-1] ** 2)
    return last + sum(upper) if upper else last


def plus_minus_times(x_g, t_ag, t_bg, t_ab):
    """Plus and minus times (s) and the refractor velocity (m/s) from the minus-time slope.

    Returns ``(plus_s, minus_s, velocity_m_s, velocity_sigma_m_s)``; the velocity is NaN
    with fewer than three geophones.
    """
    x_g = np.asarray(x_g, float)
    plus = np.asarray(t_ag) + np.asarray(t_bg) - t_ab
    minus = np.asarray(t_ag) - np.asarray(t_bg) - t_ab
    v, dv = float("nan"), float("nan")
    if x_g.size >= 3 and np.ptp(x_g) > 0:
        slope, se = _slope(x_g, minus)
        if slope > 0:
            v = 2.0 / slope
            dv = 2.0 * se / slope**2
    return plus, minus, v, dv


def grm_times(x_g, interp_a, interp_b, t_ab, xy_m):
    """GRM velocity-analysis and time-depth functions at geophones ``x_g`` (m).

    ``interp_a(x)``, ``interp_b(x)`` give the head-wave times (s) from shots A (left) and
    B (right) at x, NaN outside their coverage. Returns ``(x, t_v, t_g, v_prime,
    v_prime_sigma)`` for the geophones where both X and Y are covered.
    """
    x_g = np.asarray(x_g, float)
    t_ay = interp_a(x_g + 0.5 * xy_m)
    t_bx = interp_b(x_g - 0.5 * xy_m)
    ok = np.isfinite(t_ay) & np.isfinite(t_bx)
    x, t_ay, t_bx = x_g[ok], t_ay[ok], t_bx[ok]
    t_v = 0.5 * (t_ay - t_bx + t_ab)
    if x.size < 3 or np.ptp(x) <= 0:
        return x, t_v, np.full(x.size, np.nan), float("nan"), float("nan")
    slope, se = _slope(x, t_v)
    if not slope > 0:
        return x, t_v, np.full(x.size, np.nan), float("nan"), float("nan")
    vp = 1.0 / slope
    t_g = 0.5 * (t_ay + t_bx - (t_ab + xy_m / vp))
    return x, t_v, t_g, vp, se / slope**2


def grm_xy_scan(x_g, interp_a, interp_b, t_ab, xy_values_m):
    """Roughness (s) of the GRM velocity-analysis function for each XY (m).

    The RMS deviation of ``T_V`` from its least-squares line over the geophones. At the
    optimum XY the forward and reverse rays leave the refractor at one point and
    ``T_V`` is the simplest (Palmer 1980); away from it ``T_V`` takes up the refractor's
    relief. Over a plane refractor every XY gives the noise level only. NaN where fewer
    than three geophones are covered.
    """
    out = []
    for xy in xy_values_m:
        x, t_v, _, _, _ = grm_times(x_g, interp_a, interp_b, t_ab, float(xy))
        if x.size < 3:
            out.append(float("nan"))
            continue
        coef = np.polyfit(x, t_v, 1)
        out.append(float(np.sqrt(np.mean((t_v - np.polyval(coef, x)) ** 2))))
    return np.array(out)


def _slope(x, y):
    a = np.column_stack([x - x.mean(), np.ones_like(x)])
    coef = np.linalg.lstsq(a, y, rcond=None)[0]
    n = x.size
    resid = y - a @ coef
    s2 = float(resid @ resid) / max(n - 2, 1)
    se = math.sqrt(s2 / float(((x - x.mean()) ** 2).sum()))
    return float(coef[0]), se


def _interp_fn(xs, ts):
    order = np.argsort(xs)
    xs, ts = xs[order], ts[order]

    def f(x):
        x = np.asarray(x, float)
        out = np.interp(x, xs, ts)
        return np.where((x >= xs[0] - 1e-9) & (x <= xs[-1] + 1e-9), out, np.nan)
    return f


@dataclass
class HeadWaves:
    """The head-wave picks of one shot side on one refractor.

    ``branch`` is the side's farthest branch on the refractor (it stands for the side
    near the other shot); ``x_m`` the geophone positions (rounded to the mm), ``time_s``
    and ``sigma_s`` the picks and their sigmas.
    """

    branch: object
    x_m: np.ndarray
    time_s: np.ndarray
    sigma_s: np.ndarray


def head_waves(fit, layer_of_branch, k, sigma_s):
    """The picks of a side on the top of layer k (:class:`HeadWaves`), or None.

    Every branch of the side on this refractor counts (two or more where a lateral
    change split it). Near the crossover a pick may as well be the arrival from the
    layer above: only picks clearly (two sigmas) earlier than the branch above would
    give there are kept (common practice: crossover picks are ambiguous).
    """
    mine = [b for b, layer in zip(fit.branches, layer_of_branch) if layer == k]
    if not mine:
        return None
    sel = np.isin(fit.branch_of_pick, [b.index for b in mine])
    above = [b for b, layer in zip(fit.branches, layer_of_branch) if 0 < layer < k]
    if above:
        upper = above[-1].time(fit.offsets_m)
        sel &= fit.times_s < upper - 2.0 * sigma_s[fit.pick_index]
    if not np.any(sel):
        return None
    xs = fit.shot_x + fit.side * fit.offsets_m[sel]
    return HeadWaves(mine[-1], np.round(xs, 3), fit.times_s[sel], sigma_s[fit.pick_index[sel]])


@dataclass
class PairTimes:
    """A reversed pair on one refractor: shot A left (shooting right), shot B right.

    ``common`` are the geophones between the shots that both record, ``ia``/``ib`` their
    indices into ``a``/``b``; ``t_ab`` the reciprocal time (s) and where it came from;
    ``plus`` the plus times (s); ``v_pm``, ``dv_pm`` the minus-time velocity and its
    sigma (m/s, NaN when not defined).
    """

    fa: object
    fb: object
    a: HeadWaves
    b: HeadWaves
    common: np.ndarray
    ia: np.ndarray
    ib: np.ndarray
    t_ab: float = float("nan")
    t_ab_source: str = ""
    plus: np.ndarray = None
    v_pm: float = float("nan")
    dv_pm: float = float("nan")

    def set_reciprocal_time(self, t_ab, source):
        """Set ``t_ab`` (s) and recompute the plus times and the minus-time velocity."""
        self.t_ab, self.t_ab_source = float(t_ab), source
        self.plus, _, self.v_pm, self.dv_pm = plus_minus_times(self.common, self.a.time_s[self.ia],
                                                               self.b.time_s[self.ib], self.t_ab)


def reversed_pair_times(result, k, sigma_s, spacing):
    """Every reversed pair of sides recording the top of layer k at two or more common
    geophones between the shots, with its reciprocal time (:func:`_reciprocal_time`)."""
    out = []
    for fa, la in zip(result.sides, result.layer_of_branch):
        sa = head_waves(fa, la, k, sigma_s) if fa.ok and fa.side == 1 else None
        if sa is None:
            continue
        for fb, lb in zip(result.sides, result.layer_of_branch):
            if not fb.ok or fb.side != -1 or fb.shot_x <= fa.shot_x:
                continue
            sb = head_waves(fb, lb, k, sigma_s)
            if sb is None:
                continue
            common, ia, ib = np.intersect1d(sa.x_m, sb.x_m, return_indices=True)
            inside = (common > fa.shot_x) & (common < fb.shot_x)
            if inside.sum() < 2:
                continue
            pair = PairTimes(fa, fb, sa, sb, common[inside], ia[inside], ib[inside])
            pair.set_reciprocal_time(*_reciprocal_time(fa.shot_x, fb.shot_x, sa.x_m, sa.time_s, sb.x_m, sb.time_s,
                                                       sa.branch, sb.branch, fb.shot_x - fa.shot_x, spacing))
            out.append(pair)
    return out


def match_reciprocal_times(pairs):
    """Give a pair without a measured reciprocal time (off-end shots) the ``t_AB`` that makes
    its plus times agree, in the median, with those of the pairs that have one at common
    geophones: the delay time under a geophone does not depend on the shots (Hagedoorn
    1959). Failing that, ``t_AB`` stays from the branch lines. Changes the pairs in place."""
    ref = {}
    for c in pairs:
        if c.t_ab_source == "picks":
            for x, pl in zip(c.common, c.plus):
                ref.setdefault(float(x), []).append(float(pl))
    for c in pairs:
        if c.t_ab_source == "picks":
            continue
        shared = [i for i, x in enumerate(c.common) if float(x) in ref]
        if len(shared) >= 2:
            sum_t = c.a.time_s[c.ia] + c.b.time_s[c.ib]
            t_ab = float(np.median([sum_t[i] - np.mean(ref[float(c.common[i])]) for i in shared]))
            c.set_reciprocal_time(t_ab, "matched to reciprocal pairs")


def pooled_velocity(pairs, v_above, v_line, k):
    """One refractor velocity for all pairs of the top of layer k, m/s, and its sigma.

    The minus-time velocities weighted by their variances (Hagedoorn 1959 uses the
    minus-time slope; pooling the pairs keeps short pairs from carrying their own poorly
    determined velocity). The minus-time velocity does not depend on the refractor's
    shape, the branch-slope line velocity ``v_line`` does; so one resting on many
    reversed geophones and well determined stands even far from ``v_line``. One from a
    few geophones (a short overlap, where steep relief breaks the delay-time assumptions)
    must stay within the plausible range of it, else ``v_line`` is used (sigma NaN) with
    a notice. Returns ``(velocity_m_s, sigma_m_s, notice or None)``.
    """
    good = [(c.v_pm, c.dv_pm) for c in pairs
            if math.isfinite(c.v_pm) and math.isfinite(c.dv_pm) and c.dv_pm > 0 and c.v_pm > v_above]
    if good:
        wv = np.array([1.0 / dv**2 for _, dv in good])
        v_pool = float(np.sum(wv * np.array([v for v, _ in good])) / wv.sum())
        dv_pool = float(1.0 / math.sqrt(wv.sum()))
    else:
        v_pool, dv_pool = float("nan"), float("nan")
    n_reversed = len({float(x) for c in pairs for x in c.common})
    well_determined = (n_reversed >= MINUS_TIME_MIN_GEOPHONES and math.isfinite(dv_pool)
                       and dv_pool < MINUS_TIME_MAX_REL_SIGMA * v_pool)
    plausible = math.isfinite(v_pool) and v_pool > v_above and (well_determined or 0.67 < v_pool / v_line < 1.5)
    if plausible:
        return v_pool, dv_pool, None
    note = None if not pairs else notice(
        "minus-time-velocity-rejected", f"refractor {k - 1}: minus-time velocity {v_pool:.0f} m/s is implausible or "
        f"missing; the line velocity {v_line:.0f} m/s is used", layer=k)
    return v_line, float("nan"), note


def _pair_depths(c, result, depth_at, k, velocities, v_pool, dv_pool, grm, grm_xy_m, spacing, collected):
    """Plus-minus (and GRM) depths of one pair into ``collected``; returns the pair's record."""
    j = k - 1
    sig_ab = float(np.median(np.concatenate([c.a.sigma_s, c.b.sigma_s])))
    upper = _upper_thicknesses(result, depth_at, j, c.common, interface_depths)
    vs_above = velocities[:k - 1]
    depth = depth_from_time_depth(0.5 * c.plus, vs_above, v_pool, upper)
    sig_plus = np.sqrt(c.a.sigma_s[c.ia] ** 2 + c.b.sigma_s[c.ib] ** 2 + sig_ab**2)
    unc = _uncertainty(0.5 * c.plus, 0.5 * sig_plus, vs_above, v_pool, dv_pool, upper)
    pair = DelayPair(refractor=j, shot_left_x=c.fa.shot_x, shot_right_x=c.fb.shot_x,
                     n_geophones=int(c.common.size), reciprocal_time_ms=c.t_ab * 1e3,
                     reciprocal_time_from=c.t_ab_source,
                     minus_time_velocity_m_s=c.v_pm if math.isfinite(c.v_pm) else None, velocity_used_m_s=v_pool)
    for x, d, u in zip(c.common, depth, unc):
        collected["plus-minus"].setdefault(float(x), []).append((float(d), float(u), v_pool))
    if not grm:
        return pair
    fa_i, fb_i = _interp_fn(c.a.x_m, c.a.time_s), _interp_fn(c.b.x_m, c.b.time_s)
    g = _grm_pair(c.common, fa_i, fb_i, c.t_ab, vs_above, upper_fn=lambda xs: _upper_thicknesses(
        result, depth_at, j, xs, interface_depths), xy_fixed=grm_xy_m, sig=sig_ab)
    if g is not None:
        # Palmer's check on the optimum: the XY of the simplest velocity analysis
        scan = np.arange(0.0, 2.0 * max(g["xy_m"], spacing) + 1e-9, spacing / 4.0)
        rough = grm_xy_scan(c.common, fa_i, fb_i, c.t_ab, scan)
        smooth = float(scan[np.nanargmin(rough)]) if np.any(np.isfinite(rough)) else None
        pair.grm_xy_m, pair.grm_velocity_m_s, pair.grm_xy_smoothest_m = g["xy_m"], g["v_prime"], smooth
        pair.grm_xy_scan_m = [float(v) for v in scan]
        pair.grm_velocity_analysis_rms_ms = [float(v) * 1e3 for v in rough]
        for x, d, u in zip(g["x"], g["depth"], g["unc"]):
            collected["grm"].setdefault(float(x), []).append((float(d), float(u), g["v_prime"]))
    return pair


def _add_rows(rows, collected, j, depth_at, ground_z):
    """One row per geophone and method: the mean over the pairs (depth m, uncertainty m:
    the larger of the propagated one and the spread of the pairs, velocity m/s)."""
    for method, table in collected.items():
        depth_at[(j, method)] = {}
        for x in sorted(table):
            entries = table[x]
            d = np.array([e[0] for e in entries])
            u = np.array([e[1] for e in entries])
            v = float(np.mean([e[2] for e in entries]))
            dm = float(np.mean(d))
            um = float(np.sqrt(np.nanmean(u**2) / len(u))) if np.any(np.isfinite(u)) else float("nan")
            if len(d) > 1:
                um = float(np.nanmax([um, np.std(d)]))
            depth_at[(j, method)][x] = dm
            zs = float(ground_z(x))
            for c, value in zip(COLUMNS, (j, x, zs, dm, zs - dm, um, v, method)):
                rows[c].append(value)


def delay_time_profile(picks, result, terrain=None, grm=False, grm_xy_m=None):
    """Plus-minus (and optionally GRM) refractor depths under the geophones.

    Parameters
    ----------
    picks : Picks
        The picks the ``result`` was fitted to.
    result : LayeredResult
        Branch fits, layer matching and line-wide velocities (:func:`tomo.layered.interpret_line`).
    terrain : Terrain, optional
        Ground elevation for ``surface_z`` (default: the geophone elevations in the picks).
    grm : bool
        Also compute the GRM profile.
    grm_xy_m : float, optional
        Fixed XY distance (m); default: the optimum (module docstring).

    Returns
    -------
    RefractorProfile

    Notes
    -----
    Refractor by refractor, top down: the reversed pairs and their reciprocal times
    (:func:`reversed_pair_times`, :func:`match_reciprocal_times`), one velocity for all
    pairs (:func:`pooled_velocity`), each pair's depths, and their mean per geophone.
    """
    velocities = [lay.velocity_m_s for lay in result.layers]
    sig = pick_sigma(picks, float(result.options.get("sigma_ms", 0.5)))
    spacing = station_spacing(picks)
    surface = {}
    for x, z in zip(np.round(picks.receiver_x, 3), picks.receiver_z):
        surface.setdefault(float(x), float(z))

    def ground_z(x):
        return terrain.elevation(x) if terrain is not None else surface.get(x, 0.0)

    rows = {c: [] for c in COLUMNS}
    pairs_info, warnings = [], []
    depth_at = {}  # (refractor, method) -> {x: depth}
    for k in range(2, len(velocities) + 1):
        pairs = reversed_pair_times(result, k, sig, spacing)
        match_reciprocal_times(pairs)
        v_pool, dv_pool, note = pooled_velocity(pairs, velocities[k - 2], velocities[k - 1], k)
        if note is not None:
            warnings.append(note)
        collected = {"plus-minus": {}, "grm": {}}
        for c in pairs:
            pairs_info.append(_pair_depths(c, result, depth_at, k, velocities, v_pool, dv_pool, grm, grm_xy_m,
                                           spacing, collected))
        if not collected["plus-minus"]:
            warnings.append(notice(
                "refractor-not-profiled", f"refractor {k - 1} (top of layer {k}): no reversed pair of shots records "
                f"it at common geophones; no delay-time depths (the intercept-time depths under the shots stand "
                f"alone)", layer=k))
        _add_rows(rows, collected, k - 1, depth_at, ground_z)
    return RefractorProfile(
        refractor=np.asarray(rows["refractor"], int), x=np.asarray(rows["x"], float),
        surface_z=np.asarray(rows["surface_z"], float), depth_m=np.asarray(rows["depth_m"], float),
        elevation_m=np.asarray(rows["elevation_m"], float), uncertainty_m=np.asarray(rows["uncertainty_m"], float),
        velocity_m_s=np.asarray(rows["velocity_m_s"], float), method=np.asarray(rows["method"], dtype=object),
        pairs=pairs_info, warnings=warnings)


def _reciprocal_time(xa_shot, xb_shot, xa, ta, xb, tb, ba, bb, length, spacing):
    """t_AB, the head-wave time between the shots of a pair.

    From the head-wave pick of each shot nearest the other shot when it lies within one
    geophone spacing of it, moved to the shot along the branch slope (reciprocity makes
    the two estimates equal; their mean is used); else from the two branch lines.
    """
    measured = []
    k = int(np.argmin(np.abs(xa - xb_shot)))
    if abs(xa[k] - xb_shot) <= 1.01 * spacing:
        measured.append(float(ta[k]) + ba.slowness_s_m * (xb_shot - float(xa[k])))
    k = int(np.argmin(np.abs(xb - xa_shot)))
    if abs(xb[k] - xa_shot) <= 1.01 * spacing:
        measured.append(float(tb[k]) + bb.slowness_s_m * (float(xb[k]) - xa_shot))
    if measured:
        return float(np.mean(measured)), "picks"
    return 0.5 * (float(ba.time(length)) + float(bb.time(length))), "branch lines"


def _upper_thicknesses(result, depth_at, j, xs, interface_depths):
    """Thicknesses (m) of layers 1..j-1 at ``xs``: from the profiled refractors above, else
    from the intercept-time depths."""
    if j == 1:
        return []
    base = interface_depths(result, xs)  # (n-1, len(xs)) tops of layers 2..n
    tops = []
    for r in range(1, j):
        d = base[r - 1].copy()
        prof = depth_at.get((r, "plus-minus"), {})
        for i, x in enumerate(xs):
            if float(x) in prof:
                d[i] = prof[float(x)]
        tops.append(d)
    tops = np.maximum.accumulate(np.array(tops), axis=0)
    h = np.diff(np.vstack([np.zeros(len(xs)), tops]), axis=0)
    return [h[i] for i in range(j - 1)]


def _uncertainty(time_depth, sigma_td, vs_above, v, dv, upper):
    dd_dt = depth_from_time_depth(np.ones(1), vs_above, v, [np.zeros(1) for _ in upper]) \
        - depth_from_time_depth(np.zeros(1), vs_above, v, [np.zeros(1) for _ in upper])
    var = (dd_dt[0] * np.asarray(sigma_td)) ** 2
    if math.isfinite(dv) and dv > 0:
        step = 1e-3 * v
        d1 = depth_from_time_depth(time_depth, vs_above, v + step, upper)
        d0 = depth_from_time_depth(time_depth, vs_above, v - step, upper)
        var = var + ((d1 - d0) / (2 * step) * dv) ** 2
    return np.sqrt(var)


def _grm_pair(x_g, interp_a, interp_b, t_ab, vs_above, upper_fn, xy_fixed, sig, iterations=20):
    """GRM depths for one pair, XY fixed or at the self-consistent optimum."""
    xy = 0.0 if xy_fixed is None else float(xy_fixed)
    for _ in range(iterations if xy_fixed is None else 1):
        x, t_v, t_g, vp, dvp = grm_times(x_g, interp_a, interp_b, t_ab, xy)
        if x.size < 3 or not math.isfinite(vp) or not vp > vs_above[-1]:
            return None
        upper = upper_fn(x)
        depth = depth_from_time_depth(t_g, vs_above, vp, upper)
        if xy_fixed is not None:
            break
        # XY = 2 sum h_i tan(theta_in), sin(theta_in) = V_i / V'  (Palmer 1980)
        hs = list(upper) + [depth - (sum(upper) if upper else 0.0)]
        new = float(np.nanmean(sum(2 * h * (v / vp) / math.sqrt(1 - (v / vp) ** 2) for h, v in zip(hs, vs_above))))
        if not math.isfinite(new) or new < 0:
            break
        if abs(new - xy) < 1e-4:
            xy = new
            break
        xy = new
    x, t_v, t_g, vp, dvp = grm_times(x_g, interp_a, interp_b, t_ab, xy)
    if x.size < 3 or not math.isfinite(vp) or not vp > vs_above[-1]:
        return None
    upper = upper_fn(x)
    depth = depth_from_time_depth(t_g, vs_above, vp, upper)
    unc = _uncertainty(t_g, np.full(x.size, sig), vs_above, vp, dvp, upper)
    return {"x": x, "depth": depth, "unc": unc, "xy_m": xy, "v_prime": vp}
