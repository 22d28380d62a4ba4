"""The surfaces a run exports to drawings and maps: the tomogram's iso-velocity
surfaces and the layered delay-time refractors with their uncertainty band.

A tomogram's bedrock surface is an iso-velocity contour (:mod:`tomo.analysis.surface`);
without a chosen velocity it is the contour at the mean of the layer velocities above
and below the deepest refractor of the layered result (common practice). The layered
refractor is the delay-time depth under each geophone with its one-sigma band
(:func:`tomo.figures.compare.refractor_profiles`).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..analysis.surface import check_contour, contour_surface, refractor_contour
from ..core.errors import InputError
from ..figures.compare import refractor_profiles
from ..uncertainty.bands import surface_band

__all__ = ["SectionSurface", "export_contours", "section_surfaces"]


@dataclass(frozen=True)
class SectionSurface:
    """One surface along the line (lengths m).

    Attributes
    ----------
    key : str
        Short name for layers and identifiers, e.g. ``contour-2100`` or ``refractor-1``.
    title : str
        What it is, in words.
    velocity_m_s : float or None
        The contour's velocity; None for a layered refractor.
    x, ground_z, depth_m, elevation_m : ndarray
        Distance along the line, ground, depth below it and elevation; NaN where the
        surface is not reached.
    constrained : ndarray of bool
        Above the depth of investigation (always True for a delay-time refractor, whose
        points each come from picks).
    low_elevation_m, high_elevation_m : ndarray or None
        The band around the surface (a delay-time refractor's one sigma, an ensemble's
        5-95 % range), or None.
    band_from : ndarray of str or None
        Per column, which method set the band (an ensemble's ``members`` or ``members +
        extremal bound``), or None.
    """

    key: str
    title: str
    velocity_m_s: float | None
    x: np.ndarray
    ground_z: np.ndarray
    depth_m: np.ndarray
    elevation_m: np.ndarray
    constrained: np.ndarray
    low_elevation_m: np.ndarray | None = None
    high_elevation_m: np.ndarray | None = None
    band_from: np.ndarray | None = None

    @property
    def has_band(self):
        return self.low_elevation_m is not None and bool(np.any(np.isfinite(self.low_elevation_m)))


def export_contours(run, contours_m_s=None, needed_for="this export"):
    """The contour velocities (m/s) to export: those given, each checked against the
    model's range, or the layered refractor's contour; InputError when there is none."""
    if contours_m_s:
        return [check_contour(run, v) for v in contours_m_s]
    default = refractor_contour(run.layered) if run.layered else None
    if default is None:
        raise InputError(f"{needed_for} needs a surface: give --contour V (the run holds no layered result "
                         "to choose one from)", field="--contour")
    return [check_contour(run, default)]


def section_surfaces(run, contours_m_s):
    """The tomogram's ``contours_m_s`` surfaces, then every layered delay-time refractor."""
    out = []
    for value in contours_m_s:
        if run.ensemble is not None:
            # an ensemble's surface: the members' median with their 5-95 % band
            b = surface_band(run, value)
            out.append(SectionSurface(f"contour-{value:.0f}", f"{value:.0f} m/s iso-velocity surface, median of "
                                      f"{b.n_members} members with their 5-95 % band", float(value), b.x, b.ground_z,
                                      b.depth_m, b.elevation_m, b.constrained, b.ground_z - b.depth_high_m,
                                      b.ground_z - b.depth_low_m, b.band_from))
            continue
        s = contour_surface(run, value)
        out.append(SectionSurface(f"contour-{value:.0f}", f"{value:.0f} m/s iso-velocity surface of the tomogram",
                                  float(value), s["x"], s["ground_z"], s["depth_m"], s["elevation_m"],
                                  s["constrained"]))
    if run.layered:
        sigma_t = run.picks["sigma_ms"]
        sigma_t = float(np.nanmedian(sigma_t)) if np.any(np.isfinite(sigma_t)) else None
        for k, prof in sorted(refractor_profiles(run.layered, sigma_t).items()):
            sig = np.asarray(prof["sigma_m"], float)
            band = np.any(np.isfinite(sig))
            z = np.asarray(prof["elevation_m"], float)
            out.append(SectionSurface(f"refractor-{k}", f"refractor {k} of the layered interpretation (delay times)",
                                      None, prof["x"], prof["surface_z"], prof["depth_m"], z,
                                      np.ones(z.size, bool), z - sig if band else None, z + sig if band else None))
    return out
