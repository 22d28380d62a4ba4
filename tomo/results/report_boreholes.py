"""The report's account of boreholes used by the interpretations: the layered
refractor's ties (:mod:`tomo.layered.ties`) and the inversion's constraints
(:mod:`tomo.analysis.borehole_fit`), each borehole flagged where it asks for a check."""

from __future__ import annotations

import numpy as np

from ..analysis.borehole_fit import CHECK_MESSAGE, REACH_SIGMAS, RESIST_CHI2
from ..layered.result import layered_result
from .report_html import Raw, esc, table

__all__ = ["used_text", "borehole_use_html"]


def used_text(run):
    """One sentence: which interpretation was made to honour the boreholes."""
    layered = layered_result(run.layered)
    tomogram = ("The tomogram was made to pass through them (below)" if run.borehole_fit is not None
                else "The tomogram was not made to pass through them")
    tied = layered is not None and layered.ties
    return tomogram + ("; the layered refractor is tied to them." if tied else "; the layered refractor is not tied "
                       "to them.")


def borehole_use_html(run):
    """The ties and the constraints as paragraphs and tables ('' where neither was made)."""
    return _layered_ties_html(layered_result(run.layered)) + _borehole_fit_html(run.borehole_fit)


def _flags(reasons):
    if not reasons:
        return "honoured"
    return Raw(f'<span class="flag">{esc(CHECK_MESSAGE)}</span>: ' + esc("; ".join(reasons)))


def _depth(value, error):
    return "-" if not np.isfinite(value) else f"{value:.1f} ({error:+.1f})"


def _layered_ties_html(layered):
    if layered is None or not layered.ties:
        return ""
    parts = []
    for tie in layered.ties:
        rows = [(b.label, f"{b.x:.1f}", f"{b.depth_m:.1f} ± {b.sigma_m:.1f}",
                 "-" if not b.tied else f"{b.depth_before_m:.1f}", "-" if not b.tied else f"{b.depth_velocity_m:.1f}",
                 "-" if not np.isfinite(b.own_velocity_m_s) else f"{b.own_velocity_m_s:.0f}",
                 "yes" if b.used else "no",
                 _flags([b.note or "beyond two sigmas of the calibrated velocity"] if b.flagged
                        else ([b.note] if b.note and not b.used else [])))
                for b in tie.boreholes]
        parts.append(
            f"<p>Layered refractor {tie.refractor} tied to the boreholes: the velocity of layer {tie.refractor} "
            f"calibrated from {tie.velocity_before_m_s:.0f} to {tie.velocity_after_m_s:.0f} m/s "
            f"({tie.velocity_change_pct:+.1f} %, {tie.basis()}), then the mis-tie left at each borehole spread to "
            "its neighbours, so the refractor passes through every borehole it reaches. A borehole the velocity "
            "leaves beyond two sigmas is flagged: the delay times do not explain it (relief they cannot "
            "resolve, a hidden layer, a velocity inversion, or a wrong log).</p>"
            + table(["borehole", "x (m)", "logged (m)", "before (m)", "velocity only (m)", "own velocity (m/s)",
                     "in the velocity", "check"], rows, numeric=(1, 2, 3, 4, 5)))
    return "\n".join(parts)


def _borehole_fit_html(fit):
    if fit is None:
        return ""
    rows = [(t.label, f"{t.x:.1f}", f"{t.depth_m:.1f} ± {t.sigma_m:.1f}", f"{t.contour_m_s:.0f}",
             _depth(t.depth_before_m, t.error_before_m), _depth(t.depth_after_m, t.error_after_m),
             f"{t.picks_near}: {t.chi2_near_before:.2f} → {t.chi2_near_after:.2f}", _flags(t.reasons))
            for t in fit.ties]
    return (f"<p>The inversion was made twice: without the boreholes (chi-squared of the picks "
            f"{fit.chi2_before:.3f}) and with them as constraints on the contour (chi-squared {fit.chi2_after:.3f}; "
            "the constraints are not counted in it). A borehole the picks resist is flagged: the contour stays "
            f"more than {REACH_SIGMAS:g} sigma from it, or the picks whose shot and geophone lie on either side of "
            f"it fit worse (their sum of squared residuals over sigma squared rises by more than {RESIST_CHI2:g}, "
            "the 99 % point of chi-squared for one more constraint), or the picks as a whole fit worse. The "
            "picks cannot object to what they cannot see: first arrivals go round a narrow pocket, so a borehole "
            "met by a narrow pit in the contour is confirmed by the borehole alone.</p>"
            + table(["borehole", "x (m)", "logged (m)", "contour (m/s)", "without (m)", "with (m)",
                     "picks under it: chi2 without → with", "check"], rows, numeric=(1, 2, 3, 4, 5)))
