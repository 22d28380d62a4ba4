"""The depth band of an iso-velocity surface: the range the picks allow at every column.

For each kept member the surface is read as for a single run
(:func:`tomo.analysis.surface.contour_surface`); the band is the 5th to 95th percentile
of the members' depths per column and its middle line their median. Where extremal
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

from ..analysis.surface import contour_surface

__all__ = ["SurfaceBand", "surface_band", "BOUND_REACH_CELLS"]

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
    bounded_by : ndarray of object
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
    bounded_by: np.ndarray
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
    depths = np.array([contour_surface(replace(run, velocity=v, ensemble=None), velocity_m_s).depth_m
                       for v in kept])
    # a member whose column never reaches the velocity puts the surface below the grid:
    # count it at the grid's bottom, so the deep edge is not understated
    counted = np.where(np.isfinite(depths), depths, _bottom_depth(run)[None, :])
    low, mid, high = np.percentile(counted, [percentiles[0], 50.0, percentiles[1]], axis=0)
    none = ~np.any(np.isfinite(depths), axis=0)
    low, mid, high = (np.where(none, np.nan, a) for a in (low, mid, high))
    bounded_by = np.full(mid.size, "members", dtype=object)
    low, high = _widen(run, velocity_m_s, central.x, low, high, bounded_by)
    return SurfaceBand(float(central.velocity_m_s), central.x, central.ground_z, mid, low, high,
                       central.ground_z - mid, central.constrained, bounded_by, int(kept.shape[0]), depths)


def _widen(run, velocity_m_s, x, low, high, bounded_by):
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
                bounded_by[k] = "members + extremal bound"
            low[k], high[k] = min(low[k], shallow), max(high[k], deep)
    return low, high
