"""Depth below ground of the deepest refractor along the line: the tomogram's contour with
its range, the delay-time refractor with its sigma and the boreholes, on one axis
whose numbers a client can read off directly (depth, not elevation)."""

from __future__ import annotations

import numpy as np

from ..analysis.boreholes import borehole_elevations
from ..analysis.surface import contour_surface, refractor_contour
from ..layered.result import layered_result
from . import style
from .boreholes import BOREHOLE_COLOR
from .section import station_axis

__all__ = ["depth_figure"]

#: How the legend names each kind of range (:class:`tomo.analysis.depth_range.DepthRange`).
_RANGE_NAMES = {"ensemble": "ensemble, 5-95 %", "two-runs": "two starting models",
                "delay-time-sigma": "delay-time 1 sigma"}
_CONTOUR = style.PALETTE[0]
_LAYERED = style.PALETTE[1]


def depth_figure(run, depth_range=None, contour_m_s=None):
    """Depth (m below ground) of the ``contour_m_s`` surface (default: the layered
    result's deepest refractor contour) along the line, with ``depth_range`` (a
    :class:`tomo.analysis.depth_range.DepthRange`) shaded, the deepest delay-time
    refractor +- 1 sigma and the boreholes. None when there is no velocity to contour."""
    layered = layered_result(run.layered)
    value = contour_m_s if contour_m_s is not None else (refractor_contour(run.layered) if run.layered else None)
    if value is None:
        return None
    surface = contour_surface(run, float(value))
    rx = np.asarray(run.picks["receiver_x"], float)
    spread = (surface.x >= rx.min()) & (surface.x <= rx.max())
    fig = style.new_figure(height_in=3.6)
    ax = fig.add_subplot(1, 1, 1)
    x, d = surface.x, np.where(spread, surface.depth_m, np.nan)
    if depth_range is not None:
        lo, hi = depth_range.at(x)
        ax.fill_between(x, lo, hi, color=_CONTOUR, alpha=0.25, lw=0, zorder=1,
                        label=f"range of the tomogram depth ({_RANGE_NAMES.get(depth_range.kind, depth_range.kind)})")
    ax.plot(x, np.where(surface.constrained, d, np.nan), "-", color=_CONTOUR, lw=1.8, zorder=3,
            label=f"tomogram: {value:.0f} m/s contour")
    below = np.where(surface.constrained, np.nan, d)
    # in the legend only when some of it is drawn: a legend says what the figure shows
    ax.plot(x, below, ":", color=_CONTOUR, lw=1.2, zorder=3,
            label="dotted: below the depth of investigation" if np.isfinite(below).any() else None)
    if layered is not None and layered.refractors:
        line = layered.refractor(layered.refractors[-1])
        ax.errorbar(line.x, line.depth_m, yerr=np.nan_to_num(line.uncertainty_m), fmt="o", ms=2.5, color=_LAYERED,
                    ecolor=_LAYERED, elinewidth=0.7, capsize=0, zorder=4,
                    label=f"delay-time refractor {line.refractor} (bar: 1 sigma)")
    ground, interface = borehole_elevations(run)
    if ground.size:
        b = run.boreholes
        ax.errorbar(b.x, ground - interface, yerr=b.sigma_m, fmt=style.BOREHOLE_MARKER, ms=4.5, color=BOREHOLE_COLOR,
                    mec=style.BLACK, mew=0.6, ecolor=style.BLACK, elinewidth=1.0, capsize=3, zorder=5,
                    label="boreholes: logged depth (bar: 1 sigma)")
    ax.set_xlim(surface.x[spread].min() - 1.0, surface.x[spread].max() + 1.0)
    bottom = np.nanmax([np.nanmax(d), np.nanmax(ground - interface) if ground.size else 0.0])
    ax.set_ylim(1.15 * bottom + 0.5, 0.0)
    ax.set_xlabel("Distance along line (m)")
    ax.set_ylabel("Depth below ground (m)")
    station_axis(ax, run)
    ax.set_title(f"Depth to the {value:.0f} m/s surface below the ground", pad=30)
    handles, labels = ax.get_legend_handles_labels()
    ax.legend(handles, labels, loc="upper center", bbox_to_anchor=(0.5, -0.2), ncol=2, frameon=False)
    return fig

