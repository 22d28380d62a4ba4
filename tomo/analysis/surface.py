"""Iso-velocity surfaces of a run: the usual way of reading a refractor out of a tomogram.

An iso-velocity contour between the overburden and refractor velocities (e.g. Lanz,
Maurer & Green 1998, Geophysics 63, "Refraction tomography over a buried waste disposal
site", from memory; common practice) stands for the refractor. A surface drawn where
few or no rays go is mostly the starting model's, not the data's, so every point says
whether it lies above the depth of investigation (:mod:`tomo.analysis.coverage`).
"""

from __future__ import annotations

from dataclasses import dataclass, fields

import numpy as np

from ..core.errors import InputError
from ..layered.result import layered_result
from .coverage import ground_elevation, investigation_elevation

__all__ = ["Surface", "check_contour", "contour_surface", "layer_velocities", "refractor_contour"]


@dataclass(frozen=True)
class Surface:
    """An iso-velocity surface of a run, one value per model column.

    Attributes
    ----------
    velocity_m_s : float
        The velocity of the surface, m/s.
    x : ndarray
        Cell-centre distance along the line, m.
    ground_z : ndarray
        Ground elevation at ``x``, m.
    depth_m : ndarray
        Depth of the surface, vertically below the ground, m; NaN where the column
        never reaches the velocity.
    elevation_m : ndarray
        Elevation of the surface, m; NaN where the column never reaches the velocity.
    constrained : ndarray of bool
        The surface lies above the depth of investigation (rays decide it there).

    Notes
    -----
    ``surface["depth_m"]`` reads a field as ``surface.depth_m`` does (kept for code
    written when the surface was a dict).
    """

    velocity_m_s: float
    x: np.ndarray
    ground_z: np.ndarray
    depth_m: np.ndarray
    elevation_m: np.ndarray
    constrained: np.ndarray

    def __getitem__(self, name: str):
        if name not in {f.name for f in fields(self)}:
            raise KeyError(name)
        return getattr(self, name)


def check_contour(run, velocity_m_s: float) -> float:
    """Raise InputError unless ``velocity_m_s`` lies strictly inside the model's range."""
    v = np.asarray(run.velocity, float)
    lo, hi = float(np.nanmin(v)), float(np.nanmax(v))
    value = float(velocity_m_s)
    if not np.isfinite(value) or not (lo < value < hi):
        raise InputError(
            f"contour velocity {value:g} m/s is outside the model's range "
            f"({lo:.0f} to {hi:.0f} m/s)", field="--contour")
    return value


def contour_surface(run, velocity_m_s: float) -> Surface:
    """The ``velocity_m_s`` iso-velocity surface, column by column.

    In each column the model is read downward from the ground; the surface is the
    first crossing of ``velocity_m_s``, placed by linear interpolation between the two
    cell centres that bracket it. A column whose top ground cell is already faster is
    placed at that cell's centre.

    Parameters
    ----------
    run : RunData
        The run (its final model, m/s, and ray coverage).
    velocity_m_s : float
        Velocity of the surface, m/s, strictly inside the model's range.

    Returns
    -------
    Surface
        ``constrained`` is true where the surface lies above the depth of
        investigation (:func:`investigation_elevation`).

    Raises
    ------
    InputError
        If the velocity is outside the model's range.
    """
    value = check_contour(run, velocity_m_s)
    v = np.asarray(run.velocity, float)
    doi = investigation_elevation(run)
    z = np.asarray(run.z, float)
    nz, nx = v.shape
    ground_z = ground_elevation(run, run.x)
    elevation = np.full(nx, np.nan)
    constrained = np.zeros(nx, dtype=bool)
    for j in range(nx):
        rows = np.flatnonzero(np.isfinite(v[:, j]))
        if rows.size == 0:
            continue
        col = v[rows, j]
        fast = np.flatnonzero(col >= value)
        if fast.size == 0:
            continue
        k = fast[0]
        if k == 0:
            elevation[j] = z[rows[0]]
            continue
        a, b = rows[k - 1], rows[k]
        frac = (value - v[a, j]) / (v[b, j] - v[a, j])
        elevation[j] = z[a] + frac * (z[b] - z[a])
    with np.errstate(invalid="ignore"):
        constrained = np.isfinite(elevation) & (elevation >= doi)
    return Surface(velocity_m_s=value, x=np.asarray(run.x, float), ground_z=ground_z,
                   depth_m=ground_z - elevation, elevation_m=elevation, constrained=constrained)


def layer_velocities(layered):
    """Layer velocities (m/s) top to bottom of a layered result (or its dict, layers.json)."""
    result = layered_result(layered)
    return [] if result is None else [float(v) for v in result.velocities]


def refractor_contour(layered, refractor=None):
    """The iso-velocity (m/s) that stands for a refractor in the tomogram: the mean of
    the layer velocities above and below it (common practice). ``refractor`` counts
    from 1 (the base of the top layer); the deepest one by default
    (:meth:`tomo.layered.result.LayeredResult.contour_m_s`)."""
    result = layered_result(layered)
    return None if result is None else result.contour_m_s(refractor)
