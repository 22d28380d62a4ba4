"""The ray-path figure: every pick's ray through the final model over the terrain.

Where rays run, the picks constrain the model; where they crowd along one path (the
top of a fast layer), the section below that path is seen by no ray. The figure shows
what the coverage section sums up cell by cell.
"""

from __future__ import annotations

import numpy as np
from matplotlib.collections import LineCollection
from matplotlib.lines import Line2D

from ..analysis.raypaths import ray_paths
from . import style
from .section import _legend, draw_base, station_axis

__all__ = ["ray_figure", "RAY_COLOR"]

#: Rays in the palette's blue, thin and translucent so that crowding shows as density.
RAY_COLOR = style.PALETTE[0]


def ray_figure(run, paths=None, vertical_exaggeration=None, title="Ray paths in the final model"):
    """Rays of every pick (:func:`tomo.analysis.raypaths.ray_paths`, traced when
    ``paths`` is not given) over the terrain, with shots, geophones, the depth of
    investigation and the geophone numbers on top."""
    paths = ray_paths(run) if paths is None else paths
    fig = style.new_figure(height_in=4.4)
    ax = fig.add_subplot(1, 1, 1)
    clip, ve = draw_base(ax, run, vertical_exaggeration)
    rays = LineCollection([np.asarray(p, float) for p in paths.paths if len(p) > 1], colors=RAY_COLOR,
                          linewidths=0.35, alpha=0.35, zorder=2)
    rays.set_clip_path(clip)
    ax.add_collection(rays)
    station_axis(ax, run)
    ax.set_title(f"{title} (vertical exaggeration {ve:g}:1)")
    _legend(ax, extra=[Line2D([], [], color=RAY_COLOR, lw=1.0, label=f"ray paths ({len(paths.paths)} picks)")],
            blank_label="ground")
    return fig
