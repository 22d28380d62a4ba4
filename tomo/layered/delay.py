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
intercept-time depths (:mod:`tomo.layered`). The depth is measured below the geophone
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

import numpy as np

from ..core.errors import InputError
from .branches import pick_sigma
from .profile import COLUMNS, RefractorProfile
from .result import interface_depths

__all__ = ["delay_time_profile", "depth_from_time_depth", "plus_minus_times", "grm_times", "grm_xy_scan"]

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
    """
    velocities = [lay["velocity_m_s"] for lay in result.layers]
    n_layers = len(velocities)
    sigma_default = float(result.options.get("sigma_ms", 0.5)) * 1e-3
    sig = pick_sigma(picks, sigma_default * 1e3)
    rx = np.round(picks.receiver_x, 3)
    spacing = float(np.median(np.diff(np.unique(rx)))) if np.unique(rx).size > 1 else 1.0
    surface = {}
    for x, z in zip(rx, picks.receiver_z):
        surface.setdefault(float(x), float(z))
    rows = {c: [] for c in COLUMNS}
    pairs_info, warnings = [], []
    depth_at = {}  # (refractor, method) -> {x: depth}

    def side_branch(fit, lob, k):
        # every branch of the side on this refractor (two or more where a lateral
        # change split it); the farthest one stands for the side near the other shot
        mine = [b for b, layer in zip(fit.branches, lob) if layer == k]
        if not mine:
            return None
        sel = np.isin(fit.branch_of_pick, [b.index for b in mine])
        # Near the crossover a pick may as well be the arrival from the layer above: keep
        # only picks clearly (two sigmas) earlier than the branch above would give there
        # (common practice: crossover picks are ambiguous).
        above = [b for b, layer in zip(fit.branches, lob) if 0 < layer < k]
        if above:
            upper = above[-1].time(fit.offsets_m)
            sel &= fit.times_s < upper - 2.0 * sig[fit.pick_index]
        if not np.any(sel):
            return None
        xs = fit.shot_x + fit.side * fit.offsets_m[sel]
        return mine[-1], np.round(xs, 3), fit.times_s[sel], sig[fit.pick_index[sel]]

    for k in range(2, n_layers + 1):
        j = k - 1  # refractor number
        vk_line = velocities[k - 1]
        collected = {"plus-minus": {}, "grm": {}}
        candidates = []
        for fa, la in zip(result.sides, result.layer_of_branch):
            if not fa.ok or fa.side != 1:
                continue
            sa = side_branch(fa, la, k)
            if sa is None:
                continue
            for fb, lb in zip(result.sides, result.layer_of_branch):
                if not fb.ok or fb.side != -1 or fb.shot_x <= fa.shot_x:
                    continue
                sb = side_branch(fb, lb, k)
                if sb is None:
                    continue
                ba, xa, ta, siga = sa
                bb, xb, tb, sigb = sb
                common, ia, ib = np.intersect1d(xa, xb, return_indices=True)
                inside = (common > fa.shot_x) & (common < fb.shot_x)
                common, ia, ib = common[inside], ia[inside], ib[inside]
                if common.size < 2:
                    continue
                length = fb.shot_x - fa.shot_x
                t_ab, t_ab_source = _reciprocal_time(fa.shot_x, fb.shot_x, xa, ta, xb, tb, ba, bb, length, spacing)
                plus, _, v_pm, dv_pm = plus_minus_times(common, ta[ia], tb[ib], t_ab)
                candidates.append((fa, fb, sa, sb, common, ia, ib, t_ab, t_ab_source, plus, v_pm, dv_pm))
        # A pair without a measured reciprocal time (off-end shots) gets the t_AB that makes
        # its plus times agree, in the median, with those of the pairs that have one at
        # common geophones: the delay time under a geophone does not depend on the shots
        # (Hagedoorn 1959). Failing that, t_AB stays from the branch lines.
        ref = {}
        for c in candidates:
            if c[8] == "picks":
                for x, pl in zip(c[4], c[9]):
                    ref.setdefault(float(x), []).append(float(pl))
        for n, c in enumerate(candidates):
            if c[8] == "picks":
                continue
            fa, fb, sa, sb, common, ia, ib = c[:7]
            shared = [i for i, x in enumerate(common) if float(x) in ref]
            if len(shared) >= 2:
                sum_t = sa[2][ia] + sb[2][ib]
                t_ab = float(np.median([sum_t[i] - np.mean(ref[float(common[i])]) for i in shared]))
                plus, _, v_pm, dv_pm = plus_minus_times(common, sa[2][ia], sb[2][ib], t_ab)
                candidates[n] = (fa, fb, sa, sb, common, ia, ib, t_ab, "matched to reciprocal pairs", plus, v_pm, dv_pm)
        # one refractor velocity for all pairs: the minus-time velocities weighted by
        # their variances (Hagedoorn 1959 uses the minus-time slope; pooling the pairs
        # keeps short pairs from carrying their own poorly determined velocity)
        good = [(c[10], c[11]) for c in candidates
                if math.isfinite(c[10]) and math.isfinite(c[11]) and c[11] > 0 and c[10] > velocities[k - 2]]
        if good:
            wv = np.array([1.0 / dv**2 for _, dv in good])
            v_pool = float(np.sum(wv * np.array([v for v, _ in good])) / wv.sum())
            dv_pool = float(1.0 / math.sqrt(wv.sum()))
        else:
            v_pool, dv_pool = float("nan"), float("nan")
        # The minus-time velocity does not depend on the refractor's shape (Hagedoorn
        # 1959), the branch-slope line velocity does; so a minus-time velocity resting on
        # many reversed geophones and well determined stands even far from the line
        # velocity. One from a few geophones (a short overlap, where steep relief breaks
        # the delay-time assumptions) must stay within the plausible range of it.
        n_reversed = len({float(x) for c in candidates for x in c[4]})
        well_determined = (n_reversed >= MINUS_TIME_MIN_GEOPHONES and math.isfinite(dv_pool)
                           and dv_pool < MINUS_TIME_MAX_REL_SIGMA * v_pool)
        plausible = math.isfinite(v_pool) and v_pool > velocities[k - 2] and (
            well_determined or 0.67 < v_pool / vk_line < 1.5)
        if not plausible:
            if candidates:
                warnings.append(f"refractor {j}: minus-time velocity {v_pool:.0f} m/s is implausible or missing; "
                                f"the line velocity {vk_line:.0f} m/s is used")
            v_pool, dv_pool = vk_line, float("nan")
        for fa, fb, sa, sb, common, ia, ib, t_ab, t_ab_source, plus, v_pm, dv_pm in candidates:
            ba, xa, ta, siga = sa
            bb, xb, tb, sigb = sb
            sig_ab = float(np.median(np.concatenate([siga, sigb])))
            upper = _upper_thicknesses(result, depth_at, j, common, interface_depths)
            vs_above = velocities[:k - 1]
            depth = depth_from_time_depth(0.5 * plus, vs_above, v_pool, upper)
            sig_plus = np.sqrt(siga[ia] ** 2 + sigb[ib] ** 2 + sig_ab**2)
            unc = _uncertainty(0.5 * plus, 0.5 * sig_plus, vs_above, v_pool, dv_pool, upper)
            pair = {"refractor": j, "shot_left_x": fa.shot_x, "shot_right_x": fb.shot_x,
                    "n_geophones": int(common.size), "reciprocal_time_ms": t_ab * 1e3,
                    "reciprocal_time_from": t_ab_source,
                    "minus_time_velocity_m_s": v_pm if math.isfinite(v_pm) else None,
                    "velocity_used_m_s": v_pool}
            for x, d, u in zip(common, depth, unc):
                collected["plus-minus"].setdefault(float(x), []).append((float(d), float(u), v_pool))
            if grm:
                fa_i, fb_i = _interp_fn(xa, ta), _interp_fn(xb, tb)
                g = _grm_pair(common, fa_i, fb_i, t_ab, vs_above, upper_fn=lambda xs: _upper_thicknesses(
                    result, depth_at, j, xs, interface_depths), xy_fixed=grm_xy_m, sig=sig_ab)
                if g is not None:
                    # Palmer's check on the optimum: the XY of the simplest velocity analysis
                    scan = np.arange(0.0, 2.0 * max(g["xy_m"], spacing) + 1e-9, spacing / 4.0)
                    rough = grm_xy_scan(common, fa_i, fb_i, t_ab, scan)
                    smooth = float(scan[np.nanargmin(rough)]) if np.any(np.isfinite(rough)) else None
                    pair.update({"grm_xy_m": g["xy_m"], "grm_velocity_m_s": g["v_prime"],
                                 "grm_xy_smoothest_m": smooth,
                                 "grm_xy_scan_m": [float(v) for v in scan],
                                 "grm_velocity_analysis_rms_ms": [float(v) * 1e3 for v in rough]})
                    for x, d, u in zip(g["x"], g["depth"], g["unc"]):
                        collected["grm"].setdefault(float(x), []).append((float(d), float(u), g["v_prime"]))
            pairs_info.append(pair)
        if not collected["plus-minus"]:
            warnings.append(f"refractor {j} (top of layer {k}): no reversed pair of shots records it at common geophones; "
                            f"no delay-time depths (the intercept-time depths under the shots stand alone)")
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
                zs = terrain.elevation(x) if terrain is not None else surface.get(x, 0.0)
                zs = float(zs)
                rows["refractor"].append(j)
                rows["x"].append(x)
                rows["surface_z"].append(zs)
                rows["depth_m"].append(dm)
                rows["elevation_m"].append(zs - dm)
                rows["uncertainty_m"].append(um)
                rows["velocity_m_s"].append(v)
                rows["method"].append(method)
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
