"""Layer thicknesses under each shot from its intercept times, and the line's.

The head wave of layer n arrives at ``t_n = x/V_n + sum_{i<n} 2 h_i sqrt(V_n^2 - V_i^2) /
(V_i V_n)`` over horizontal layers, so the thicknesses under a shot follow from its
intercept times one layer at a time (Telford, Geldart & Sheriff 1990, Applied
Geophysics, 2nd ed., sec. 4.3; :func:`tomo.layered.formulas.intercept_thicknesses`).
With dipping layers the same formula applied to the true velocities gives the thickness
perpendicular to the layers under the shot. The line's thickness of a layer is the
mean over the sides that see both its top and its base, weighted by the variance of
the intercept time (a short branch has a poor intercept).
"""

from __future__ import annotations

import math

import numpy as np

from .codes import notice
from .formulas import cos_term, intercept_thicknesses
from .matching import branch_of
from .result import ShotDepths

__all__ = ["shot_thicknesses", "line_thicknesses", "fill_thicknesses"]


def shot_thicknesses(fits, layer_of_branch, velocities, intercept_override=None):
    """Depths of the layer tops under every shot side, and the thickness estimates.

    Parameters
    ----------
    fits, layer_of_branch : list
        Side fits and their matching to the line layers.
    velocities : sequence of float
        Line layer velocities, m/s, top to bottom.
    intercept_override : dict, optional
        (fit index, layer) -> (intercept_s, sigma_s) replacing the branch intercept.

    Returns
    -------
    shot_depths : list of ShotDepths
    per_layer : list of list of (float, float)
        For layers 1..n-1, (thickness m, weight 1/m^2) from each side that sees both the
        layer's top and its base.
    """
    override = intercept_override or {}
    shot_depths, per_layer = [], [[] for _ in range(len(velocities) - 1)]
    for i, (f, lob) in enumerate(zip(fits, layer_of_branch)):
        if not f.ok:
            continue
        seen = sorted(set(x for x in lob if x > 1))
        if not seen:
            continue
        vs = [velocities[0]] + [velocities[k - 1] for k in seen]
        ts = [override.get((i, k), (branch_of(f, lob, k).intercept_s,))[0] for k in seen]
        h = intercept_thicknesses(vs, ts)
        depths, top, prev = {}, 0.0, 1
        for k, hk in zip(seen, h):
            top += hk
            depths[k] = float(top)
            if k == prev + 1 and math.isfinite(hk):
                # weight by the intercept's variance: a short branch has a poor intercept
                sig_t = override.get((i, k), (None, branch_of(f, lob, k).intercept_sigma_s))[1]
                sig_h = sig_t / (2 * cos_term(velocities[k - 2], velocities[k - 1]))
                weight = 1.0 / sig_h**2 if math.isfinite(sig_h) and sig_h > 0 else 1.0
                per_layer[k - 2].append((float(hk), weight))
            prev = k
        shot_depths.append(ShotDepths(f.shot_x, f.side_name, depths))
    return shot_depths, per_layer


def line_thicknesses(per_layer):
    """Weighted mean thickness of each layer (m, NaN without estimates) and its standard
    error (m; None from fewer than two sides), from :func:`shot_thicknesses`."""
    out = []
    for vals in per_layer:
        if not vals:
            out.append((float("nan"), None))
            continue
        hs = np.array([v for v, _ in vals])
        ws = np.array([w for _, w in vals])
        hk = float(np.sum(ws * hs) / np.sum(ws))
        sig = float(np.sqrt(np.sum(ws * (hs - hk) ** 2) / np.sum(ws) / len(hs))) if len(hs) > 1 else None
        out.append((hk, sig))
    return out


def fill_thicknesses(layers, fits, layer_of_branch, intercept_override=None):
    """Set ``thickness_m``, ``thickness_sigma_m`` and ``depth_top_m`` of every layer.

    Changes the :class:`~tomo.layered.result.Layer` objects in place; returns the depths
    under the shots (list of ShotDepths) and the notices (a layer without a thickness,
    a thickness not positive).
    """
    velocities = [lay.velocity_m_s for lay in layers]
    shot_depths, per_layer = shot_thicknesses(fits, layer_of_branch, velocities, intercept_override)
    notes, top = [], 0.0
    for k, (hk, sig) in enumerate(line_thicknesses(per_layer)):
        if not math.isfinite(hk):
            notes.append(notice("thickness-missing", f"layer {k + 1}: no shot side gives its thickness (its top "
                                f"and base are not both seen)", layer=k + 1))
        if hk <= 0:
            notes.append(notice("thickness-not-positive", f"layer {k + 1}: thickness {hk:.2f} m is not positive: "
                                f"the intercept times are inconsistent", layer=k + 1))
        layers[k].thickness_m = hk if math.isfinite(hk) else None
        layers[k].thickness_sigma_m = sig
        layers[k].depth_top_m = top
        top += hk if math.isfinite(hk) else 0.0
    layers[-1].thickness_m = None
    layers[-1].thickness_sigma_m = None
    layers[-1].depth_top_m = top
    return shot_depths, notes
