"""Ray paths of a run's final model, for the ray-path figure.

The run file keeps the ray coverage per cell but not the rays, so they are traced
again: one fast-marching field per shot through the final model
(:func:`tomo.tomography.forward.solve_field`) and a ray from each of its geophones
down the time gradient (:func:`tomo.tomography.rays.trace_rays`), with the run's own
forward settings. The demo line's 13 shots take about a second.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..survey.terrain import Terrain
from ..tomography.forward import DEFAULT_SOURCE_RADIUS, node_speed, solve_field
from ..tomography.mesh import Mesh
from ..tomography.rays import trace_rays

__all__ = ["RayPaths", "ray_paths", "run_mesh"]


@dataclass(frozen=True)
class RayPaths:
    """Rays of every pick of a run.

    Attributes
    ----------
    shots : ndarray (n_shots, 2)
        Shot positions (x, z), m.
    paths : list of ndarray (n_k, 2)
        Ray points (x, elevation), m, from the geophone to the shot.
    shot_index : ndarray of int
        The shot of each path.
    """

    shots: np.ndarray
    paths: list
    shot_index: np.ndarray


def run_mesh(run):
    """The :class:`Mesh` a run was computed on (from its recorded mesh)."""
    m = run.mesh
    return Mesh(x0=float(m["x0"]), z_top=float(m["z_top"]), cell=float(m["cell"]), nx=int(m["nx"]),
                nz=int(m["nz"]), refine=int(m["refine"]),
                terrain=Terrain(np.asarray(m["terrain_x"], float), np.asarray(m["terrain_z"], float)))


def ray_paths(run):
    """Trace the rays of every pick of ``run`` through its final model (see module)."""
    mesh = run_mesh(run)
    with np.errstate(divide="ignore", invalid="ignore"):
        cell_slowness = np.where(mesh.ground, 1.0 / np.asarray(run.velocity, float), 0.0)
    slowness = mesh.cells_to_nodes(cell_slowness)
    speed = node_speed(mesh, slowness)
    settings = run.settings or {}
    order = int(settings.get("order", 2))
    radius = float(settings.get("source_radius", DEFAULT_SOURCE_RADIUS))
    p = run.picks
    src = np.column_stack([p["source_x"], p["source_z"]])
    shots, which = np.unique(np.round(src, 4), axis=0, return_inverse=True)
    which = which.ravel()
    paths, index = [], []
    for k, (sx, sz) in enumerate(shots):
        sel = np.flatnonzero(which == k)
        field = solve_field(mesh, slowness, float(sx), float(sz), order=order, source_radius=radius, speed=speed)
        rays = trace_rays(mesh, field, p["receiver_x"][sel], p["receiver_z"][sel], keep_paths=True)
        paths += list(rays.paths)
        index += [k] * len(rays.paths)
    return RayPaths(shots, paths, np.asarray(index, int))
