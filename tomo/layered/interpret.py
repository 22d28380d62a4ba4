"""Layered interpretation of a line: intercept-time and dipping-layer formulas, a
line-wide layer table, warnings, and the starting model for the tomography.

Methods (all assume layers whose velocity increases with depth):

- n horizontal layers, intercept-time method. The head wave of layer n arrives at
  ``t_n = x/V_n + sum_{i<n} 2 h_i sqrt(V_n^2 - V_i^2) / (V_i V_n)``, so the thicknesses
  follow from the intercept times one layer at a time (Telford, Geldart & Sheriff 1990,
  Applied Geophysics, 2nd ed., sec. 4.3; Lowrie & Fichtner 2020, Fundamentals of
  Geophysics, 3rd ed.). With dipping layers the same formula applied to the true
  velocities gives the thickness perpendicular to the layers under the shot.
- Dipping refractor from reversed shots: with ``a_d``, ``a_u`` the down-dip and up-dip
  apparent velocities, ``dip = (asin(V1/a_d) - asin(V1/a_u))/2`` and
  ``theta_c = (asin(V1/a_d) + asin(V1/a_u))/2``, ``V = V1/sin(theta_c)`` (Telford et al.
  1990, sec. 4.3.3, from memory). For deeper refractors we use the same relation with
  the angles in the first layer, exact when all interfaces are parallel (Snell's law
  along the ray: ``sin(theta_1n +- dip) = V1/a``).
- Delay times under every geophone: :mod:`tomo.delay` (plus-minus, GRM).

Known limits of this implementation: the intercept-time and dipping-layer formulas
take shots and geophones on one level (the delay-time profile, geophone by geophone,
copes with terrain); deeper dipping refractors are assumed parallel to the first; an
undulating refractor bends its branches and the automatic branch count can read the
bends as extra layers; two tests recognise most such cases and merge the layers again
(:func:`_merge_lateral_breaks`: a break fixed in place rather than in offset, or head
waves running parallel at shared geophones), but they do not always fire (fix the
count with ``n_branches`` then). Where the branches shooting one way are not parallel
(the refractor is not plane under them), the line velocity comes from the stretch of
geophones they all share (:func:`_common_stretch`); that assumes the refractor under
that stretch at one end of the line dips as it does under the other end's stretch,
so with little reversed coverage and relief under the middle of a short line the
velocity stays uncertain (measured 5-14 % high on a 46 m line with a 4 m trough,
tests): the picks cannot separate a refractor's relief from its velocity there.

Cautions that go with every result (see :data:`CAUTIONS`): the solution is not unique;
a layer slower than the one above it, or too thin to give first arrivals of its own,
does not show on the travel-time curves, and the depths below it come out wrong;
velocities do not identify rock types; calibrate against boreholes; designs need review
by a licensed professional under local codes.
"""

from __future__ import annotations

import math

import numpy as np

from ..core.errors import InputError
from .branches import DEFAULT_SIGMA_MS, MAX_BRANCHES, OUTLIER_SIGMA, fit_shots, pick_sigma
from .delay import delay_time_profile
from .formulas import cos_term, dipping_refractor, hidden_layer_thickness, intercept_thicknesses
from .result import LayeredResult

__all__ = ["interpret_line"]


#: Largest slope of the difference of two shots' head-wave times, as a fraction of the
#: slope two distinct layers give, for the branches to count as one refractor.
PARALLEL_RATIO = 0.4


def _parallelism(fits, layer_of_branch, k, template):
    """How far from parallel the layer k+1 and layer k head waves are at shared geophones.

    Head waves from one refractor recorded from two shots on the same side of a stretch
    of geophones arrive along the same refractor path and leave it at the same points,
    so their times differ by a constant whatever the refractor's shape: the curves are
    parallel (common practice; the principle behind the plus-minus method, Hagedoorn
    1959). Branches of two distinct layers differ at the rate ``1/V_k - 1/V_{k+1}``. For
    each pair of shot sides shooting the same way, at the geophones where the nearer shot
    sees layer k and the farther one layer k+1, the slope of the time difference is
    fitted; the slopes are pooled (weights 1/variance) and returned as a fraction of the
    distinct-layer rate. None when no pair has three such geophones or the pooled slope
    is too uncertain (standard error over a quarter of the distinct-layer rate).
    """
    expected = 1.0 / template[k - 1] - 1.0 / template[k]
    if not expected > 0:
        return None

    def labelled(f, lob):
        out = {}
        for b, layer in zip(f.branches, lob):
            sel = f.branch_of_pick == b.index
            for x, t in zip(np.round(f.shot_x + f.side * f.offsets_m[sel], 3), f.times_s[sel]):
                out[float(x)] = (layer, float(t))
        return out

    sides = [(f, labelled(f, lob)) for f, lob in zip(fits, layer_of_branch) if f.ok]
    num = den = 0.0
    for near, dn in sides:
        for far, df in sides:
            # same shooting direction, the far shot behind the near one
            if far.side != near.side or not near.side * (near.shot_x - far.shot_x) > 0:
                continue
            xs = sorted(x for x in dn if x in df and dn[x][0] == k and df[x][0] == k + 1)
            if len(xs) < 3:
                continue
            u = near.side * np.array(xs)  # distance in the shooting direction
            dt = np.array([df[x][1] - dn[x][1] for x in xs])
            coef = np.polyfit(u, dt, 1)
            resid = dt - np.polyval(coef, u)
            sxx = float(((u - u.mean()) ** 2).sum())
            if sxx <= 0:
                continue
            se = max(math.sqrt(float(resid @ resid) / max(len(u) - 2, 1) / sxx), 1e-9)
            # the difference falls at 1/V_{k+1} - 1/V_k for distinct layers: sign it positive
            num += -coef[0] / se**2
            den += 1.0 / se**2
    if den == 0.0:
        return None
    slope, se = num / den, 1.0 / math.sqrt(den)
    if se > 0.25 * expected:
        return None
    return slope / expected


def _merge_lateral_breaks(fits, layer_of_branch, n_layers, template, spacing, warnings):
    """Merge two line layers whose branch break is fixed in place rather than in offset.

    Over flat layers the break between two branches comes at the same offset (the
    crossover distance) whatever the shot position. A break that stays at one place
    along the line while the shots move is made by the refractor itself changing there
    (a step, trough or change of dip) or by a lateral velocity change, not by a deeper
    layer (common practice). When, over the shot sides that show the break, the spread
    of its positions is under half the spread of its offsets (and the offsets spread
    over more than two geophone spacings), the deeper of the two layers is merged into
    the upper one: both branches are then head waves from the same refractor, which the
    delay-time methods follow with its varying depth. The same merge is made when the
    two layers' branches run parallel at shared geophones (:func:`_parallelism` under
    ``PARALLEL_RATIO``), which marks head waves from one refractor.

    Changes ``layer_of_branch`` in place; returns the new layer count, the template and
    the set of (new) layer indices whose top is such a changing refractor.
    """
    lateral = set()
    k = 2
    while k < n_layers:
        offsets, positions = {}, {}
        for f, lob in zip(fits, layer_of_branch):
            if not f.ok:
                continue
            for i in range(len(lob) - 1):
                if lob[i] == k and lob[i + 1] == k + 1 and i < len(f.crossovers_m):
                    c = f.crossovers_m[i]
                    if math.isfinite(c):
                        offsets.setdefault(f.side, []).append(c)
                        positions.setdefault(f.side, []).append(f.shot_x + f.side * c)

        def pooled(groups):
            num, den = 0.0, 0
            for vals in groups.values():
                if len(vals) >= 2:
                    num += float(np.var(vals, ddof=1)) * (len(vals) - 1)
                    den += len(vals) - 1
            return math.sqrt(num / den) if den else float("nan")

        n_sides = sum(len(v) for v in offsets.values())
        off_spread, pos_spread = pooled(offsets), pooled(positions)
        fixed_place = n_sides >= 3 and off_spread > 2 * spacing and pos_spread < 0.5 * off_spread
        ratio = _parallelism(fits, layer_of_branch, k, template)
        if fixed_place:
            where = "; ".join(f"x = {np.median(positions[s]):.0f} m for shots {'left' if s > 0 else 'right'} of it"
                              for s in sorted(positions, reverse=True) if positions[s])
            warnings.append(
                f"the break between layer {k} ({template[k - 1]:.0f} m/s) and layer {k + 1} "
                f"({template[k]:.0f} m/s) stays at one place along the line ({where}; spread {pos_spread:.1f} m) "
                f"while its offset varies ({off_spread:.1f} m): a change along the refractor (step, trough, "
                f"dip) or a lateral velocity change, not a deeper layer; the two are taken as one refractor")
        elif ratio is not None and ratio < PARALLEL_RATIO:
            warnings.append(
                f"at the same geophones, the layer {k + 1} ({template[k]:.0f} m/s) branches of farther shots run "
                f"parallel to the layer {k} ({template[k - 1]:.0f} m/s) branches of nearer shots (their difference "
                f"changes at {ratio:.0%} of the rate two distinct layers would give): head waves from one refractor "
                f"whose depth or dip changes, not a deeper layer; the two are taken as one refractor")
        if fixed_place or (ratio is not None and ratio < PARALLEL_RATIO):
            for lob in layer_of_branch:
                for i, layer in enumerate(lob):
                    if layer == k + 1:
                        lob[i] = k
                    elif layer > k + 1:
                        lob[i] = layer - 1
            template = template[:k] + template[k + 1:]
            n_layers -= 1
            lateral = {x if x <= k else x - 1 for x in lateral} | {k}
        else:
            k += 1
    return n_layers, template, lateral


def _assign_sandwiched(fits, layer_of_branch, warnings):
    """Give an unmatched branch between branches of consecutive line layers to the deeper one.

    A side whose branches match line layers ``k`` and ``k + 1`` with an unmatched branch
    in between records, after the crossover from layer ``k``, arrivals refracted below
    layer ``k``; the line has no layer there, so they are head waves from the top of
    layer ``k + 1`` whose apparent velocity is bent by relief of that refractor (a trough
    slows them down-dip, a rise speeds them up: delay times change along the line,
    Hagedoorn 1959). Leaving them out would cut the side's head-wave coverage short
    just where a reversed pair needs it. Only branches faster than the layer-``k``
    branch before them are taken (a slower one is no refraction from below).
    Changes ``layer_of_branch`` in place.
    """
    for f, lob in zip(fits, layer_of_branch):
        if not f.ok:
            continue
        for i in range(1, len(lob) - 1):
            if lob[i] != 0:
                continue
            before = next((j for j in range(i - 1, -1, -1) if lob[j]), None)
            after = next((j for j in range(i + 1, len(lob)) if lob[j]), None)
            if before is None or after is None or lob[after] != lob[before] + 1:
                continue
            if f.branches[i].velocity_m_s > f.branches[before].velocity_m_s:
                lob[i] = lob[after]
                warnings.append(f"{f.label}: branch {f.branches[i].index} ({f.branches[i].velocity_m_s:.0f} m/s), "
                                f"between branches of layers {lob[before]} and {lob[after]}, is taken as head waves "
                                f"from the top of layer {lob[after]} bent by the refractor's relief")


#: Fewest geophones in the stretch shared by same-direction head waves for a common slope.
COMMON_MIN_GEOPHONES = 4
#: Probability level of the chi-squared test that same-direction apparent slownesses agree.
PARALLEL_LEVEL = 0.99


def _common_stretch(fits, layer_of_branch, k, sigma_s):
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

    Returns ``{direction: (slowness_s_m, sigma_s_m, {fit index: (intercept_s, sigma_s)},
    (x_first, x_last), n_sides)}`` for the directions where the test fails and a shared
    stretch exists; other directions are left to the branch slopes.
    """
    from scipy.stats import chi2 as chi2_dist

    out = {}
    for direction in (1, -1):
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
        if len(members) < 2 or len(slows) < 2:
            continue
        s_ = np.array([x for x, _ in slows])
        w_ = 1.0 / np.array([e for _, e in slows]) ** 2
        mean = float(np.sum(w_ * s_) / w_.sum())
        if float(np.sum(w_ * (s_ - mean) ** 2)) <= chi2_dist.ppf(PARALLEL_LEVEL, len(slows) - 1):
            continue
        members.sort(key=lambda m: -m[1].size)
        common, used = set(members[0][1].tolist()), [members[0]]
        for m in members[1:]:
            shared = common & set(m[1].tolist())
            if len(shared) >= COMMON_MIN_GEOPHONES:
                common, used = shared, used + [m]
        if len(used) < 2:
            continue
        rows, rhs, wts = [], [], []
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
        out[direction] = (float(sol[-1]), float(err[-1]),
                          {m[0]: (float(sol[j]), float(err[j])) for j, m in enumerate(used)},
                          (xc[0], xc[-1]), len(used))
    return out


def _near_shot(fit):
    """A side whose first pick is within 1.5 spacings of the shot starts with the direct wave."""
    u = fit.offsets_m
    if u.size < 2:
        return False
    return bool(u[0] <= 1.5 * float(np.median(np.diff(u))) + 1e-9)


def _align(velocities, template, anchored):
    """Map a side's branch velocities to template layers, strictly increasing.

    Minimises the sum of |log(v/V)|; a branch left unmatched costs log(2.5). With
    ``anchored`` the first branch is layer 1 (a direct wave). Dynamic programming over
    (branch, last layer used). Returns a list of 1-based layer indices (0 = unmatched).
    """
    n_b, n_l = len(velocities), len(template)
    unmatched = math.log(2.5)
    cost = [[abs(math.log(v) - math.log(t)) for t in template] for v in velocities]
    # best[b][l]: least cost for branches b.. given that layers 1..l are used up
    best = [[0.0] * (n_l + 1) for _ in range(n_b + 1)]
    choice = [[0] * (n_l + 1) for _ in range(n_b)]
    for b in range(n_b - 1, -1, -1):
        for l in range(n_l, -1, -1):
            value, pick = unmatched + best[b + 1][l], 0
            for m in range(l + 1, n_l + 1):
                c = cost[b][m - 1] + best[b + 1][m]
                if c < value - 1e-12:
                    value, pick = c, m
            best[b][l], choice[b][l] = value, pick
    out, used = [], 0
    for b in range(n_b):
        pick = 1 if (anchored and b == 0) else choice[b][used]
        out.append(pick)
        if pick:
            used = pick
    return out


def interpret_line(picks, terrain=None, *, n_branches=None, breaks_m=None, sigma_ms=DEFAULT_SIGMA_MS,
                   max_branches=MAX_BRANCHES, min_contrast=0.02, through_origin=True, outlier_sigma=OUTLIER_SIGMA,
                   velocity_disagreement_pct=10.0, delay_times=True, grm=False, grm_xy_m=None):
    """Interpret a line's picks with the layered methods.

    Parameters
    ----------
    picks : Picks
        First-arrival picks, s; positions in m.
    terrain : Terrain, optional
        Ground elevation; used for the refractor elevations of the delay-time profile
        (default: the picks' geophone elevations).
    n_branches, breaks_m
        Branch count and break offsets (m), for all sides or per side
        (see :func:`tomo.branches.fit_shots`); default: chosen by the BIC.
    sigma_ms : float
        Pick sigma (ms) when the picks carry none.
    max_branches : int
        Most branches the criterion may choose (1 to 5).
    min_contrast : float
        Least fractional velocity increase from one branch to the next.
    through_origin : bool
        Hold direct-wave branches through the origin.
    outlier_sigma : float or None
        Leave out picks this many robust sigmas from their side's first fit, then fit
        again (:func:`tomo.branches.fit_side_robust`; default 4); None keeps every pick.
    velocity_disagreement_pct : float
        Warn when the forward and reverse apparent velocities of a refractor differ by
        more than this percentage of their mean (default 10 %, common practice: a dip or a
        lateral velocity change of that size matters to the interpretation).
    delay_times : bool
        Compute the plus-minus profile (:func:`tomo.delay.delay_time_profile`).
    grm : bool
        Also compute the GRM profile.
    grm_xy_m : float, optional
        GRM XY distance (m); default: the optimum found by the method.

    Returns
    -------
    LayeredResult

    Notes
    -----
    Steps: branch fits per shot side (:mod:`tomo.branches`); line layers from the sides
    that start with a direct wave, every side's branches matched to them by velocity
    (off-end shots included, which may add a deeper layer seen by two sides or more);
    layer velocities from the dipping-layer formula applied to the weighted mean
    slowness of each shooting direction (or, where that direction's branches are not
    parallel, to the slope of the stretch they share, :func:`_common_stretch`; then the
    minus-time velocity of the delay-time pairs replaces it where those are reliable);
    thicknesses under each shot from the n-layer
    intercept-time formula, averaged over the sides with weights from the intercept
    errors; the delay-time profile (:mod:`tomo.delay`).

    The intercept-time and dipping-layer formulas take shot and geophones on one level;
    on uneven ground the delay-time profile, worked out geophone by geophone, is the
    better guide. Velocity must increase with depth (module docstring).
    """
    if picks.time_s is None:
        raise InputError("picks have no times (a layout file?)", path=picks.path)
    if len(picks) == 0:
        raise InputError("no picks", path=picks.path)
    if not 1 <= max_branches <= MAX_BRANCHES:
        raise InputError(f"max_branches must be 1 to {MAX_BRANCHES}, got {max_branches}")
    options = {"n_branches": n_branches if not isinstance(n_branches, dict) else "per side",
               "breaks_m": breaks_m if not isinstance(breaks_m, dict) else "per side",
               "sigma_ms": sigma_ms, "pick_sigma_from_file": picks.sigma_s is not None,
               "max_branches": max_branches, "min_contrast": min_contrast,
               "through_origin": through_origin, "outlier_sigma": outlier_sigma,
               "velocity_disagreement_pct": velocity_disagreement_pct,
               "delay_times": delay_times, "grm": grm, "grm_xy_m": grm_xy_m}
    fits = fit_shots(picks, n_branches=n_branches, breaks_m=breaks_m, sigma_ms=sigma_ms,
                     max_branches=max_branches, through_origin=through_origin, min_contrast=min_contrast,
                     outlier_sigma=outlier_sigma)
    messages = [m for f in fits for m in f.messages if not f.ok]
    warnings = [m for f in fits for m in f.messages if f.ok and "bend the wrong way" not in m]
    bent = [f for f in fits if f.ok and any("bend the wrong way" in m for m in f.messages)]
    if len(bent) == 1:
        warnings.extend(m for m in bent[0].messages if "bend the wrong way" in m)
    elif bent:
        listed = ", ".join(f"{f.shot_x:g} m {'right' if f.side > 0 else 'left'}" for f in bent)
        warnings.append(f"{len(bent)} shot sides ({listed}) "
                        f"have times that bend the wrong way for flat layers (a later stretch slower than an earlier "
                        f"one): an irregular or dipping refractor, or velocity changing laterally or decreasing with "
                        f"depth; an irregular refractor can also pass for an extra layer (consider fixing the branch count)")
    src, src_index = picks.sources()
    for k, (sx, _) in enumerate(src):
        off = picks.offset[src_index == k]
        if off.size and (np.all(off > 0) or np.all(off < 0)):
            side = "right" if off[0] > 0 else "left"
            messages.append(f"shot at x = {sx:g} m: all picks on the {side} side (an end or off-end shot; "
                            f"nothing is reversed at the shot itself)")
    good = [f for f in fits if f.ok]
    if not good:
        raise InputError("no shot side could be fitted: " + (messages[0] if messages else "no picks"), path=picks.path)

    # --- template of line layers from sides that start with the direct wave
    near = [f for f in good if _near_shot(f)] or good
    counts = sorted((len(f.branches) for f in near), reverse=True)
    n_layers = counts[1] if len(counts) > 1 else counts[0]
    full = [f for f in near if len(f.branches) >= n_layers]
    template = [float(np.exp(np.median([math.log(f.branches[k].velocity_m_s) for f in full])))
                for k in range(n_layers)]
    template = list(np.maximum.accumulate(template))
    layer_of_branch = []
    for f in fits:
        if not f.ok:
            layer_of_branch.append([])
            continue
        anchored = _near_shot(f) and f in near
        layer_of_branch.append(_align([b.velocity_m_s for b in f.branches], template, anchored))
    # deeper layers seen only by the far (off-end) shots or beyond the common count: a
    # last unmatched branch faster than the deepest layer, on at least two sides
    deeper = []
    for f, lob in zip(fits, layer_of_branch):
        if f.ok and lob and lob[-1] == 0 and any(lob) and f.branches[-1].velocity_m_s > 1.1 * template[-1]:
            deeper.append((f, lob))
    if len(deeper) >= 2:
        v_new = float(np.exp(np.median([math.log(f.branches[-1].velocity_m_s) for f, _ in deeper])))
        template.append(v_new)
        n_layers += 1
        for f, lob in deeper:
            lob[-1] = n_layers
    n_layers, template, lateral = _merge_lateral_breaks(fits, layer_of_branch, n_layers, template, _spacing(picks),
                                                        warnings)
    _assign_sandwiched(fits, layer_of_branch, warnings)
    for f, lob in zip(fits, layer_of_branch):
        if f.ok and 0 in lob:
            names = ", ".join(f"{b.index} ({b.velocity_m_s:.0f} m/s)" for b, l in zip(f.branches, lob) if l == 0)
            warnings.append(f"{f.label}: branch(es) {names} match no layer of the line (too few sides see "
                            f"such a layer) and are left out")

    def branch_of(f, lob, k):
        for b, layer in zip(f.branches, lob):
            if layer == k:
                return b
        return None

    # --- layer 1 velocity from the direct waves
    v1s = [branch_of(f, lob, 1).velocity_m_s for f, lob in zip(fits, layer_of_branch)
           if f.ok and branch_of(f, lob, 1) is not None and f.branches[0].intercept_s == 0.0]
    if not v1s:
        v1s = [branch_of(f, lob, 1).velocity_m_s for f, lob in zip(fits, layer_of_branch)
               if f.ok and branch_of(f, lob, 1) is not None]
    layers = [{"velocity_m_s": float(np.mean(v1s)),
               "velocity_sigma_m_s": float(np.std(v1s) / math.sqrt(len(v1s))) if len(v1s) > 1 else None,
               "n_sides": len(v1s), "reversed": None}]
    v1 = layers[0]["velocity_m_s"]

    # --- refractor velocities from reversed pairs (dipping-layer formula)
    dips = []
    sigma_s = pick_sigma(picks, sigma_ms)
    intercept_override = {}  # (fit index, layer) -> (intercept_s, sigma_s) from a shared stretch
    pct = float(velocity_disagreement_pct)
    for k in range(2, n_layers + 1):
        pair_v, seen = [], []
        for fa, la in zip(fits, layer_of_branch):
            if not fa.ok:
                continue
            ba = branch_of(fa, la, k)
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
                if overlap < 0:
                    continue
                a_right, a_left = ba.velocity_m_s, bb.velocity_m_s
                if not (a_right > v1 and a_left > v1):
                    continue
                d = dipping_refractor(v1, a_right, a_left, ba.intercept_s, bb.intercept_s)
                disagree = abs(a_right - a_left) / (0.5 * (a_right + a_left)) * 100
                dips.append({
                    "layer": k, "shot_left_x": fa.shot_x, "shot_right_x": fb.shot_x,
                    "apparent_velocity_from_left_m_s": a_right, "apparent_velocity_from_right_m_s": a_left,
                    "velocity_m_s": d["velocity_m_s"],
                    "dip_deg": d["dip_deg"],  # positive: deepening toward larger x
                    "disagreement_pct": disagree,
                    "coverage_overlap_m": overlap,
                })
                if k == 2:
                    # depths under the two shots (Telford et al. 1990, sec. 4.3.3)
                    dips[-1].update({
                        "perpendicular_depth_left_m": d["perpendicular_depth_down_m"],
                        "perpendicular_depth_right_m": d["perpendicular_depth_up_m"],
                        "vertical_depth_left_m": d["vertical_depth_down_m"],
                        "vertical_depth_right_m": d["vertical_depth_up_m"]})
                pair_v.append(d["velocity_m_s"])
        # one warning per layer for the pairs whose directions disagree
        mine = [d for d in dips if d["layer"] == k]
        bad = [d for d in mine if d["disagreement_pct"] > pct]
        if len(bad) == 1:
            d = bad[0]
            warnings.append(
                f"layer {k}: apparent velocities {d['apparent_velocity_from_left_m_s']:.0f} m/s (shot at "
                f"{d['shot_left_x']:g} m) and {d['apparent_velocity_from_right_m_s']:.0f} m/s (shot at "
                f"{d['shot_right_x']:g} m) differ by {d['disagreement_pct']:.0f} % (> {pct:g} %): a dipping or "
                f"laterally varying refractor; the true velocity {d['velocity_m_s']:.0f} m/s assumes a plane "
                f"refractor, dip {d['dip_deg']:.1f} deg")
        elif bad:
            worst = max(bad, key=lambda d: d["disagreement_pct"])
            vs = [d["velocity_m_s"] for d in bad]
            warnings.append(
                f"layer {k}: forward and reverse apparent velocities differ by more than {pct:g} % in {len(bad)} of "
                f"{len(mine)} reversed pairs (up to {worst['disagreement_pct']:.0f} %: "
                f"{worst['apparent_velocity_from_left_m_s']:.0f} m/s from the shot at {worst['shot_left_x']:g} m "
                f"against {worst['apparent_velocity_from_right_m_s']:.0f} m/s from the shot at "
                f"{worst['shot_right_x']:g} m): a dipping or laterally varying refractor; the pairs' true "
                f"velocities ({min(vs):.0f} to {max(vs):.0f} m/s) each assume a plane refractor between the shots")
        # line velocity: the dipping-layer formula on the weighted mean slowness of each
        # shooting direction (weights 1/variance of the fitted slopes), so long, well-picked
        # branches count most and a plane dip cancels
        dirs = {}
        for fa, la in zip(fits, layer_of_branch):
            if not fa.ok:
                continue
            for b in (b for b, layer in zip(fa.branches, la) if layer == k):
                ds = b.slowness_sigma_s_m
                wgt = 1.0 / ds**2 if ds > 0 and math.isfinite(ds) else 1.0
                dirs.setdefault(fa.side, []).append((b.slowness_s_m, wgt, b.slowness_sigma_s_m))
        mean_s = {}
        for side, vals in dirs.items():
            ws = np.array([w for _, w, _ in vals])
            mean_s[side] = (float(np.sum(ws * np.array([x for x, _, _ in vals])) / ws.sum()), float(1 / math.sqrt(ws.sum())))
        # where the same-direction branches are not parallel, the slope of the stretch
        # they share (and the intercepts there) stand in for the branch slopes
        for side, (s_c, e_c, icpt, (x_a, x_b), n_c) in _common_stretch(fits, layer_of_branch, k, sigma_s).items():
            if side in mean_s and 1 / s_c > v1:
                warnings.append(
                    f"layer {k}: the apparent velocities of the shots {'left' if side > 0 else 'right'} of its "
                    f"branches differ beyond their errors (the refractor is not plane under them); "
                    f"{1 / s_c:.0f} m/s from the stretch x = {x_a:g} to {x_b:g} m that {n_c} of them share "
                    f"replaces the mean branch value {1 / mean_s[side][0]:.0f} m/s")
                mean_s[side] = (s_c, e_c)
                for i, val in icpt.items():
                    intercept_override[(i, k)] = val
                # the refractor changes along the line: where reversed pairs record it at
                # common geophones, their minus times give the velocity (below)
                lateral.add(k)
        if 1 in mean_s and -1 in mean_s and 1 / mean_s[1][0] > v1 and 1 / mean_s[-1][0] > v1:
            v = dipping_refractor(v1, 1 / mean_s[1][0], 1 / mean_s[-1][0])["velocity_m_s"]
            # one sigma from the slowness errors (the formula is close to the harmonic mean)
            sig = float(v * v * 0.5 * math.hypot(mean_s[1][1], mean_s[-1][1]))
            reversed_ = True
            if not pair_v:
                warnings.append(f"layer {k} ({v:.0f} m/s) is seen in both directions but over different parts "
                                f"of the line (no common coverage): its velocity assumes one plane refractor "
                                f"and no dip is computed")
        elif seen:
            v = float(1.0 / np.mean(1.0 / np.asarray(seen)))
            sig = None
            reversed_ = False
            warnings.append(f"layer {k} ({v:.0f} m/s) is not reversed: no shot pair records it from both "
                            f"directions; its velocity is apparent and its dip unknown")
        else:
            v, sig, reversed_ = template[k - 1], None, False
        layers.append({"velocity_m_s": v, "velocity_sigma_m_s": sig, "n_sides": len(seen), "reversed": reversed_})
    for k in range(1, len(layers)):
        if layers[k]["velocity_m_s"] <= layers[k - 1]["velocity_m_s"]:
            warnings.append(f"layer {k + 1} velocity {layers[k]['velocity_m_s']:.0f} m/s is not above layer {k}'s "
                            f"{layers[k - 1]['velocity_m_s']:.0f} m/s: the layered methods need velocity increasing "
                            f"with depth; thicknesses below are unreliable")
    velocities = [lay["velocity_m_s"] for lay in layers]

    def fill_thicknesses(velocities):
        """Thicknesses under each shot from its intercept times, and the line's."""
        notes = []
        shot_depths = []
        per_layer = [[] for _ in range(n_layers - 1)]
        for i, (f, lob) in enumerate(zip(fits, layer_of_branch)):
            if not f.ok:
                continue
            seen = sorted(set(x for x in lob if x > 1))
            if not seen:
                continue
            vs = [velocities[0]] + [velocities[k - 1] for k in seen]
            ts = [intercept_override.get((i, k), (branch_of(f, lob, k).intercept_s,))[0] for k in seen]
            h = intercept_thicknesses(vs, ts)
            depths, top, prev = {}, 0.0, 1
            for k, hk in zip(seen, h):
                top += hk
                depths[k] = float(top)
                if k == prev + 1 and math.isfinite(hk):
                    # weight by the intercept's variance: a short branch has a poor intercept
                    b = branch_of(f, lob, k)
                    sig_t = intercept_override.get((i, k), (None, b.intercept_sigma_s))[1]
                    sig_h = sig_t / (2 * cos_term(velocities[k - 2], velocities[k - 1]))
                    weight = 1.0 / sig_h**2 if math.isfinite(sig_h) and sig_h > 0 else 1.0
                    per_layer[k - 2].append((float(hk), weight))
                prev = k
            shot_depths.append({"shot_x": f.shot_x, "side": "right" if f.side > 0 else "left", "depths_m": depths})
        top = 0.0
        for k in range(n_layers - 1):
            vals = per_layer[k]
            if vals:
                hs = np.array([v for v, _ in vals])
                ws = np.array([w for _, w in vals])
                hk = float(np.sum(ws * hs) / np.sum(ws))
                sig = float(np.sqrt(np.sum(ws * (hs - hk) ** 2) / np.sum(ws) / len(hs))) if len(hs) > 1 else None
            else:
                hk, sig = float("nan"), None
                notes.append(f"layer {k + 1}: no shot side gives its thickness (its top and base are not both seen)")
            if hk <= 0:
                notes.append(f"layer {k + 1}: thickness {hk:.2f} m is not positive: the intercept times are inconsistent")
            layers[k]["thickness_m"] = hk if math.isfinite(hk) else None
            layers[k]["thickness_sigma_m"] = sig
            layers[k]["depth_top_m"] = top
            top += hk if math.isfinite(hk) else 0.0
        layers[-1]["thickness_m"] = None
        layers[-1]["thickness_sigma_m"] = None
        layers[-1]["depth_top_m"] = top
        return shot_depths, notes

    shot_depths, notes = fill_thicknesses(velocities)

    # --- the limits of the method, stated plainly
    spacing = _spacing(picks)
    for k in range(1, n_layers):
        hid = hidden_layer_thickness(spacing, velocities[0], velocities[k]) if velocities[k] > velocities[0] else float("nan")
        if math.isfinite(hid):
            warnings.append(f"above the top of layer {k + 1}: a layer with a velocity between {velocities[k - 1]:.0f} and "
                            f"{velocities[k]:.0f} m/s thinner than about {hid:.1f} m would give no first arrivals "
                            f"(hidden layer, rule of thumb for {spacing:g} m spacing); a slower layer under a faster "
                            f"one is never seen")
    if n_layers == 1:
        warnings.append("one layer only: no refractor within the offsets recorded (the spread sees to about a "
                        "quarter to a third of its longest offset, common practice)")

    for k in range(1, n_layers + 1):
        layers[k - 1]["lateral_change"] = k in lateral
    result = LayeredResult(layers=layers, sides=fits, layer_of_branch=layer_of_branch,
                           shot_depths=shot_depths, dips=dips, warnings=warnings, messages=messages,
                           options=options)
    if delay_times and n_layers > 1:
        result.profile = delay_time_profile(picks, result, terrain=terrain, grm=grm, grm_xy_m=grm_xy_m)
        # Over a refractor that changes along the line (a merged lateral break) the branch
        # slopes mix up-dip and down-dip stretches; the minus-time velocity of the delay-time
        # pairs (Hagedoorn 1959) is then the better estimate: take it and redo the rest.
        changed = False
        for k in sorted(lateral):
            sel = (result.profile.refractor == k - 1) & (result.profile.method == "plus-minus")
            if np.any(sel):
                v_minus = float(result.profile.velocity_m_s[sel][0])
                if math.isfinite(v_minus) and v_minus > velocities[k - 2] and abs(v_minus / velocities[k - 1] - 1) > 1e-3:
                    warnings.append(f"layer {k}: velocity {v_minus:.0f} m/s from the minus times replaces "
                                    f"{velocities[k - 1]:.0f} m/s from the branch slopes (the refractor changes "
                                    f"along the line)")
                    layers[k - 1]["branch_velocity_m_s"] = velocities[k - 1]
                    layers[k - 1]["velocity_m_s"] = v_minus
                    layers[k - 1]["velocity_sigma_m_s"] = None
                    changed = True
        if changed:
            velocities = [lay["velocity_m_s"] for lay in layers]
            shot_depths, notes = fill_thicknesses(velocities)
            result.shot_depths = shot_depths
            result.profile = delay_time_profile(picks, result, terrain=terrain, grm=grm, grm_xy_m=grm_xy_m)
        result.warnings.extend(notes)
        result.warnings.extend(result.profile.warnings)
    else:
        result.warnings.extend(notes)
    return result


def _spacing(picks):
    rx = np.unique(np.round(picks.receiver_x, 4))
    return float(np.median(np.diff(rx))) if rx.size > 1 else 1.0


# --- starting model --------------------------------------------------------------


