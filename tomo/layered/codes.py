"""The notices of the layered stage: one stable code per kind, with its "what to do" hint.

Code and tests compare the codes (:class:`tomo.core.notices.Notice`), never the text.
A code names what was found, not how it is worded, so the sentence may be improved
without breaking anything that reads the records.
"""

from __future__ import annotations

from ..core.notices import NOTE, WARNING, Notice

__all__ = ["HINTS", "TOPICS", "NOTE_CODES", "notice"]

_FIX_COUNT = "fix the branch count (--branches or --side-branches) and compare"
_MORE_SHOTS = "add shots so that each refractor is recorded from both directions"

#: Every code of the layered stage with its hint (common practice for each remedy).
HINTS = {
    # one shot side (tomo.layered.branches)
    "side-too-few-picks": "check the picks of this side; it needs three or more",
    "side-times-decrease": "check the shot position and the picks",
    "side-no-increasing-fit": "check the picks of this side; try --outlier-sigma or fixed breaks",
    "breaks-too-close": "move the break offsets apart",
    "branch-count-reduced": "ask for fewer branches on this side",
    "branch-few-picks": "treat this branch's velocity with care; check the picks near its ends",
    "outliers-left-out": "check the picks marked in the branches figure",
    "times-bend-wrong-way": _FIX_COUNT,
    # the shots (tomo.layered.interpret)
    "shot-one-sided": "",
    # matching branches to the line's layers (tomo.layered.matching)
    "break-fixed-in-place": "compare the delay-time refractor with the tomogram there",
    "branches-parallel": "compare the delay-time refractor with the tomogram there",
    "branch-bent-by-relief": "",
    "branch-unmatched": _FIX_COUNT,
    # refractor velocities (tomo.layered.velocities)
    "apparent-velocities-differ": "read the delay-time refractor rather than one depth per shot",
    "branches-not-parallel": "read the delay-time refractor rather than one depth per shot",
    "layer-no-common-coverage": _MORE_SHOTS,
    "layer-not-reversed": _MORE_SHOTS,
    "velocity-not-increasing": "check the branch matching in the branches figure; " + _FIX_COUNT,
    # thicknesses (tomo.layered.thickness)
    "thickness-missing": _MORE_SHOTS,
    "thickness-not-positive": "check the branch matching and the picks near the crossovers",
    # the method's limits (tomo.layered.interpret)
    "hidden-layer-limit": "calibrate against a borehole or test pit",
    "one-layer-only": "record longer offsets to reach a refractor",
    "minus-time-velocity-used": "",
    # the delay-time profile (tomo.layered.delay)
    "minus-time-velocity-rejected": "check the reversed pairs' picks; the line velocity is used",
    "refractor-not-profiled": _MORE_SHOTS,
    # boreholes (tomo.layered.ties)
    "borehole-not-tied": "check the borehole's position, depth and interface",
    "borehole-mis-tie": "check the borehole and the picks; compare the tomogram there",
    "borehole-deeper-not-tied": "tie the deepest refractor, or interpret again after changing the layers above",
}


#: The kind of each code in a few words: the heading of a group of repeats.
TOPICS = {
    "side-too-few-picks": "shot sides with too few picks",
    "side-times-decrease": "shot sides whose times decrease with offset",
    "side-no-increasing-fit": "shot sides with no fit of increasing velocity",
    "breaks-too-close": "break offsets too close together",
    "branch-count-reduced": "shot sides fitted with fewer branches than asked",
    "branch-few-picks": "branches resting on only 2 picks",
    "outliers-left-out": "outlier picks left out of the branch fits",
    "times-bend-wrong-way": "shot sides whose times bend the wrong way",
    "shot-one-sided": "end or off-end shots (one side only)",
    "break-fixed-in-place": "branch breaks fixed in place (one refractor that changes along the line)",
    "branches-parallel": "parallel branches taken as one refractor",
    "branch-bent-by-relief": "branches bent by the refractor's relief",
    "branch-unmatched": "branches that match no layer of the line",
    "apparent-velocities-differ": "forward and reverse apparent velocities differ",
    "branches-not-parallel": "branches shooting one way are not parallel",
    "layer-no-common-coverage": "layers with no common coverage",
    "layer-not-reversed": "layers not reversed",
    "velocity-not-increasing": "velocities not increasing with depth",
    "thickness-missing": "thicknesses not found",
    "thickness-not-positive": "thicknesses not positive",
    "hidden-layer-limit": "thickest layer that could hide",
    "one-layer-only": "one layer only",
    "minus-time-velocity-used": "refractor velocity from the minus times",
    "minus-time-velocity-rejected": "minus-time velocity not used",
    "refractor-not-profiled": "refractors without a delay-time profile",
    "borehole-not-tied": "boreholes the delay-time refractor cannot be tied to",
    "borehole-mis-tie": "boreholes the calibrated velocity leaves beyond two sigmas",
    "borehole-deeper-not-tied": "refractors below a tied one left as they were",
}

#: Codes that are information, not something to act on: what the methods found and how
#: they dealt with it. A refractor that dips or changes along the line is what the
#: delay-time methods and the tomography are for; the hidden-layer size is a limit of
#: every refraction line (stated for the line's numbers); the rest say which of two
#: estimates was used. The remaining codes are warnings: picks, shots or settings to check.
NOTE_CODES = frozenset({
    "shot-one-sided", "branch-few-picks", "break-fixed-in-place", "branches-parallel", "branch-bent-by-relief",
    "apparent-velocities-differ", "branches-not-parallel", "hidden-layer-limit", "minus-time-velocity-used",
    "borehole-deeper-not-tied",
})


def notice(code, message, layer=None, branch=None, fit=None, shot_x=None, side=None):
    """A :class:`Notice` of the layered stage with the hint of its ``code``.

    ``fit`` (a :class:`tomo.layered.sidefit.SideFit`) gives the shot and side concerned,
    or ``shot_x`` (m) and ``side`` ("left"/"right") do.
    """
    if code not in HINTS:
        raise KeyError(f"unknown notice code {code!r}")
    if fit is not None:
        shot_x, side = float(fit.shot_x), fit.side_name
    return Notice(code, message, layer=layer, branch=branch, shot_x=shot_x, side=side, hint=HINTS[code],
                  level=NOTE if code in NOTE_CODES else WARNING, topic=TOPICS.get(code, ""))
