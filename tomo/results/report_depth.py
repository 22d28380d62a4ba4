"""The report's depth table: depth below ground of the deepest refractor at stations along
the line, with its range and where that range comes from.

One row every few geophones (about 10 m apart): station number, position, ground,
the tomogram's depth to the iso-velocity surface with its range, the surface's
elevation, the delay-time refractor depth +- one sigma, and whether the rays constrain
the surface there. The range comes from whichever source is given, in this order: an
given range (``depth_range``), the band of the run's ensemble (5-95 % of its members),
the second run of the same picks, none; the sentence above the table says which.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..analysis.depth_range import DepthRange, two_run_range
from ..analysis.stations import every_nth, geophone_stations
from ..analysis.surface import contour_surface
from ..layered.result import layered_result

__all__ = ["DepthRow", "depth_rows", "range_for", "rock_surface", "ensemble_range"]


@dataclass(frozen=True)
class DepthRow:
    """One row of the depth table (m; NaN where unknown)."""

    station: int
    x: float
    ground_z: float
    depth_m: float
    shallow_m: float
    deep_m: float
    elevation_m: float
    layered_depth_m: float
    layered_sigma_m: float
    constrained: bool


def rock_surface(run, contour_m_s=None, depth_range=None, other=None, labels=None):
    """The velocity of the surface in the depth table (m/s: ``contour_m_s``, else the layered
    refractor's contour; None without either) and its depth range (:func:`range_for`)."""
    from ..analysis.surface import refractor_contour

    value = contour_m_s if contour_m_s is not None else (refractor_contour(run.layered) if run.layered else None)
    if value is None:
        return None, depth_range
    return float(value), range_for(run, float(value), depth_range, other, labels)


def range_for(run, velocity_m_s, depth_range=None, other=None, labels=None):
    """The :class:`~tomo.analysis.depth_range.DepthRange` of the table: ``depth_range``
    when given, else the band of the run's ensemble (a run read from an ensemble file),
    else from ``other`` (a second run of the same picks), else None."""
    if depth_range is not None:
        return depth_range
    if getattr(run, "ensemble", None) is not None:
        return ensemble_range(run, velocity_m_s)
    if other is not None:
        names = tuple(labels) if labels else ("this run", "the other run")
        return two_run_range(run, other, velocity_m_s, names)
    return None


def ensemble_range(run, velocity_m_s):
    """The 5-95 % band of an ensemble's ``velocity_m_s`` surface
    (:meth:`tomo.results.run.Run.band`) as a DepthRange, where the central run's surface
    is constrained."""
    band = run.band(velocity_m_s)
    ok = np.asarray(band.constrained, bool)
    widened = int(np.sum(np.asarray(band.band_from)[ok] != "members"))
    return DepthRange(np.asarray(band.x, float), np.where(ok, band.depth_low_m, np.nan),
                      np.where(ok, band.depth_high_m, np.nan), "ensemble",
                      f"5-95 % of the depths of the {band.n_members} members of the ensemble (each with its picks "
                      "resampled within their sigma, its start, smoothing and grid perturbed)"
                      + (f", widened by extremal bounds at {widened} column(s)" if widened else ""))


def depth_rows(run, velocity_m_s, depth_range=None, target_step_m=10.0):
    """The rows of the depth table (:class:`DepthRow`), every n-th geophone about
    ``target_step_m`` apart, at the geophone positions."""
    surface = contour_surface(run, velocity_m_s)
    x_geo, numbers = geophone_stations(run)
    n = every_nth(x_geo, target_step_m)
    pick = np.arange(0, x_geo.size, n)
    if pick[-1] != x_geo.size - 1:
        pick = np.append(pick, x_geo.size - 1)
    xs = x_geo[pick]
    ok = np.isfinite(surface.depth_m)
    # depth, elevation and ground from the surface's own columns (its ground is the
    # model's), so that a range taken from the same columns brackets the depth
    depth = np.interp(xs, surface.x[ok], surface.depth_m[ok]) if ok.any() else np.full(xs.size, np.nan)
    z = np.interp(xs, surface.x[ok], surface.elevation_m[ok]) if ok.any() else np.full(xs.size, np.nan)
    # a column that never reaches the velocity gives no depth, not an interpolated one
    reach = np.interp(xs, surface.x, ok.astype(float)) > 0.999
    depth, z = np.where(reach, depth, np.nan), np.where(reach, z, np.nan)
    ground = np.where(reach, z + depth, np.interp(xs, run.terrain_x, run.terrain_z))
    constrained = np.interp(xs, surface.x, surface.constrained.astype(float)) > 0.5
    shallow, deep = (np.full(xs.size, np.nan),) * 2 if depth_range is None else depth_range.at(xs)
    lay_d, lay_s = _layered_at(run, xs)
    return [DepthRow(int(numbers[j]), float(x), float(g), float(dd), float(s), float(d), float(zz),
                     float(ld), float(ls), bool(c))
            for j, x, g, dd, zz, s, d, ld, ls, c in zip(pick, xs, ground, depth, z, shallow, deep, lay_d, lay_s,
                                                         constrained)]


def _layered_at(run, xs):
    """Depth and sigma (m) of the deepest delay-time refractor at the geophones ``xs``."""
    layered = layered_result(run.layered)
    nan = np.full(xs.size, np.nan)
    if layered is None or not layered.refractors:
        return nan, nan
    line = layered.refractor(layered.refractors[-1])
    depth, sigma = nan.copy(), nan.copy()
    for k, x in enumerate(xs):
        hit = np.flatnonzero(np.abs(line.x - x) < 1e-3)
        if hit.size:
            depth[k], sigma[k] = line.depth_m[hit[0]], line.uncertainty_m[hit[0]]
    return depth, sigma
