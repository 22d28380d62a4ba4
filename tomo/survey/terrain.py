"""Ground elevation along the line: the terrain file and the ``Terrain`` type.

Terrain file (CSV ``x,z``, m): ground elevation along the line, linear between points.
A station outside its range is an error, not an extrapolation.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..core.errors import InputError
from ..core.fileio import parse_float, read_csv_rows
from .units import DISTANCE_UNITS

__all__ = ["Terrain", "read_terrain", "flat_terrain", "terrain_from_stations"]


@dataclass(frozen=True)
class Terrain:
    """Ground elevation along the line, linear between points.

    Attributes
    ----------
    x : ndarray
        Distances along the line, m, strictly increasing.
    z : ndarray
        Ground elevations, m, up positive.
    path : str or None
        File it came from, for messages.
    """

    x: np.ndarray
    z: np.ndarray
    path: str | None = None

    def __post_init__(self):
        x = np.asarray(self.x, dtype=float)
        z = np.asarray(self.z, dtype=float)
        if x.ndim != 1 or x.shape != z.shape or x.size < 2:
            raise InputError("terrain needs at least two (x, z) points of equal count", path=self.path)
        if not (np.all(np.isfinite(x)) and np.all(np.isfinite(z))):
            raise InputError("terrain has a non-finite value", path=self.path)
        if np.any(np.diff(x) <= 0):
            raise InputError("terrain x must increase strictly", path=self.path)
        object.__setattr__(self, "x", x)
        object.__setattr__(self, "z", z)

    @property
    def x_range(self):
        return float(self.x[0]), float(self.x[-1])

    def covers(self, x, tol=1e-6):
        """Return a boolean array: which ``x`` lie within the terrain's range."""
        x = np.asarray(x, dtype=float)
        return (x >= self.x[0] - tol) & (x <= self.x[-1] + tol)

    def elevation(self, x, extrapolate=False):
        """Ground elevation (m) at ``x`` (m), linear between points.

        Outside the terrain's range this raises unless ``extrapolate`` is true, in which
        case the end elevations continue flat (used only for padding a model grid).
        """
        x = np.asarray(x, dtype=float)
        if not extrapolate and not np.all(self.covers(x)):
            bad = np.atleast_1d(x)[~np.atleast_1d(self.covers(x))][0]
            raise InputError(
                f"x = {bad:g} m is outside the terrain ({self.x[0]:g} to {self.x[-1]:g} m)",
                path=self.path,
            )
        return np.interp(x, self.x, self.z)

    def max_elevation_near(self, x, half_width):
        """Highest ground within ``half_width`` (m) of each ``x``, terrain vertices included."""
        x = np.asarray(x, dtype=float)
        best = np.maximum(
            self.elevation(x, True),
            np.maximum(self.elevation(x - half_width, True), self.elevation(x + half_width, True)),
        )
        for xv, zv in zip(self.x, self.z):
            near = np.abs(x - xv) <= half_width
            best = np.where(near, np.maximum(best, zv), best)
        return best


def flat_terrain(x_min, x_max, z=0.0):
    """Flat ground at elevation ``z`` (m) from ``x_min`` to ``x_max`` (m)."""
    return Terrain(np.array([float(x_min), float(x_max)]), np.array([float(z), float(z)]))


def read_terrain(path, distance_unit="m"):
    """Read a terrain CSV file with columns ``x,z`` (m, or ``distance_unit``: "ft", "cm").

    Raises
    ------
    InputError
        If the file is missing, a column is missing, a value is not a number, or x does
        not increase; the message names file, line and field.
    """
    header, rows = read_csv_rows(path)
    for name in ("x", "z"):
        if name not in header:
            raise InputError(f"missing column '{name}' (header has: {', '.join(header)})", path=path, line=None)
    ix, iz = header.index("x"), header.index("z")
    xs, zs = [], []
    previous = None
    for lineno, fields in rows:
        if len(fields) < len(header):
            raise InputError(f"expected {len(header)} fields, got {len(fields)}", path=path, line=lineno)
        x = parse_float(fields[ix], path, lineno, "x")
        z = parse_float(fields[iz], path, lineno, "z")
        if previous is not None and x <= previous:
            raise InputError(f"x must increase along the file ({x:g} after {previous:g})", path=path, line=lineno,
                             field="x")
        previous = x
        xs.append(x)
        zs.append(z)
    if len(xs) < 2:
        raise InputError("terrain needs at least two points", path=path)
    factor = DISTANCE_UNITS[distance_unit]
    return Terrain(np.array(xs) * factor, np.array(zs) * factor, path=str(path))


def terrain_from_stations(picks):
    """Ground through the highest station at each distance (None when all are at z = 0).

    Padded flat beyond the outermost stations so that the mesh padding has ground.
    """
    x = np.concatenate([picks.source_x, picks.receiver_x])
    z = np.concatenate([picks.source_z, picks.receiver_z])
    if np.all(np.abs(z) < 1e-9):
        return None
    key = np.round(x, 4)
    ux = np.unique(key)
    uz = np.array([z[key == v].max() for v in ux])
    span = max(float(ux[-1] - ux[0]), 1.0)
    ux = np.concatenate([[ux[0] - span], ux, [ux[-1] + span]])
    uz = np.concatenate([[uz[0]], uz, [uz[-1]]])
    return Terrain(ux, uz)
