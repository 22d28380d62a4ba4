"""Layered velocity models for synthetic work, and their rasterisation onto a mesh.

Model file (TOML)::

    [[layer]]              # top to bottom
    velocity = 400.0       # m/s at the top of the layer
    gradient = 25.0        # m/s per m of depth below the layer top (optional, 0)
    base = [[0.0, 2.5], [140.0, 3.0]]   # (x, depth below ground) of the layer's base, m,
                                        # linear between points, flat beyond the ends;
                                        # omitted on the last layer
    [[body]]               # optional, painted over the layers (in file order)
    velocity = 900.0
    outline = [[60.0, 4.0], [80.0, 4.0], [70.0, 9.0]]   # polygon, (x, depth below ground)
    [terrain]              # optional; a terrain file given on the command line wins
    points = [[0.0, 100.0], [140.0, 97.0]]

Depths are vertical, below the ground surface at the same x.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..core.errors import InputError
from ..core.fileio import read_toml as _read_toml
from .terrain import Terrain

__all__ = ["Layer", "Body", "Model", "read_model"]


@dataclass(frozen=True)
class Layer:
    """One layer: velocity (m/s) at its top, gradient (1/s) and base (x, depth) points, m."""

    velocity: float
    gradient: float = 0.0
    base: np.ndarray | None = None  # (n, 2) of (x, depth below ground)

    def base_depth(self, x):
        """Depth (m) of the layer's base below the ground at ``x`` (m); inf for the last layer."""
        x = np.asarray(x, float)
        if self.base is None:
            return np.full(x.shape, np.inf)
        return np.interp(x, self.base[:, 0], self.base[:, 1])


@dataclass(frozen=True)
class Body:
    """A polygon of constant velocity (m/s), outline in (x, depth below ground), m."""

    velocity: float
    outline: np.ndarray


@dataclass(frozen=True)
class Model:
    """A layered model with optional bodies and terrain (see module docstring)."""

    layers: tuple
    bodies: tuple = ()
    terrain: Terrain | None = None
    path: str | None = None

    def velocity_at(self, x, depth):
        """Velocity (m/s) at distance ``x`` (m) and ``depth`` below the ground (m).

        Points above the ground (negative depth) take the top layer's value at depth 0.
        Layer bases are made non-decreasing downward, so a base that crosses the one above
        pinches the layer out.
        """
        x, depth = np.broadcast_arrays(np.asarray(x, float), np.asarray(depth, float))
        depth = np.maximum(depth, 0.0)
        v = np.empty(x.shape)
        top = np.zeros(x.shape)
        assigned = np.zeros(x.shape, dtype=bool)
        for layer in self.layers:
            base = np.maximum(layer.base_depth(x), top)
            here = ~assigned & (depth < base)
            v[here] = layer.velocity + layer.gradient * (depth[here] - top[here])
            assigned |= here
            top = base
        for body in self.bodies:
            from matplotlib.path import Path as PolygonPath  # matplotlib only when a model has bodies

            inside = PolygonPath(body.outline).contains_points(np.column_stack([x.ravel(), depth.ravel()]))
            v[inside.reshape(x.shape)] = body.velocity
        return v

    def slowness_nodes(self, mesh, samples=8):
        """Slowness (s/m) on the mesh's forward nodes, averaged over each node's square.

        Each node stands for the square of side ``mesh.h`` centred on it; its slowness is
        the mean over ``samples`` x ``samples`` points in that square, so an interface
        that cuts the square contributes in proportion to the area on each side.
        Inactive (air) nodes get NaN.
        """
        return _average(self, mesh.node_x, mesh.node_z, mesh.h, mesh.terrain, samples, mesh.node_active)

    def velocity_cells(self, mesh, samples=8):
        """Velocity (m/s) on the model cells (harmonic mean over each cell); NaN in air."""
        s = _average(self, mesh.x, mesh.z, mesh.cell, mesh.terrain, samples, mesh.ground)
        return 1.0 / s


def _average(model, xs, zs, size, terrain, samples, active):
    offsets = (np.arange(samples) + 0.5) / samples - 0.5
    sub_x = (xs[:, None] + offsets[None, :] * size).ravel()  # (nx*samples,)
    ground = terrain.elevation(sub_x, extrapolate=True)
    total = np.zeros((zs.size, xs.size))
    for dz in offsets:
        z = zs + dz * size
        depth = ground[None, :] - z[:, None]  # (nz, nx*samples)
        s = 1.0 / model.velocity_at(np.broadcast_to(sub_x, depth.shape), depth)
        total += s.reshape(zs.size, xs.size, samples).sum(axis=2)
    out = total / samples**2
    out[~active] = np.nan
    return out


def _points(value, path, where, min_points):
    try:
        arr = np.asarray(value, dtype=float)
    except (TypeError, ValueError):
        raise InputError("expected a list of [x, depth] pairs of numbers", path=path, field=where) from None
    if arr.ndim != 2 or arr.shape[1] != 2 or arr.shape[0] < min_points:
        raise InputError(f"expected at least {min_points} [x, value] pair(s)", path=path, field=where)
    if not np.all(np.isfinite(arr)):
        raise InputError("non-finite value", path=path, field=where)
    return arr


def _number(table, key, path, where, default=None, positive=False):
    if key not in table:
        if default is None:
            raise InputError("missing", path=path, field=f"{where}.{key}")
        return default
    value = table[key]
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
        raise InputError(f"expected a number, got {value!r}", path=path, field=f"{where}.{key}")
    if positive and value <= 0:
        raise InputError(f"must be positive, got {value!r}", path=path, field=f"{where}.{key}")
    return float(value)


def read_model(path):
    """Read a model TOML file (see module docstring) into a :class:`Model`."""
    data = _read_toml(path)
    path = str(path)
    unknown = set(data) - {"layer", "body", "terrain"}
    if unknown:
        raise InputError("unknown table (expected layer, body, terrain)", path=path, field=sorted(unknown)[0])
    raw_layers = data.get("layer")
    if not isinstance(raw_layers, list) or not raw_layers:
        raise InputError("needs at least one [[layer]]", path=path, field="layer")
    layers = []
    for k, table in enumerate(raw_layers):
        where = f"layer[{k + 1}]"
        if not isinstance(table, dict):
            raise InputError("expected a table", path=path, field=where)
        extra = set(table) - {"velocity", "gradient", "base"}
        if extra:
            raise InputError("unknown key", path=path, field=f"{where}.{sorted(extra)[0]}")
        velocity = _number(table, "velocity", path, where, positive=True)
        gradient = _number(table, "gradient", path, where, default=0.0)
        last = k == len(raw_layers) - 1
        if last and "base" in table:
            raise InputError("the last layer has no base (it continues to the bottom of the grid)", path=path,
                             field=f"{where}.base")
        if not last and "base" not in table:
            raise InputError("missing (every layer but the last needs a base)", path=path, field=f"{where}.base")
        base = None
        if not last:
            base = _points(table["base"], path, f"{where}.base", 1)
            if np.any(base[:, 1] <= 0):
                raise InputError("base depths must be positive (below the ground)", path=path, field=f"{where}.base")
            if base.shape[0] > 1 and np.any(np.diff(base[:, 0]) <= 0):
                raise InputError("base x must increase", path=path, field=f"{where}.base")
        layers.append(Layer(velocity, gradient, base))
    bodies = []
    for k, table in enumerate(data.get("body", []) or []):
        where = f"body[{k + 1}]"
        if not isinstance(table, dict):
            raise InputError("expected a table", path=path, field=where)
        velocity = _number(table, "velocity", path, where, positive=True)
        if "outline" not in table:
            raise InputError("missing", path=path, field=f"{where}.outline")
        bodies.append(Body(velocity, _points(table["outline"], path, f"{where}.outline", 3)))
    terrain = None
    if "terrain" in data:
        table = data["terrain"]
        if not isinstance(table, dict) or "points" not in table:
            raise InputError("expected points = [[x, z], ...]", path=path, field="terrain")
        pts = _points(table["points"], path, "terrain.points", 2)
        try:
            terrain = Terrain(pts[:, 0], pts[:, 1], path=path)
        except InputError as exc:
            raise InputError(str(exc).split(": ", 1)[-1], path=path, field="terrain.points") from None
    return Model(tuple(layers), tuple(bodies), terrain, path)
