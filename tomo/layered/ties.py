"""The delay-time refractor tied to boreholes: the overburden velocity calibrated to the
logged depths, then the mis-tie left at each borehole spread to its neighbours.

A delay-time depth is the time-depth times the overburden velocity term of the
plus-minus depth formula (Hagedoorn 1959, Geophysical Prospecting 7; for GRM, Palmer
1980, The Generalized Reciprocal Method of Seismic Refraction Interpretation, SEG)::

    d = U + (T - T_U) f(V),        f(V) = V V_n / sqrt(V_n^2 - V^2)

with V the velocity of the layer just above the refractor, V_n the refractor's, U the
thickness of the layers above that one and T_U their share of the time-depth
(:func:`tomo.layered.delay.depth_from_time_depth`). The part below U scales with f(V):
a borehole that logged the refractor at depth D asks for f = (D - U) / (T - T_U), so for
the velocity V = f V_n / sqrt(V_n^2 + f^2) (its *own* velocity).

Velocity. One velocity for the line: f by weighted least squares over the boreholes,
each weighted by 1 / (sigma_logged^2 + sigma_delay^2) (closed form, f is linear in the
depths). A calibration corrects the velocity the picks measured (the direct and
refracted branches) for what they cannot see, chiefly a velocity that grows with depth
in the overburden (600 m/s + 20 m/s per m over 9 m averages 686 m/s, 14 % above its top
velocity); a borehole whose own velocity lies more than :data:`MAX_VELOCITY_CHANGE`
from the measured one asks for more than that and is not used for the velocity.
Boreholes that one velocity cannot satisfy (a residual beyond two sigmas) are then left
out one at a time, the one whose own velocity lies farthest from the measured velocity
first. What such a borehole points to is something else: relief narrower than the
delay times resolve, a hidden layer, a velocity inversion, or a wrong log. The spread
of the own velocities is reported.

Residual. After the velocity, the depth left between the refractor and each borehole
(the mis-tie) is removed by a correction that is the mis-tie at the borehole and falls
linearly to zero at the neighbouring boreholes, or, where the neighbour is farther away
or there is none, at a distance equal to the logged depth (about the width of refractor
that shapes the delay time at a geophone; our choice). Between boreholes closer than
that this is linear interpolation of the mis-ties, the residual correction of depth
conversion to well tops (common practice). A borehole whose mis-tie exceeds two sigmas
is flagged: the tied refractor passes through it, but only by that correction.

Every plus-minus and GRM depth of the refractor is recomputed so (GRM with its own
refractor velocity); refractors above it keep theirs, and the depths of a refractor
below a tied one are not recomputed (a notice says so).
"""

from __future__ import annotations

import math

import numpy as np

from ..survey.boreholes import DEEPEST
from .codes import notice
from .result import interface_depths
from .tieresult import TIE_SIGMAS, BoreholeTie, RefractorTie, overburden_term, velocity_from_term

__all__ = ["tie_to_boreholes", "BoreholeTie", "RefractorTie", "TIE_SIGMAS", "MAX_VELOCITY_CHANGE"]

#: Largest relative change of the measured overburden velocity a borehole may ask for
#: and still be used for the velocity (a velocity gradient in the overburden accounts
#: for some 10-20 %, module docstring; beyond a quarter the delay times and the borehole
#: disagree for another reason; our choice).
MAX_VELOCITY_CHANGE = 0.25


def _refractor_of(result, interface):
    n = len(result.layers) - 1
    return n if int(interface) == DEEPEST else int(interface)


def tie_to_boreholes(result, boreholes):
    """Tie the delay-time refractor(s) of ``result`` to ``boreholes`` (module docstring).

    Parameters
    ----------
    result : LayeredResult
        Changed in place: the tied refractors' profile depths, ``result.ties`` (a
        :class:`RefractorTie` per refractor with boreholes) and the warnings.
    boreholes : tomo.survey.boreholes.Boreholes
        Placed on the line (``x`` in the picks' distance).

    Returns
    -------
    LayeredResult
        ``result``.
    """
    refractors = {}
    for k in range(len(boreholes)):
        j = _refractor_of(result, boreholes.interface[k])
        refractors.setdefault(j, []).append(k)
    ties = []
    for j in sorted(refractors):
        group = refractors[j]
        if j not in result.refractors:
            labels = ", ".join(boreholes.label[k] for k in group)
            result.warnings.append(notice(
                "borehole-not-tied", f"borehole(s) {labels}: the layered result has no delay-time refractor {j} "
                f"to tie (refractors profiled: {result.refractors or 'none'})", layer=j + 1))
            continue
        tie = _tie_refractor(result, j, boreholes, group)
        ties.append(tie)
        result.warnings.extend(_tie_notices(result, tie))
    result.ties = ties
    return result


def _tie_refractor(result, j, boreholes, group):
    """Fit the velocity, rescale and correct refractor j's depths; its :class:`RefractorTie`."""
    prof = result.profile
    line = result.refractor(j)
    v0 = float(result.layers[j - 1].velocity_m_s)
    vn = float(np.median(line.velocity_m_s))
    f0 = float(overburden_term(v0, vn))
    xb = np.array([boreholes.x[k] for k in group], float)
    upper = _upper(result, j, xb)
    inside = (xb >= line.x.min() - 1e-9) & (xb <= line.x.max() + 1e-9)
    before = np.where(inside, np.interp(xb, line.x, line.depth_m), np.nan)
    unc = np.interp(xb, line.x, np.nan_to_num(line.uncertainty_m)) if line.x.size else np.zeros(xb.size)
    ties = [BoreholeTie(boreholes.label[k], float(xb[i]), float(boreholes.depth_m[k]), float(boreholes.sigma_m[k]),
                        float(before[i]), float(unc[i]) if inside[i] else float("nan"))
            for i, k in enumerate(group)]
    a = (before - upper) / f0  # time-depth below the upper layers, s
    logged = np.array([t.depth_m for t in ties])
    sigma = np.sqrt(np.array([t.sigma_m for t in ties]) ** 2 + np.nan_to_num(unc) ** 2)
    own_f = np.where(inside & (a > 0), (logged - upper) / np.where(a > 0, a, 1.0), np.nan)
    own_v = np.where(own_f > 0, velocity_from_term(np.where(own_f > 0, own_f, 1.0), vn), np.nan)
    for i, t in enumerate(ties):
        t.own_velocity_m_s = float(own_v[i])
        if not inside[i]:
            t.note = f"outside the delay-time profile (x = {line.x.min():g} to {line.x.max():g} m)"
        elif not np.isfinite(own_v[i]):
            t.note = "no overburden velocity gives the logged depth (it lies above the refractor above)"
        elif abs(own_v[i] / v0 - 1.0) > MAX_VELOCITY_CHANGE:
            t.note = (f"left out of the velocity: it asks for {own_v[i]:.0f} m/s, more than "
                      f"{100 * MAX_VELOCITY_CHANGE:.0f} % from the {v0:.0f} m/s the picks measured")
    plausible = np.isfinite(own_v) & (np.abs(np.nan_to_num(own_v / v0, nan=np.inf) - 1.0) <= MAX_VELOCITY_CHANGE)
    used = _fit_set(plausible, a, logged - upper, sigma, own_v, v0)
    f = float(np.sum((a * (logged - upper) / sigma**2)[used]) / np.sum((a**2 / sigma**2)[used])) if used.any() else f0
    v1 = float(velocity_from_term(f, vn))
    after_velocity = upper + a * f
    for i, t in enumerate(ties):
        t.used = bool(used[i])
        if inside[i]:
            t.depth_velocity_m = float(after_velocity[i])
            t.depth_after_m = t.depth_m
            t.flagged = bool(abs(t.misfit_m) > TIE_SIGMAS * sigma[i])
            if not t.used and not t.note:
                t.note = "left out of the velocity: it asks for a velocity far from the others'"
    _rescale(prof, j, v0, v1, lambda x: _upper(result, j, x),
             _correction([t for t in ties if t.tied and math.isfinite(t.depth_velocity_m)], line.x))
    tied = np.array([t.tied for t in ties])
    return RefractorTie(j, v0, v1, vn,
                        float(np.std(own_v[used])) if used.any() else float("nan"),
                        _rms((logged - before)[tied]), _rms((logged - after_velocity)[tied]), ties)


def _rms(values):
    return float(np.sqrt(np.mean(values ** 2))) if values.size else float("nan")


def _upper(result, j, x):
    """Depth (m) of the refractor above refractor j at x: U of the module docstring."""
    x = np.atleast_1d(np.asarray(x, float))
    return np.zeros(x.size) if j == 1 else interface_depths(result, x)[j - 2]


def _fit_set(candidates, a, target, sigma, own_v, v0):
    """Boreholes in the velocity fit: drop the one asking for the velocity farthest from
    ``v0`` while any is more than :data:`TIE_SIGMAS` sigmas off the fit."""
    used = candidates.copy()
    while used.sum() >= 2:
        f = np.sum((a * target / sigma**2)[used]) / np.sum((a**2 / sigma**2)[used])
        off = used & (np.abs(a * f - target) > TIE_SIGMAS * sigma)
        if not off.any():
            break
        far = np.where(used, np.abs(np.log(np.where(used, own_v, v0) / v0)), -1.0)
        used[int(np.argmax(far))] = False
    return used


def _correction(ties, x_geophones):
    """The residual correction (m) as a function of x (m): a hat per borehole, largest
    at it and zero at its neighbours or a logged depth away, scaled so that the depths
    at the geophones ``x_geophones``, read linearly between geophones as the profile
    is, give each borehole's mis-tie exactly."""
    if not ties:
        return lambda x: np.zeros(np.size(x))
    ties = sorted(ties, key=lambda t: t.x)
    xs = np.array([t.x for t in ties])
    reach = np.array([max(t.depth_m, 1e-6) for t in ties])
    left = np.maximum(np.minimum(np.diff(np.concatenate([[-np.inf], xs])), reach), 1e-9)
    right = np.maximum(np.minimum(np.diff(np.concatenate([xs, [np.inf]])), reach), 1e-9)

    def hats(x):
        d = np.atleast_1d(np.asarray(x, float))[:, None] - xs[None, :]
        return np.clip(np.where(d < 0, 1.0 + d / left, 1.0 - d / right), 0.0, 1.0)

    xg = np.unique(np.asarray(x_geophones, float))
    at_geophones = hats(xg)
    read = np.column_stack([np.interp(xs, xg, at_geophones[:, i]) for i in range(xs.size)])
    amplitude = np.linalg.lstsq(read, np.array([t.misfit_m for t in ties]), rcond=None)[0]
    return lambda x: hats(x) @ amplitude


def _rescale(prof, j, v0, v1, upper_at, correction):
    """Refractor j's profile rows with the velocity v1 for v0 and the correction added."""
    rows = np.flatnonzero(prof.refractor == j)
    if rows.size == 0:
        return
    x = prof.x[rows]
    upper = upper_at(x)
    vn = prof.velocity_m_s[rows]
    scale = overburden_term(v1, vn) / overburden_term(v0, vn)
    shift = correction(x)
    prof.depth_m[rows] = upper + (prof.depth_m[rows] - upper) * scale + shift
    prof.uncertainty_m[rows] = prof.uncertainty_m[rows] * scale
    prof.elevation_m[rows] = prof.surface_z[rows] - prof.depth_m[rows]


def _tie_notices(result, tie):
    out = []
    j = tie.refractor
    for b in tie.flagged:
        out.append(notice(
            "borehole-mis-tie", f"borehole {b.label} at x = {b.x:g} m: the delay-time refractor {j} lies "
            f"{b.depth_velocity_m:.1f} m deep with the calibrated velocity, {b.misfit_m:+.1f} m from the logged "
            f"{b.depth_m:.1f} +- {b.sigma_m:.1f} m; it passes through the borehole only by the residual correction "
            f"(relief narrower than the delay times resolve, a hidden layer or a velocity inversion): check the "
            f"borehole and the picks", layer=j + 1))
    for b in tie.boreholes:
        if not b.tied or not math.isfinite(b.own_velocity_m_s):
            out.append(notice("borehole-not-tied", f"borehole {b.label} at x = {b.x:g} m: {b.note}", layer=j + 1))
    if j < len(result.layers) - 1:
        out.append(notice("borehole-deeper-not-tied", f"refractor {j} was tied to boreholes; the delay-time "
                          f"depths of the refractors below it were not recomputed", layer=j + 1))
    return out
