"""The line's layers from the branches of all shot sides, and each branch matched to one.

1. Template: the sides that start with the direct wave give the line's layer count (the
   second largest branch count, so one side with a spurious break does not add a layer)
   and the layer velocities (median over the sides with that many branches).
2. Every side's branches are matched to the template by velocity, strictly downward
   (:func:`align`); a last branch faster than the deepest layer on two sides or more
   (off-end shots reaching deeper) adds a layer.
3. Breaks that stay at one place along the line, or branches that run parallel at
   shared geophones, mark one refractor changing along the line, not two layers: the
   two are merged (:func:`merge_lateral_breaks`).
4. A branch left unmatched between branches of two consecutive layers is taken as head
   waves from the deeper one bent by relief (:func:`assign_sandwiched`).

An undulating refractor bends its branches and the branch count can read the bends as
extra layers; the tests of step 3 recognise most such cases but do not always fire
(fix the count with ``n_branches`` then).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from .codes import notice
from .splits import starts_at_shot

__all__ = ["branch_of", "align", "line_template", "parallelism", "break_spread", "merge_lateral_breaks",
           "assign_sandwiched", "unmatched_notices", "match_branches", "Matching", "PARALLEL_RATIO"]

#: Largest slope of the difference of two shots' head-wave times, as a fraction of the
#: slope two distinct layers give, for the branches to count as one refractor.
PARALLEL_RATIO = 0.4


def branch_of(fit, layer_of_branch, k):
    """The first branch of a side matched to line layer ``k``, or None."""
    for b, layer in zip(fit.branches, layer_of_branch):
        if layer == k:
            return b
    return None


def align(velocities, template, anchored):
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
        for l in range(n_l, -1, -1):  # noqa: E741 (l for layer, as in the docstring)
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


def line_template(fits):
    """The line's layer velocities (m/s, non-decreasing) and the sides that start with the
    direct wave (all fitted sides when none does)."""
    good = [f for f in fits if f.ok]
    near = [f for f in good if starts_at_shot(f.offsets_m)] or good
    counts = sorted((len(f.branches) for f in near), reverse=True)
    n_layers = counts[1] if len(counts) > 1 else counts[0]
    full = [f for f in near if len(f.branches) >= n_layers]
    template = [float(np.exp(np.median([math.log(f.branches[k].velocity_m_s) for f in full])))
                for k in range(n_layers)]
    return list(np.maximum.accumulate(template)), near


def _add_deeper_layer(fits, layer_of_branch, template):
    """A layer below the template seen only by far (off-end) shots or beyond the common
    count: a last unmatched branch faster than the deepest layer, on at least two sides."""
    deeper = []
    for f, lob in zip(fits, layer_of_branch):
        if f.ok and lob and lob[-1] == 0 and any(lob) and f.branches[-1].velocity_m_s > 1.1 * template[-1]:
            deeper.append((f, lob))
    if len(deeper) >= 2:
        template.append(float(np.exp(np.median([math.log(f.branches[-1].velocity_m_s) for f, _ in deeper]))))
        for f, lob in deeper:
            lob[-1] = len(template)


def _labelled_picks(fit, layer_of_branch):
    """{geophone x: (line layer, time)} of a side's picks."""
    out = {}
    for b, layer in zip(fit.branches, layer_of_branch):
        sel = fit.branch_of_pick == b.index
        for x, t in zip(np.round(fit.shot_x + fit.side * fit.offsets_m[sel], 3), fit.times_s[sel]):
            out[float(x)] = (layer, float(t))
    return out


def parallelism(fits, layer_of_branch, k, template):
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
    sides = [(f, _labelled_picks(f, lob)) for f, lob in zip(fits, layer_of_branch) if f.ok]
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


def _pooled_sd(groups):
    """Pooled standard deviation of the groups with two values or more; NaN without any."""
    num, den = 0.0, 0
    for vals in groups.values():
        if len(vals) >= 2:
            num += float(np.var(vals, ddof=1)) * (len(vals) - 1)
            den += len(vals) - 1
    return math.sqrt(num / den) if den else float("nan")


def break_spread(fits, layer_of_branch, k):
    """Where the break from layer k to layer k+1 falls, over the sides that show it.

    Returns ``(offsets, positions, offset_spread_m, position_spread_m)``: the crossover
    offsets and their positions along the line (m) per shooting direction, and their
    standard deviations pooled over the directions (m; NaN with under two per direction).
    """
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
    return offsets, positions, _pooled_sd(offsets), _pooled_sd(positions)


def _merge_notice(k, template, fixed_place, ratio, positions, pos_spread, off_spread):
    if fixed_place:
        where = "; ".join(f"x = {np.median(positions[s]):.0f} m for shots {'left' if s > 0 else 'right'} of it"
                          for s in sorted(positions, reverse=True) if positions[s])
        return notice("break-fixed-in-place",
                      f"the branches at {template[k - 1]:.0f} and {template[k]:.0f} m/s break at one place along the "
                      f"line ({where}; spread {pos_spread:.1f} m) while the break's offset varies "
                      f"({off_spread:.1f} m): a change along the refractor (step, trough, dip) or a lateral velocity "
                      f"change, not a deeper layer; both are taken as head waves from one refractor, the top of "
                      f"layer {k}", layer=k)
    return notice("branches-parallel",
                  f"at the same geophones, the {template[k]:.0f} m/s branches of farther shots run parallel to the "
                  f"{template[k - 1]:.0f} m/s branches of nearer shots (their difference changes at {ratio:.0%} of "
                  f"the rate two distinct layers would give): head waves from one refractor whose depth or dip "
                  f"changes, not a deeper layer; both are taken as the top of layer {k}", layer=k)


def merge_lateral_breaks(fits, layer_of_branch, template, spacing):
    """Merge two line layers whose branch break is fixed in place rather than in offset.

    Over flat layers the break between two branches comes at the same offset (the
    crossover distance) whatever the shot position. A break that stays at one place
    along the line while the shots move is made by the refractor itself changing there
    (a step, trough or change of dip) or by a lateral velocity change, not by a deeper
    layer (common practice). When, over the shot sides that show the break, the spread
    of its positions is under half the spread of its offsets (and the offsets spread
    over more than two geophone spacings, ``spacing`` m), the deeper of the two layers is
    merged into the upper one: both branches are then head waves from the same
    refractor, which the delay-time methods follow with its varying depth. The same
    merge is made when the two layers' branches run parallel at shared geophones
    (:func:`parallelism` under ``PARALLEL_RATIO``), which marks head waves from one refractor.

    Changes ``layer_of_branch`` in place; returns the new template, the set of (new)
    layer indices whose top is such a changing refractor, and the notices.
    """
    lateral, notes = set(), []
    k = 2
    while k < len(template):
        offsets, positions, off_spread, pos_spread = break_spread(fits, layer_of_branch, k)
        n_sides = sum(len(v) for v in offsets.values())
        fixed_place = n_sides >= 3 and off_spread > 2 * spacing and pos_spread < 0.5 * off_spread
        ratio = parallelism(fits, layer_of_branch, k, template)
        if not (fixed_place or (ratio is not None and ratio < PARALLEL_RATIO)):
            k += 1
            continue
        notes.append(_merge_notice(k, template, fixed_place, ratio, positions, pos_spread, off_spread))
        for lob in layer_of_branch:
            for i, layer in enumerate(lob):
                if layer == k + 1:
                    lob[i] = k
                elif layer > k + 1:
                    lob[i] = layer - 1
        template = template[:k] + template[k + 1:]
        lateral = {x if x <= k else x - 1 for x in lateral} | {k}
    return template, lateral, notes


def assign_sandwiched(fits, layer_of_branch):
    """Give an unmatched branch between branches of consecutive line layers to the deeper one.

    A side whose branches match line layers ``k`` and ``k + 1`` with an unmatched branch
    in between records, after the crossover from layer ``k``, arrivals refracted below
    layer ``k``; the line has no layer there, so they are head waves from the top of
    layer ``k + 1`` whose apparent velocity is bent by relief of that refractor (a trough
    slows them down-dip, a rise speeds them up: delay times change along the line,
    Hagedoorn 1959). Leaving them out would cut the side's head-wave coverage short
    just where a reversed pair needs it. Only branches faster than the layer-``k``
    branch before them are taken (a slower one is no refraction from below).
    Changes ``layer_of_branch`` in place; returns the notices.
    """
    notes = []
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
                b = f.branches[i]
                notes.append(notice(
                    "branch-bent-by-relief",
                    f"{f.label}: branch {b.index} ({b.velocity_m_s:.0f} m/s), between branches of layers "
                    f"{lob[before]} and {lob[after]}, is taken as head waves from the top of layer {lob[after]} "
                    f"bent by the refractor's relief", layer=lob[after], branch=b.index, fit=f))
    return notes


def unmatched_notices(fits, layer_of_branch):
    """One notice per side with branches that match no line layer (left out)."""
    notes = []
    for f, lob in zip(fits, layer_of_branch):
        if f.ok and 0 in lob:
            left = [b for b, layer in zip(f.branches, lob) if layer == 0]
            names = ", ".join(f"{b.index} ({b.velocity_m_s:.0f} m/s)" for b in left)
            notes.append(notice("branch-unmatched",
                                f"{f.label}: branch(es) {names} match no layer of the line (too few sides see "
                                f"such a layer) and are left out", branch=left[0].index, fit=f))
    return notes


@dataclass
class Matching:
    """The line's layers and each side's branches matched to them.

    Attributes
    ----------
    template : list of float
        Line layer velocities from the branches, m/s.
    layer_of_branch : list of list of int
        Per side, the line layer (1-based) of each branch; 0 when unmatched.
    lateral : set of int
        Layers whose top was found to change along the line (merged breaks).
    notices : list of Notice
    """

    template: list
    layer_of_branch: list
    lateral: set = field(default_factory=set)
    notices: list = field(default_factory=list)

    @property
    def n_layers(self):
        return len(self.template)


def match_branches(fits, spacing):
    """Steps 1-4 of the module docstring; ``spacing`` is the geophone spacing, m."""
    template, near = line_template(fits)
    layer_of_branch = []
    for f in fits:
        if not f.ok:
            layer_of_branch.append([])
            continue
        anchored = starts_at_shot(f.offsets_m) and f in near
        layer_of_branch.append(align([b.velocity_m_s for b in f.branches], template, anchored))
    _add_deeper_layer(fits, layer_of_branch, template)
    template, lateral, notes = merge_lateral_breaks(fits, layer_of_branch, template, spacing)
    notes += assign_sandwiched(fits, layer_of_branch)
    notes += unmatched_notices(fits, layer_of_branch)
    return Matching(template, layer_of_branch, lateral, notes)
