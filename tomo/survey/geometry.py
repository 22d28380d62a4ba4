"""Facts about a line's geometry that several stages need, computed in one place."""

from __future__ import annotations

import numpy as np

__all__ = ["station_positions", "station_spacing"]


def station_positions(picks, receivers_only=False):
    """Distinct geophone positions along the line (m, rounded to 0.1 mm, sorted).

    With fewer than three geophones (a line recorded the other way round, shots moving
    past a few geophones) the shots are counted too, unless ``receivers_only``.
    """
    xs = np.unique(np.round(picks.receiver_x, 4))
    if xs.size < 3 and not receivers_only:
        xs = np.unique(np.round(np.concatenate([picks.source_x, picks.receiver_x]), 4))
    return xs


def station_spacing(picks, receivers_only=False, default=1.0):
    """Median spacing (m) of :func:`station_positions`; ``default`` when there are fewer
    than two positions or the median gap is not positive.

    The one station spacing of the project: mesh cells, the layered stage's hidden-layer
    rule and delay-time pairs, and pick QC (``receivers_only=True``: the geophone spacing
    as the QC reports it, NaN ``default`` when undefined) all use it.
    """
    xs = station_positions(picks, receivers_only)
    spacing = float(np.median(np.diff(xs))) if xs.size > 1 else default
    return spacing if spacing > 0 else default
