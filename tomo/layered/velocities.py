"""Layer velocities of a line: the direct waves, and each refractor from reversed branches.

- Layer 1: the mean velocity of the direct-wave branches (held through the origin).
- A refractor seen from both directions: the dipping-layer formula applied to the
  weighted mean slowness of each shooting direction (weights 1/variance of the fitted
  slopes), so that long, well-picked branches count most and a plane dip cancels:
  with ``a_d``, ``a_u`` the down-dip and up-dip apparent velocities,
  ``theta_c = (asin(V1/a_d) + asin(V1/a_u))/2``, ``V = V1/sin(theta_c)`` (Telford,
  Geldart & Sheriff 1990, Applied Geophysics, sec. 4.3.3, from memory). For deeper
  refractors the same relation with the angles in the first layer, exact when all
  interfaces are parallel (Snell's law along the ray: ``sin(theta_1n +- dip) = V1/a``).
- Every reversed pair of branches with common coverage also gets its own velocity and
  dip (:class:`~tomo.layered.result.ReversedPair`).
- Where the branches shooting one way are not parallel (the refractor is not plane
  under them), the slope of the stretch of geophones they all share stands in for the
  mean branch slope (:func:`common_stretch`).
- A refractor seen from one direction only keeps its apparent velocity (harmonic mean).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from .codes import notice
from .formulas import dipping_refractor
from .matching import branch_of
from .result import Layer, ReversedPair

__all__ = ["common_stretch", "CommonStretch", "direct_wave_layer", "reversed_pairs", "disagreement_notice",
           "direction_slownesses", "refractor_layer", "refractor_velocities", "RefractorVelocities",
           "COMMON_MIN_GEOPHONES", "PARALLEL_LEVEL"]

#: Fewest geophones in the stretch shared by same-direction head waves for a common slope.
COMMON_MIN_GEOPHONES = 4
#: Probability level of the chi-squared test that same-direction apparent slownesses agree.
PARALLEL_LEVEL = 0.99


@dataclass
class CommonStretch:
    """The apparent slowness of a refractor over the geophones that the sides shooting
    one way share (:func:`common_stretch`).

    Attributes
    ----------
    slowness_s_m, sigma_s_m : float
        Common slope and its one sigma, s/m.
    intercepts : dict of int -> (float, float)
        Fit index -> intercept time and its one sigma at that stretch, s.
    x_first_m, x_last_m : float
        Ends of the shared stretch, m.
    n_sides : int
        Sides that share it.
    """

    slowness_s_m: float
    sigma_s_m: float
    intercepts: dict
    x_first_m: float
    x_last_m: float
    n_sides: int


def _stretch_members(fits, layer_of_branch, k, direction, sigma_s):
    """Sides shooting ``direction`` with three or more picks on layer k: (fit index,
    geophone x, offsets, times, sigmas), and the (slowness, sigma) of their branches."""
    members, slows = [], []
    for i, (f, lob) in enumerate(zip(fits, layer_of_branch)):
        if not f.ok or f.side != direction:
            continue
        mine = [b for b, layer in zip(f.branches, lob) if layer == k]
        if not mine:
            continue
        sel = np.isin(f.branch_of_pick, [b.index for b in mine])
        if sel.sum() < 3:
            continue
        xs = np.round(f.shot_x + f.side * f.offsets_m[sel], 3)
        members.append((i, xs, f.offsets_m[sel], f.times_s[sel], sigma_s[f.pick_index[sel]]))
        for b in mine:
            if math.isfinite(b.slowness_sigma_s_m) and b.slowness_sigma_s_m > 0:
                slows.append((b.slowness_s_m, b.slowness_sigma_s_m))
    return members, slows


def _slopes_agree(slows):
    """True when the slownesses agree within their errors (chi-squared at ``PARALLEL_LEVEL``)."""
    from scipy.stats import chi2 as chi2_dist

    s_ = np.array([x for x, _ in slows])
    w_ = 1.0 / np.array([e for _, e in slows]) ** 2
    mean = float(np.sum(w_ * s_) / w_.sum())
    return float(np.sum(w_ * (s_ - mean) ** 2)) <= chi2_dist.ppf(PARALLEL_LEVEL, len(slows) - 1)


def _fit_stretch(used, common):
    """One slowness and an intercept per side fitted to the picks at the shared geophones."""
    rows, rhs = [], []
    for j, (_, xs, off, t, sg) in enumerate(used):
        keep = np.isin(xs, list(common))
        for o, tt, ss in zip(off[keep], t[keep], sg[keep]):
            row = np.zeros(len(used) + 1)
            row[j], row[-1] = 1.0, o
            rows.append(row / ss)
            rhs.append(tt / ss)
    a, b_ = np.array(rows), np.array(rhs)
    sol, *_ = np.linalg.lstsq(a, b_, rcond=None)
    resid = b_ - a @ sol
    dof = max(len(b_) - sol.size, 1)
    # scale the covariance by the reduced chi-squared when the picks scatter more
    # than their sigmas say (common practice)
    cov = np.linalg.inv(a.T @ a) * max(float(resid @ resid) / dof, 1.0)
    err = np.sqrt(np.diag(cov))
    xc = sorted(common)
    intercepts = {m[0]: (float(sol[j]), float(err[j])) for j, m in enumerate(used)}
    return CommonStretch(float(sol[-1]), float(err[-1]), intercepts, xc[0], xc[-1], len(used))


def common_stretch(fits, layer_of_branch, k, sigma_s):
    """Apparent slowness of layer k in each shooting direction from the shared stretch.

    Over a plane refractor every shot on the same side of a stretch of geophones gives
    head waves of the same apparent slowness (parallel curves; Telford, Geldart & Sheriff
    1990, sec. 4.3.3; the principle of the plus-minus method, Hagedoorn 1959). When the
    branch slownesses of the sides shooting one way disagree beyond their errors (chi-
    squared at ``PARALLEL_LEVEL``), the refractor is not plane under them: each branch
    slope then carries, besides ``1/V``, the change of the refractor's delay time along
    the part of the line that branch alone covers (a trough near the middle of a short
    line makes the end shots' long branches fast in both directions). The part every one
    of them covers is common to all, so there the curves keep the slope of one stretch
    of refractor: we fit one slowness and an intercept per side to the picks at the
    geophones shared by the sides (the longest branches first, as long as at least
    ``COMMON_MIN_GEOPHONES`` are shared; weights 1/sigma^2).

    Parameters
    ----------
    fits, layer_of_branch : list
        Side fits and their branch-to-layer matching.
    k : int
        Line layer (2..n) whose top is the refractor.
    sigma_s : ndarray
        Pick sigmas, s, indexed like the picks.

    Returns
    -------
    dict of int -> CommonStretch
        For the directions (+1: shots left of the branches, -1: right) where the test
        fails and a shared stretch exists; other directions are left to the branch slopes.
    """
    out = {}
    for direction in (1, -1):
        members, slows = _stretch_members(fits, layer_of_branch, k, direction, sigma_s)
        if len(members) < 2 or len(slows) < 2 or _slopes_agree(slows):
            continue
        members.sort(key=lambda m: -m[1].size)
        common, used = set(members[0][1].tolist()), [members[0]]
        for m in members[1:]:
            shared = common & set(m[1].tolist())
            if len(shared) >= COMMON_MIN_GEOPHONES:
                common, used = shared, used + [m]
        if len(used) >= 2:
            out[direction] = _fit_stretch(used, common)
    return out


def direct_wave_layer(fits, layer_of_branch):
    """Layer 1 from the direct waves: mean velocity of the layer-1 branches held through
    the origin (all layer-1 branches when none is), m/s; sigma the standard error."""
    v1s = [branch_of(f, lob, 1).velocity_m_s for f, lob in zip(fits, layer_of_branch)
           if f.ok and branch_of(f, lob, 1) is not None and f.branches[0].intercept_s == 0.0]
    if not v1s:
        v1s = [branch_of(f, lob, 1).velocity_m_s for f, lob in zip(fits, layer_of_branch)
               if f.ok and branch_of(f, lob, 1) is not None]
    return Layer(velocity_m_s=float(np.mean(v1s)),
                 velocity_sigma_m_s=float(np.std(v1s) / math.sqrt(len(v1s))) if len(v1s) > 1 else None,
                 n_sides=len(v1s), reversed=None)


def _pair(k, v1, fa, ba, fb, bb, overlap):
    """The dipping-layer formula on one reversed pair of branches."""
    a_right, a_left = ba.velocity_m_s, bb.velocity_m_s
    d = dipping_refractor(v1, a_right, a_left, ba.intercept_s, bb.intercept_s)
    pair = ReversedPair(
        layer=k, shot_left_x=fa.shot_x, shot_right_x=fb.shot_x,
        apparent_velocity_from_left_m_s=a_right, apparent_velocity_from_right_m_s=a_left,
        velocity_m_s=d["velocity_m_s"], dip_deg=d["dip_deg"],  # positive: deepening toward larger x
        disagreement_pct=abs(a_right - a_left) / (0.5 * (a_right + a_left)) * 100, coverage_overlap_m=overlap)
    if k == 2:
        # depths under the two shots (Telford et al. 1990, sec. 4.3.3)
        pair.perpendicular_depth_left_m = d["perpendicular_depth_down_m"]
        pair.perpendicular_depth_right_m = d["perpendicular_depth_up_m"]
        pair.vertical_depth_left_m = d["vertical_depth_down_m"]
        pair.vertical_depth_right_m = d["vertical_depth_up_m"]
    return pair


def reversed_pairs(fits, layer_of_branch, k, v1):
    """Every pair of a side shooting right and a side shooting left from a shot further
    right whose layer-k branches cover common ground (or touch), faster than ``v1``.

    Returns the pairs (:class:`~tomo.layered.result.ReversedPair`) and the branch
    velocities of every side that saw layer k, m/s.
    """
    pairs, seen = [], []
    for fa, la in zip(fits, layer_of_branch):
        ba = branch_of(fa, la, k) if fa.ok else None
        if ba is None:
            continue
        seen.append(ba.velocity_m_s)
        if fa.side != 1:
            continue
        cover_a = (fa.shot_x + ba.offset_min_m, fa.shot_x + ba.offset_max_m)
        for fb, lb in zip(fits, layer_of_branch):
            if not fb.ok or fb.side != -1 or fb.shot_x <= fa.shot_x:
                continue
            bb = branch_of(fb, lb, k)
            if bb is None:
                continue
            cover_b = (fb.shot_x - bb.offset_max_m, fb.shot_x - bb.offset_min_m)
            overlap = min(cover_a[1], cover_b[1]) - max(cover_a[0], cover_b[0])
            if overlap < 0 or not (ba.velocity_m_s > v1 and bb.velocity_m_s > v1):
                continue
            pairs.append(_pair(k, v1, fa, ba, fb, bb, overlap))
    return pairs, seen


def disagreement_notice(pairs, k, pct):
    """One notice for the pairs of layer k whose two apparent velocities differ by more
    than ``pct`` per cent of their mean (a dip or a lateral change), or None."""
    bad = [d for d in pairs if d.disagreement_pct > pct]
    if len(bad) == 1:
        d = bad[0]
        return notice("apparent-velocities-differ",
                      f"layer {k}: apparent velocities {d.apparent_velocity_from_left_m_s:.0f} m/s (shot at "
                      f"{d.shot_left_x:g} m) and {d.apparent_velocity_from_right_m_s:.0f} m/s (shot at "
                      f"{d.shot_right_x:g} m) differ by {d.disagreement_pct:.0f} % (> {pct:g} %): a dipping or "
                      f"laterally varying refractor; the true velocity {d.velocity_m_s:.0f} m/s assumes a plane "
                      f"refractor, dip {d.dip_deg:.1f} deg", layer=k)
    if not bad:
        return None
    worst = max(bad, key=lambda d: d.disagreement_pct)
    vs = [d.velocity_m_s for d in bad]
    return notice("apparent-velocities-differ",
                  f"layer {k}: forward and reverse apparent velocities differ by more than {pct:g} % in {len(bad)} of "
                  f"{len(pairs)} reversed pairs (up to {worst.disagreement_pct:.0f} %: "
                  f"{worst.apparent_velocity_from_left_m_s:.0f} m/s from the shot at {worst.shot_left_x:g} m "
                  f"against {worst.apparent_velocity_from_right_m_s:.0f} m/s from the shot at "
                  f"{worst.shot_right_x:g} m): a dipping or laterally varying refractor; the pairs' true "
                  f"velocities ({min(vs):.0f} to {max(vs):.0f} m/s) each assume a plane refractor between the shots",
                  layer=k)


def direction_slownesses(fits, layer_of_branch, k):
    """Weighted mean slowness of the layer-k branches per shooting direction (weights
    1/variance of the fitted slopes): ``{direction: (slowness_s_m, sigma_s_m)}``."""
    dirs = {}
    for fa, la in zip(fits, layer_of_branch):
        if not fa.ok:
            continue
        for b in (b for b, layer in zip(fa.branches, la) if layer == k):
            ds = b.slowness_sigma_s_m
            wgt = 1.0 / ds**2 if ds > 0 and math.isfinite(ds) else 1.0
            dirs.setdefault(fa.side, []).append((b.slowness_s_m, wgt))
    out = {}
    for side, vals in dirs.items():
        ws = np.array([w for _, w in vals])
        out[side] = (float(np.sum(ws * np.array([x for x, _ in vals])) / ws.sum()), float(1 / math.sqrt(ws.sum())))
    return out


def refractor_layer(k, mean_s, seen, has_pairs, v1, template_v):
    """Layer k from the mean slowness of each shooting direction (module docstring).

    Returns the :class:`~tomo.layered.result.Layer` (velocity, sigma, sides, reversed)
    and a notice when the layer is not reversed or its two directions share no ground.
    """
    if 1 in mean_s and -1 in mean_s and 1 / mean_s[1][0] > v1 and 1 / mean_s[-1][0] > v1:
        v = dipping_refractor(v1, 1 / mean_s[1][0], 1 / mean_s[-1][0])["velocity_m_s"]
        # one sigma from the slowness errors (the formula is close to the harmonic mean)
        sig = float(v * v * 0.5 * math.hypot(mean_s[1][1], mean_s[-1][1]))
        note = None if has_pairs else notice(
            "layer-no-common-coverage",
            f"layer {k} ({v:.0f} m/s) is seen in both directions but over different parts "
            f"of the line (no common coverage): its velocity assumes one plane refractor "
            f"and no dip is computed", layer=k)
        return Layer(velocity_m_s=v, velocity_sigma_m_s=sig, n_sides=len(seen), reversed=True), note
    if seen:
        v = float(1.0 / np.mean(1.0 / np.asarray(seen)))
        note = notice("layer-not-reversed", f"layer {k} ({v:.0f} m/s) is not reversed: no shot pair records it "
                      f"from both directions; its velocity is apparent and its dip unknown", layer=k)
        return Layer(velocity_m_s=v, velocity_sigma_m_s=None, n_sides=len(seen), reversed=False), note
    return Layer(velocity_m_s=template_v, velocity_sigma_m_s=None, n_sides=0, reversed=False), None


@dataclass
class RefractorVelocities:
    """What :func:`refractor_velocities` finds: the layers with their velocities, the
    reversed pairs, intercepts from shared stretches, the layers whose top changes along
    the line, and the notices, in order."""

    layers: list
    dips: list
    intercept_override: dict = field(default_factory=dict)
    lateral: set = field(default_factory=set)
    notices: list = field(default_factory=list)


def refractor_velocities(fits, layer_of_branch, template, sigma_s, pct):
    """Velocities of every line layer (module docstring), top to bottom.

    Parameters
    ----------
    fits, layer_of_branch : list
        Side fits and their matching to the line layers (:mod:`tomo.layered.matching`).
    template : list of float
        Line layer velocities from the matching, m/s (used where a layer has no branch).
    sigma_s : ndarray
        Pick sigmas, s.
    pct : float
        Per cent difference of the two apparent velocities of a pair that is reported.

    Returns
    -------
    RefractorVelocities
        ``intercept_override`` maps (fit index, layer) to the (intercept, sigma) in s of
        a shared stretch that replaced the branch slope.
    """
    out = RefractorVelocities(layers=[direct_wave_layer(fits, layer_of_branch)], dips=[])
    v1 = out.layers[0].velocity_m_s
    for k in range(2, len(template) + 1):
        pairs, seen = reversed_pairs(fits, layer_of_branch, k, v1)
        out.dips.extend(pairs)
        bad = disagreement_notice(pairs, k, pct)
        if bad is not None:
            out.notices.append(bad)
        mean_s = direction_slownesses(fits, layer_of_branch, k)
        # where the same-direction branches are not parallel, the slope of the stretch
        # they share (and the intercepts there) stand in for the branch slopes
        for side, st in common_stretch(fits, layer_of_branch, k, sigma_s).items():
            if side in mean_s and 1 / st.slowness_s_m > v1:
                out.notices.append(notice(
                    "branches-not-parallel",
                    f"layer {k}: the apparent velocities of the shots {'left' if side > 0 else 'right'} of its "
                    f"branches differ beyond their errors (the refractor is not plane under them); "
                    f"{1 / st.slowness_s_m:.0f} m/s from the stretch x = {st.x_first_m:g} to {st.x_last_m:g} m "
                    f"that {st.n_sides} of them share replaces the mean branch value {1 / mean_s[side][0]:.0f} m/s",
                    layer=k))
                mean_s[side] = (st.slowness_s_m, st.sigma_s_m)
                for i, val in st.intercepts.items():
                    out.intercept_override[(i, k)] = val
                # the refractor changes along the line: where reversed pairs record it at
                # common geophones, their minus times give the velocity (tomo.layered.interpret)
                out.lateral.add(k)
        layer, note = refractor_layer(k, mean_s, seen, bool(pairs), v1, template[k - 1])
        out.layers.append(layer)
        if note is not None:
            out.notices.append(note)
    for k in range(1, len(out.layers)):
        lower, upper = out.layers[k], out.layers[k - 1]
        if lower.velocity_m_s <= upper.velocity_m_s:
            out.notices.append(notice(
                "velocity-not-increasing",
                f"layer {k + 1} velocity {lower.velocity_m_s:.0f} m/s is not above layer {k}'s "
                f"{upper.velocity_m_s:.0f} m/s: the layered methods need velocity increasing "
                f"with depth; thicknesses below are unreliable", layer=k + 1))
    return out
