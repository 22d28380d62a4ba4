"""Defaults that more than one stage uses, each defined once with the reason for its value."""

from __future__ import annotations

__all__ = ["DEFAULT_SIGMA_MS"]

#: Pick uncertainty (one standard deviation, ms) wherever a pick file gives none: for
#: the pick QC, the branch fits and their model choice, the layered start and the
#: inversion's chi-squared alike. Pick errors of 0.5-2 ms are usual on hammer and
#: weight-drop lines (common practice); 1 ms sits inside that range and keeps an
#: unknown noise level from being fitted as if it were structure (an assumed sigma
#: too small makes chi-squared demand more structure than the picks hold).
DEFAULT_SIGMA_MS = 1.0
