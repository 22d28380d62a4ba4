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
- Delay times under every geophone: :mod:`tomo.layered.delay` (plus-minus, GRM).

Known limits of this implementation: the intercept-time and dipping-layer formulas
take shots and geophones on one level (the delay-time profile, geophone by geophone,
copes with terrain); deeper dipping refractors are assumed parallel to the first; an
undulating refractor bends its branches and the automatic branch count can read the
bends as extra layers; two tests recognise most such cases and merge the layers again
(:func:`tomo.layered.matching.merge_lateral_breaks`: a break fixed in place rather than in offset, or head
waves running parallel at shared geophones), but they do not always fire (fix the
count with ``n_branches`` then). Where the branches shooting one way are not parallel
(the refractor is not plane under them), the line velocity comes from the stretch of
geophones they all share (:func:`tomo.layered.velocities.common_stretch`); that assumes the refractor under
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
from dataclasses import dataclass

import numpy as np

from ..core.errors import InputError
from ..survey.geometry import station_spacing
from .branches import DEFAULT_SIGMA_MS, MAX_BRANCHES, OUTLIER_SIGMA, fit_shots, pick_sigma
from .codes import notice
from .delay import delay_time_profile
from .formulas import hidden_layer_thickness
from .matching import match_branches
from .result import LayeredResult
from .thickness import fill_thicknesses
from .velocities import refractor_velocities

__all__ = ["interpret_line", "fit_sides", "SideNotices", "side_notices", "one_sided_shots", "method_limits",
           "refine_with_minus_times", "add_delay_times"]


@dataclass
class SideNotices:
    """The notices of the shot sides, sorted for the result: ``warnings`` about fitted
    sides (one for all sides whose times bend the wrong way), ``messages`` about sides
    that could not be fitted."""

    warnings: list
    messages: list


def side_notices(fits):
    """Gather the sides' notices; the sides whose times bend the wrong way share one."""
    messages = [m for f in fits for m in f.messages if not f.ok]
    warnings = [m for f in fits for m in f.messages if f.ok and m.code != "times-bend-wrong-way"]
    bent = [f for f in fits if f.ok and any(m.code == "times-bend-wrong-way" for m in f.messages)]
    if len(bent) == 1:
        warnings.extend(m for m in bent[0].messages if m.code == "times-bend-wrong-way")
    elif bent:
        listed = ", ".join(f"{f.shot_x:g} m {f.side_name}" for f in bent)
        warnings.append(notice(
            "times-bend-wrong-way",
            f"{len(bent)} shot sides ({listed}) "
            f"have times that bend the wrong way for flat layers (a later stretch slower than an earlier "
            f"one): an irregular or dipping refractor, or velocity changing laterally or decreasing with "
            f"depth; an irregular refractor can also pass for an extra layer (consider fixing the branch count)"))
    return SideNotices(warnings, messages)


def one_sided_shots(picks):
    """A message per shot whose picks all lie on one side (an end or off-end shot)."""
    out = []
    src, src_index = picks.sources()
    for k, (sx, _) in enumerate(src):
        off = picks.offset[src_index == k]
        if off.size and (np.all(off > 0) or np.all(off < 0)):
            side = "right" if off[0] > 0 else "left"
            out.append(notice("shot-one-sided", f"shot at x = {sx:g} m: all picks on the {side} side (an end or "
                              f"off-end shot; nothing is reversed at the shot itself)", shot_x=float(sx), side=side))
    return out


def fit_sides(picks, options):
    """Step 1: the branch fits of every shot side (:func:`tomo.layered.branches.fit_shots`)
    and their notices; raises InputError when no side can be fitted."""
    fits = fit_shots(picks, n_branches=options["n_branches"], breaks_m=options["breaks_m"],
                     sigma_ms=options["sigma_ms"], max_branches=options["max_branches"],
                     through_origin=options["through_origin"], min_contrast=options["min_contrast"],
                     outlier_sigma=options["outlier_sigma"])
    notes = side_notices(fits)
    notes.messages.extend(one_sided_shots(picks))
    if not any(f.ok for f in fits):
        first = notes.messages[0].message if notes.messages else "no picks"
        raise InputError("no shot side could be fitted: " + first, path=picks.path)
    return fits, notes


def method_limits(velocities, spacing):
    """Notices of what the method cannot see: the hidden-layer thickness above each
    refractor (:func:`tomo.layered.formulas.hidden_layer_thickness`, a rule of thumb for
    the geophone ``spacing`` in m), or that no refractor was reached."""
    notes = []
    for k in range(1, len(velocities)):
        hid = hidden_layer_thickness(spacing, velocities[0], velocities[k]) if velocities[k] > velocities[0] \
            else float("nan")
        if math.isfinite(hid):
            notes.append(notice(
                "hidden-layer-limit",
                f"above the top of layer {k + 1}: a layer with a velocity between {velocities[k - 1]:.0f} and "
                f"{velocities[k]:.0f} m/s thinner than about {hid:.1f} m would give no first arrivals "
                f"(hidden layer, rule of thumb for {spacing:g} m spacing); a slower layer under a faster "
                f"one is never seen", layer=k + 1))
    if len(velocities) == 1:
        notes.append(notice("one-layer-only", "one layer only: no refractor within the offsets recorded (the "
                            "spread sees to about a quarter to a third of its longest offset, common practice)"))
    return notes


def refine_with_minus_times(result, lateral):
    """Replace the velocity of each layer in ``lateral`` by the minus-time velocity of the
    delay-time profile where that one is usable; returns the notices (empty: no change).

    Over a refractor that changes along the line (a merged lateral break) the branch
    slopes mix up-dip and down-dip stretches; the minus-time velocity of the delay-time
    pairs does not depend on the refractor's shape (Hagedoorn 1959) and is then the
    better estimate. Changes ``result.layers`` in place.
    """
    notes = []
    prof, layers = result.profile, result.layers
    velocities = [lay.velocity_m_s for lay in layers]  # each test against the branch-slope values
    for k in sorted(lateral):
        sel = (prof.refractor == k - 1) & (prof.method == "plus-minus")
        if not np.any(sel):
            continue
        v_minus = float(prof.velocity_m_s[sel][0])
        v_line, v_above = velocities[k - 1], velocities[k - 2]
        if math.isfinite(v_minus) and v_minus > v_above and abs(v_minus / v_line - 1) > 1e-3:
            notes.append(notice("minus-time-velocity-used",
                                f"layer {k}: velocity {v_minus:.0f} m/s from the minus times replaces "
                                f"{v_line:.0f} m/s from the branch slopes (the refractor changes "
                                f"along the line)", layer=k))
            layers[k - 1].branch_velocity_m_s = v_line
            layers[k - 1].velocity_m_s = v_minus
            layers[k - 1].velocity_sigma_m_s = None
    return notes


def add_delay_times(result, picks, lateral, intercept_override, thickness_notes, terrain=None, grm=False,
                    grm_xy_m=None):
    """The delay-time refinement: the profile under the geophones
    (:func:`tomo.layered.delay.delay_time_profile`); where a layer's top changes along the
    line and the minus times give its velocity (:func:`refine_with_minus_times`), the
    thicknesses and the profile again with that velocity. Sets ``result.profile`` and
    ``result.shot_depths`` and adds the notices to ``result.warnings`` (the thickness
    notices of the last pass, ``thickness_notes`` when there was one pass only).
    """
    result.profile = delay_time_profile(picks, result, terrain=terrain, grm=grm, grm_xy_m=grm_xy_m)
    replaced = refine_with_minus_times(result, lateral)
    if replaced:
        result.warnings.extend(replaced)
        result.shot_depths, thickness_notes = fill_thicknesses(result.layers, result.sides, result.layer_of_branch,
                                                               intercept_override)
        result.profile = delay_time_profile(picks, result, terrain=terrain, grm=grm, grm_xy_m=grm_xy_m)
    result.warnings.extend(thickness_notes)
    result.warnings.extend(result.profile.warnings)


def _options(picks, n_branches, breaks_m, sigma_ms, max_branches, min_contrast, through_origin, outlier_sigma,
             velocity_disagreement_pct, delay_times, grm, grm_xy_m):
    """Check the arguments; the settings as recorded in the result."""
    if picks.time_s is None:
        raise InputError("picks have no times (a layout file?)", path=picks.path)
    if len(picks) == 0:
        raise InputError("no picks", path=picks.path)
    if not 1 <= max_branches <= MAX_BRANCHES:
        raise InputError(f"max_branches must be 1 to {MAX_BRANCHES}, got {max_branches}")
    return {"n_branches": n_branches if not isinstance(n_branches, dict) else "per side",
            "breaks_m": breaks_m if not isinstance(breaks_m, dict) else "per side",
            "sigma_ms": sigma_ms, "pick_sigma_from_file": picks.sigma_s is not None,
            "max_branches": max_branches, "min_contrast": min_contrast,
            "through_origin": through_origin, "outlier_sigma": outlier_sigma,
            "velocity_disagreement_pct": velocity_disagreement_pct,
            "delay_times": delay_times, "grm": grm, "grm_xy_m": grm_xy_m}


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
        (see :func:`tomo.layered.branches.fit_shots`); default: chosen by the BIC.
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
        again (:func:`tomo.layered.branches.fit_side_robust`; default 4); None keeps every pick.
    velocity_disagreement_pct : float
        Warn when the forward and reverse apparent velocities of a refractor differ by
        more than this percentage of their mean (default 10 %, common practice: a dip or a
        lateral velocity change of that size matters to the interpretation).
    delay_times : bool
        Compute the plus-minus profile (:func:`tomo.layered.delay.delay_time_profile`).
    grm : bool
        Also compute the GRM profile.
    grm_xy_m : float, optional
        GRM XY distance (m); default: the optimum found by the method.

    Returns
    -------
    LayeredResult

    Notes
    -----
    Steps: branch fits per shot side (:mod:`tomo.layered.branches`); line layers from the sides
    that start with a direct wave, every side's branches matched to them by velocity
    (off-end shots included, which may add a deeper layer seen by two sides or more);
    layer velocities from the dipping-layer formula applied to the weighted mean
    slowness of each shooting direction (or, where that direction's branches are not
    parallel, to the slope of the stretch they share,
    :func:`tomo.layered.velocities.common_stretch`; then the
    minus-time velocity of the delay-time pairs replaces it where those are reliable);
    thicknesses under each shot from the n-layer
    intercept-time formula, averaged over the sides with weights from the intercept
    errors; the delay-time profile (:mod:`tomo.layered.delay`).

    The intercept-time and dipping-layer formulas take shot and geophones on one level;
    on uneven ground the delay-time profile, worked out geophone by geophone, is the
    better guide. Velocity must increase with depth (module docstring).
    """
    options = _options(picks, n_branches, breaks_m, sigma_ms, max_branches, min_contrast, through_origin,
                       outlier_sigma, velocity_disagreement_pct, delay_times, grm, grm_xy_m)
    fits, side_notes = fit_sides(picks, dict(options, n_branches=n_branches, breaks_m=breaks_m))
    spacing = station_spacing(picks)
    matched = match_branches(fits, spacing)
    found = refractor_velocities(fits, matched.layer_of_branch, matched.template, pick_sigma(picks, sigma_ms),
                                 float(velocity_disagreement_pct))
    layers, lateral = found.layers, matched.lateral | found.lateral
    shot_depths, thickness_notes = fill_thicknesses(layers, fits, matched.layer_of_branch, found.intercept_override)
    warnings = side_notes.warnings + matched.notices + found.notices
    warnings += method_limits([lay.velocity_m_s for lay in layers], spacing)
    for k, lay in enumerate(layers, start=1):
        lay.lateral_change = k in lateral
    result = LayeredResult(layers=layers, sides=fits, layer_of_branch=matched.layer_of_branch,
                           shot_depths=shot_depths, dips=found.dips, warnings=warnings,
                           messages=side_notes.messages, options=options)
    if delay_times and matched.n_layers > 1:
        add_delay_times(result, picks, lateral, found.intercept_override, thickness_notes, terrain, grm, grm_xy_m)
    else:
        result.warnings.extend(thickness_notes)
    return result
