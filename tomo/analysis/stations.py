"""Station numbers of a run's line: geophones counted from 1 at the smallest x.

Sections, depth plots and the report's depth table carry these numbers, so that a
depth read in the office can be found with the tape on site (common practice: the
field sheets number geophone stations along the spread).
"""

from __future__ import annotations

import numpy as np

__all__ = ["geophone_stations", "every_nth"]


def geophone_stations(run):
    """Geophone positions of a run, sorted (m), and their numbers (1, 2, ...)."""
    x = np.unique(np.round(np.asarray(run.picks["receiver_x"], float), 4))
    return x, np.arange(1, x.size + 1)


def every_nth(x, target_m):
    """The step n (>= 1) such that every n-th station is about ``target_m`` apart."""
    if x.size < 2:
        return 1
    spacing = float(np.median(np.diff(x)))
    return max(1, int(round(target_m / spacing))) if spacing > 0 else 1
