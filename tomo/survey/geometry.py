"""Facts about a line's geometry that several stages need, computed in one place."""

from __future__ import annotations

import numpy as np

__all__ = ["station_spacing"]


def station_spacing(picks):
    """Median geophone spacing (m); from shots and geophones together when there are
    fewer than three geophones (a line recorded the other way round)."""
    xs = np.unique(np.round(picks.receiver_x, 4))
    if xs.size < 3:
        xs = np.unique(np.round(np.concatenate([picks.source_x, picks.receiver_x]), 4))
    spacing = float(np.median(np.diff(xs))) if xs.size > 1 else 1.0
    return spacing if spacing > 0 else 1.0
