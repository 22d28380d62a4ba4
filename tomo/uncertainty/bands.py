"""The depth band of an iso-velocity surface: the range the picks allow at every column.

For each kept member the surface is read as for a single run
(:func:`tomo.analysis.surface.contour_surface`); the band is the 5th to 95th percentile
of the members' depths per column and its middle line their median.

Which iso-velocity marks an interface is itself open: a smooth tomogram spreads a sharp
step over a transition some metres thick, and the picks fix the delay times through it,
not the velocity at which the step sat (the usual calibration against boreholes picks
it; Lanz, Maurer & Green 1998, Geophysics 63, from memory). Each member therefore reads
its surface at its own velocity, spread evenly (a golden-ratio sequence over the member
numbers) in log-velocity across the middle third of the step between the layer
velocities above and below the requested one (``contour_spread``): the band holds the
choice of contour as well as the members' differences. Without a layered result to take
the layer velocities from, the spread is +-15 % about the requested velocity (our
choice: about the middle third of a step of 1:2.5). Where extremal
bounds were computed (``tomo.uncertainty.bounds``) they widen the band at their
columns, and from there, tapered linearly to nothing over ``BOUND_REACH_CELLS`` cells,
the neighbouring columns, since a bound says how far the surface can move there, not
at one column alone.

The band is conditional on the method: members share the smoothing of the objective,
the 2-D section, the ray theory and the assumption that the picks are first arrivals
with the stated sigmas. A band cannot show a feature no member can represent.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from ..analysis.surface import contour_surface, layer_velocities, refractor_contour
from ..core.errors import InputError

__all__ = ["SurfaceBand", "surface_band", "contour_spread", "member_contours", "default_band_contour",
           "BOUND_REACH_CELLS"]

#: Columns either side of a bound's column that its widening reaches (tapered).
BOUND_REACH_CELLS = 3


@dataclass(frozen=True)
class SurfaceBand:
    """A surface with its band, one value per model column (depths below ground, m).

    Attributes
    ----------
    velocity_m_s : float
    x, ground_z : ndarray
        Cell-centre distance and ground elevation, m.
    depth_m : ndarray
        Median of the members' depths.
    depth_low_m, depth_high_m : ndarray
        Shallowest and deepest edge of the band (5th and 95th percentiles of the members,
        widened by extremal bounds where there are any).
    elevation_m : ndarray
        Elevation of the median surface, m.
    constrained : ndarray of bool
        The central run's surface lies above its depth of investigation.
    band_from : ndarray of object
        Per column, which method set the band's edges: "members", or "members +
        extremal bound" where a bound widened it.
    n_members : int
        Members the band rests on.
    member_depths : ndarray (n_members, nx)
        Every kept member's depth (NaN where its column never reaches the velocity).
    """

    velocity_m_s: float
    x: np.ndarray
    ground_z: np.ndarray
    depth_m: np.ndarray
    depth_low_m: np.ndarray
    depth_high_m: np.ndarray
    elevation_m: np.ndarray
    constrained: np.ndarray
    band_from: np.ndarray
    n_members: int
    member_depths: np.ndarray

    @property
    def width_m(self):
        """Band width per column, m."""
        return self.depth_high_m - self.depth_low_m

    def __getitem__(self, name):
        return getattr(self, name)


def _bottom_depth(run):
    """Depth of the grid's bottom below the ground at every column, m."""
    z = np.asarray(run.z, float)
    cell = abs(z[0] - z[1]) if z.size > 1 else 1.0
    ground = np.interp(np.asarray(run.x, float), run.terrain_x, run.terrain_z)
    return ground - (z[-1] - cell / 2)


def surface_band(run, velocity_m_s, percentiles=(5.0, 95.0)):
    """The band of the ``velocity_m_s`` surface of an ensemble (module docstring).

    Parameters
    ----------
    run : RunData
        The central run, with ``run.ensemble`` (an ``EnsembleRecord``).
    velocity_m_s : float
    percentiles : (float, float)

    Returns
    -------
    SurfaceBand
    """
    record = run.ensemble
    central = contour_surface(run, velocity_m_s)
    kept = record.velocity[record.kept]
    lo_v, hi_v = contour_spread(run, central.velocity_m_s)
    values = member_contours(record.index[record.kept], lo_v, hi_v)
    depths = np.array([_member_depths(run, v, c) for v, c in zip(kept, values)])
    # a member whose column never reaches the velocity puts the surface below the grid:
    # count it at the grid's bottom, so the deep edge is not understated
    counted = np.where(np.isfinite(depths), depths, _bottom_depth(run)[None, :])
    low, mid, high = np.percentile(counted, [percentiles[0], 50.0, percentiles[1]], axis=0)
    none = ~np.any(np.isfinite(depths), axis=0)
    low, mid, high = (np.where(none, np.nan, a) for a in (low, mid, high))
    band_from = np.full(mid.size, "members", dtype=object)
    low, high = _widen(run, velocity_m_s, central.x, low, high, band_from)
    return SurfaceBand(float(central.velocity_m_s), central.x, central.ground_z, mid, low, high,
                       central.ground_z - mid, central.constrained, band_from, int(kept.shape[0]), depths)


def _member_depths(run, velocity, value):
    """One member's ``value`` surface, depth per column (m); all NaN for a member whose
    whole model misses the velocity (a line that sees no refractor can give a uniform
    member)."""
    try:
        return contour_surface(replace(run, velocity=velocity, ensemble=None), value).depth_m
    except InputError:
        return np.full(np.asarray(run.x).size, np.nan)


def contour_spread(run, velocity_m_s):
    """The velocities (m/s) between which members read the ``velocity_m_s`` surface: the
    middle third, in log-velocity, of the step between the layer velocities that
    bracket it; +-15 % without a layered result (module docstring)."""
    v = layer_velocities(run.layered) if run.layered else []
    below = [a for a in v if a < velocity_m_s]
    above = [a for a in v if a > velocity_m_s]
    if below and above:
        step = np.log(min(above)) - np.log(max(below))
        return float(velocity_m_s * np.exp(-step / 6.0)), float(velocity_m_s * np.exp(step / 6.0))
    return float(velocity_m_s / 1.15), float(velocity_m_s * 1.15)


def member_contours(index, lo_v, hi_v):
    """Each member's contour velocity (m/s): log-evenly spread between ``lo_v`` and
    ``hi_v`` by the golden-ratio sequence of its number, the central member (0) in the
    middle."""
    u = np.mod(0.5 + np.asarray(index, float) * 0.6180339887498949, 1.0)
    return np.exp(np.log(lo_v) + u * (np.log(hi_v) - np.log(lo_v)))


def _widen(run, velocity_m_s, x, low, high, band_from):
    """Widen the band with the record's extremal bounds for this velocity."""
    low, high = low.copy(), high.copy()
    for b in run.ensemble.bounds:
        if abs(float(b["velocity_m_s"]) - velocity_m_s) > 1e-6 * velocity_m_s:
            continue
        j = int(np.argmin(np.abs(x - float(b["x"]))))
        up, down = max(low[j] - float(b["shallow_m"]), 0.0), max(float(b["deep_m"]) - high[j], 0.0)
        for k in range(max(0, j - BOUND_REACH_CELLS), min(x.size, j + BOUND_REACH_CELLS + 1)):
            w = 1.0 - abs(k - j) / (BOUND_REACH_CELLS + 1)
            shallow, deep = low[k] - w * up, high[k] + w * down
            if shallow < low[k] or deep > high[k]:
                band_from[k] = "members + extremal bound"
            low[k], high[k] = min(low[k], shallow), max(high[k], deep)
    return low, high


def default_band_contour(run):
    """The velocity (m/s) whose band is summarised by default: the layered result's
    deepest refractor contour, else the geometric mean of the model's 5th and 95th
    percentile velocities (the middle of the section's range in log-velocity)."""
    value = refractor_contour(run.layered) if run.layered else None
    if value is None:
        v = np.asarray(run.velocity, float)
        lo, hi = np.nanpercentile(v, [5.0, 95.0])
        value = float(np.sqrt(lo * hi))
    return float(value)
