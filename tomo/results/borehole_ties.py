"""Each borehole beside both interpretations: the logged depth, the tomogram's
iso-velocity surface and the layered delay-time refractor at the borehole.

Which interface a borehole logged decides what it is compared with: interface k (the
top of layer k + 1) against refractor k of the layered result and, in the tomogram,
against the contour at the mean of the layer velocities above and below it (common
practice; :func:`tomo.analysis.surface.refractor_contour`). The default is the top of the
fastest layer. A chosen contour velocity replaces those contours for every borehole.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..analysis.coverage import ground_elevation
from ..analysis.surface import contour_surface, layer_velocities, refractor_contour
from ..figures.compare import refractor_profiles
from ..survey.boreholes import DEEPEST

__all__ = ["BoreholeTie", "borehole_ties"]


@dataclass(frozen=True)
class BoreholeTie:
    """One borehole against the two interpretations (lengths m, velocities m/s).

    ``tomogram_depth_m`` and ``layered_depth_m`` are NaN where that interpretation gives
    no depth at the borehole; ``constrained`` says whether the tomogram's surface lies
    above the depth of investigation there.
    """

    label: str
    x: float
    offset_m: float
    ground_z: float
    depth_m: float
    sigma_m: float
    interface: int
    contour_m_s: float
    tomogram_depth_m: float
    constrained: bool
    layered_depth_m: float

    @property
    def tomogram_error_m(self):
        """Tomogram depth minus logged depth (positive: the tomogram is deeper)."""
        return self.tomogram_depth_m - self.depth_m

    @property
    def layered_error_m(self):
        """Layered refractor depth minus logged depth (positive: deeper)."""
        return self.layered_depth_m - self.depth_m


def _refractor_number(layered, interface):
    n = len(layer_velocities(layered)) - 1
    return n if interface == DEEPEST else int(interface)


def _at(x, xs, values):
    """``values`` at ``x`` linear between ``xs`` (NaN outside them or without data)."""
    good = np.isfinite(values)
    if good.sum() < 2 or not (xs[good][0] <= x <= xs[good][-1]):
        return float("nan")
    return float(np.interp(x, xs[good], values[good]))


def borehole_ties(run, contour_m_s=None):
    """A :class:`BoreholeTie` per borehole of the run ([] without boreholes)."""
    b = run.boreholes
    if b is None or not len(b):
        return []
    layered = run.layered or {}
    profiles = refractor_profiles(layered) if layered else {}
    v = np.asarray(run.velocity, float)
    lo, hi = float(np.nanmin(v)), float(np.nanmax(v))
    surfaces = {}
    ties = []
    for k in range(len(b)):
        x = float(b.x[k])
        refractor = _refractor_number(layered, int(b.interface[k])) if layered else None
        value = contour_m_s if contour_m_s is not None else (
            refractor_contour(layered, refractor) if refractor else None)
        depth, constrained = float("nan"), False
        if value is not None and lo < value < hi:
            surface = surfaces.setdefault(value, contour_surface(run, value))
            depth = _at(x, surface["x"], surface["depth_m"])
            constrained = bool(np.interp(x, surface["x"], surface["constrained"].astype(float)) > 0.5)
        prof = profiles.get(refractor) if refractor else None
        layered_depth = _at(x, prof["x"], prof["depth_m"]) if prof is not None else float("nan")
        ties.append(BoreholeTie(
            label=b.label[k], x=x, offset_m=float(b.offset_m[k]), ground_z=float(ground_elevation(run, x)),
            depth_m=float(b.depth_m[k]), sigma_m=float(b.sigma_m[k]), interface=int(b.interface[k]),
            contour_m_s=float("nan") if value is None else float(value), tomogram_depth_m=depth,
            constrained=constrained, layered_depth_m=layered_depth))
    return ties
