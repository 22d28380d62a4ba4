"""Boreholes drawn on a section: the column from the ground to the logged interface,
the interface with its uncertainty, and the label."""

from __future__ import annotations

import numpy as np
from matplotlib import patheffects

from ..analysis.boreholes import borehole_elevations
from . import style

__all__ = ["draw_boreholes", "BOREHOLE_COLOR"]

#: The logged interface: bluish green, apart from the vermillion shots and the
#: reddish-purple depth of investigation.
BOREHOLE_COLOR = style.BOREHOLE_COLOR

_HALO = [patheffects.withStroke(linewidth=3.0, foreground="white")]


def draw_boreholes(ax, run, height_m):
    """Draw the run's boreholes on a section axis (nothing when it has none).

    ``height_m`` is the shown elevation range, for sizing the labels' offset.
    """
    ground, interface = borehole_elevations(run)
    if ground.size == 0:
        return
    b = run.boreholes
    for x, top, bottom in zip(b.x, ground, interface):
        ax.plot([x, x], [top, bottom], "-", color=style.BLACK, lw=1.6, zorder=8, path_effects=_HALO)
    ax.errorbar(b.x, interface, yerr=b.sigma_m, fmt=style.BOREHOLE_MARKER, ms=4.5, color=BOREHOLE_COLOR,
                mec=style.BLACK, mew=0.6, ecolor=style.BLACK, elinewidth=1.0, capsize=3, zorder=9,
                label="boreholes: logged interface (bar: 1 sigma)")
    for x, top, label in zip(b.x, ground, b.label):
        ax.annotate(label, (x, top + 0.06 * height_m), ha="center", va="bottom", fontsize=7, zorder=9,
                    path_effects=_HALO, annotation_clip=False)


def lowest_borehole(run):
    """Lowest logged interface minus its uncertainty (m), or NaN without boreholes."""
    _, interface = borehole_elevations(run)
    if interface.size == 0:
        return float("nan")
    return float(np.min(interface - run.boreholes.sigma_m))
