"""The hatching of what a run's resolution test did not resolve, drawn on every section
figure (:func:`tomo.figures.section.draw_base`)."""

from __future__ import annotations

import numpy as np
from matplotlib.patches import Patch

from ..analysis.coverage import covered
from . import style

__all__ = ["draw_unresolved", "unresolved_legend", "HATCH"]

#: Stipple of the cells a resolution test did not resolve: dots, since diagonal hatching
#: marks an ensemble's depth band (:mod:`tomo.figures.bands`) on the same sections.
HATCH = ".."


def _unresolved_cells(run):
    record = getattr(run, "resolution", None)
    if record is None or np.shape(record.semblance) != np.shape(run.velocity):
        return None
    return record.unresolved & covered(run)


def draw_unresolved(ax, run, clip):
    """Hatch the covered cells where the run's resolution test scored below its
    threshold (nothing for a run without a test). Returns the legend handle or None."""
    cells = _unresolved_cells(run)
    if cells is None or not cells.any():
        return None
    # a filled contour of the 0/1 mask at the cell edges' resolution: hatches only
    hatched = ax.contourf(run.x, run.z, cells.astype(float), levels=[0.5, 1.5], colors="none", hatches=[HATCH],
                          zorder=2)
    hatched.set_edgecolor(style.GREY)
    hatched.set_linewidth(0.0)
    hatched.set_clip_path(clip)
    # an empty shape carries the hatch into the axis's legend
    proxy = unresolved_legend(run)
    ax.fill_between([], [], [], facecolor="none", edgecolor=style.GREY, hatch=HATCH, lw=0.0, label=proxy.get_label())
    return proxy


def unresolved_legend(run):
    """The legend entry of the hatching: what test, what threshold."""
    record = run.resolution
    return Patch(facecolor="none", edgecolor=style.GREY, hatch=HATCH,
                 label=f"not resolved ({record.label()}: semblance < {record.threshold:g})")
