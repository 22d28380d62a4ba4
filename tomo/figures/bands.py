"""The depth band of an ensemble's rock surface, drawn on every section figure."""

from __future__ import annotations

import numpy as np

from ..core.errors import InputError
from ..uncertainty.bands import default_band_contour, surface_band
from . import style

__all__ = ["draw_band", "BAND_COLOR"]

#: The band's colour: the palette's sky blue, which no other section element uses and
#: which stands apart from cividis's yellows and mid-greys.
BAND_COLOR = style.PALETTE[4]


def draw_band(ax, run, velocity_m_s=None):
    """Shade the 5-95 % band of the ``velocity_m_s`` surface (default: the layered
    refractor's contour) where it lies above the depth of investigation, with its median
    line; nothing for a run that is not an ensemble's. Returns the band or None."""
    if getattr(run, "ensemble", None) is None:
        return None
    value = default_band_contour(run) if velocity_m_s is None else float(velocity_m_s)
    try:
        band = surface_band(run, value)
    except InputError:
        return None  # the model never reaches that velocity: no surface, no band to draw
    ok = band.constrained & np.isfinite(band.depth_low_m) & np.isfinite(band.depth_high_m)
    top, bottom = band.ground_z - band.depth_low_m, band.ground_z - band.depth_high_m
    ax.fill_between(band.x, np.where(ok, bottom, np.nan), np.where(ok, top, np.nan), color=BAND_COLOR, alpha=0.35,
                    lw=0, zorder=4, label=f"{value:.0f} m/s surface, 5-95 % of {band.n_members} members")
    ax.plot(band.x, np.where(ok, band.elevation_m, np.nan), "-", color=BAND_COLOR, lw=1.4, zorder=4,
            label="its median")
    return band
