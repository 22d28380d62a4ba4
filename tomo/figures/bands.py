"""The depth band of an ensemble's rock surface, drawn on every section figure."""

from __future__ import annotations

import numpy as np
from matplotlib import patheffects

from ..analysis.coverage import investigation_elevation
from ..core.errors import InputError
from ..uncertainty.bands import default_band_contour, surface_band
from . import style

__all__ = ["draw_band", "BAND_COLOR"]

#: The band is hatched in black, not coloured: every colour of the palette already means
#: something on some section (refractors, boreholes, shots, the depth of investigation),
#: and hatching reads on any velocity beneath it.
BAND_COLOR = style.BLACK


def draw_band(ax, run, velocity_m_s=None):
    """Shade the 5-95 % band of the ``velocity_m_s`` surface (default: the layered
    refractor's contour) where it lies above the depth of investigation (cut there), with
    its median line; nothing for a run that is not an ensemble's. Returns the band or None."""
    if getattr(run, "ensemble", None) is None:
        return None
    value = default_band_contour(run) if velocity_m_s is None else float(velocity_m_s)
    try:
        band = surface_band(run, value)
    except InputError:
        return None  # the model never reaches that velocity: no surface, no band to draw
    ok = band.constrained & np.isfinite(band.depth_low_m) & np.isfinite(band.depth_high_m)
    top, bottom = band.ground_z - band.depth_low_m, band.ground_z - band.depth_high_m
    # below the depth of investigation the picks say little: the band stops there
    bottom = np.maximum(bottom, investigation_elevation(run))
    ok &= bottom < top
    ax.fill_between(band.x, np.where(ok, bottom, np.nan), np.where(ok, top, np.nan), facecolor="none",
                    edgecolor=BAND_COLOR, hatch="////", lw=0.0, alpha=0.55, zorder=4,
                    label=f"{value:.0f} m/s surface, 5-95 % of {band.n_members} members")
    ax.plot(band.x, np.where(ok, band.elevation_m, np.nan), "-", color=BAND_COLOR, lw=1.1, zorder=4,
            path_effects=[patheffects.withStroke(linewidth=2.6, foreground="white")], label="median of the members")
    return band
