"""The model grid and the finer forward grid over real terrain.

The *model grid* has square cells of side ``cell`` (m): ``nz`` rows from the top edge
``z_top`` (an elevation, m) downward and ``nx`` columns from the left edge ``x0`` (m).
Arrays on it have shape ``(nz, nx)``; row 0 is the highest. A cell whose centre lies
above the ground is *air* and is excluded from the model (NaN in outputs).

The *forward grid* holds the nodes on which travel times are solved: ``refine`` node
intervals per model cell, so ``(nz*refine + 1, nx*refine + 1)`` nodes with spacing
``cell / refine`` sharing the model grid's outer edges. Nodes above the ground are
masked (excluded from the eikonal solve) except for a thin *skin*: nodes within one
node spacing of the highest ground nearby stay in, carrying the velocity of the ground
below them, so that every station on or below the ground has four unmasked nodes
around it and its time can be interpolated from solved values only.

How fine and deep the grid is comes from a mesh spec (:mod:`tomo.survey.meshspec`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import cached_property

import numpy as np
import scipy.sparse as sp

from ..core.errors import InputError
from ..survey.geometry import station_spacing
from ..survey.meshspec import auto_mesh_spec
from ..survey.terrain import Terrain, flat_terrain

__all__ = ["Mesh", "build_mesh", "mesh_for_picks"]


@dataclass(frozen=True, eq=False)
class Mesh:
    """A regular model grid and its forward grid over terrain (see module docstring).

    Attributes
    ----------
    x0 : float
        Left edge, m along the line.
    z_top : float
        Top edge, elevation in m.
    cell : float
        Model cell size, m.
    nx, nz : int
        Model cells across and down.
    refine : int
        Forward node intervals per model cell.
    terrain : Terrain
    """

    x0: float
    z_top: float
    cell: float
    nx: int
    nz: int
    refine: int
    terrain: Terrain

    def __reduce__(self):
        # pickle the defining numbers only, not the cached node arrays and matrices:
        # meshes travel to worker processes with every task
        return (Mesh, (self.x0, self.z_top, self.cell, self.nx, self.nz, self.refine, self.terrain))

    # --- model grid -------------------------------------------------------------
    @property
    def shape(self):
        return (self.nz, self.nx)

    @property
    def x1(self):
        return self.x0 + self.nx * self.cell

    @property
    def z_bottom(self):
        return self.z_top - self.nz * self.cell

    @cached_property
    def x(self):
        """Cell-centre distances, m (nx)."""
        return self.x0 + (np.arange(self.nx) + 0.5) * self.cell

    @cached_property
    def z(self):
        """Cell-centre elevations, m (nz), decreasing downward."""
        return self.z_top - (np.arange(self.nz) + 0.5) * self.cell

    @cached_property
    def ground_surface(self):
        """Ground elevation at the cell-centre columns, m (nx)."""
        return self.terrain.elevation(self.x, extrapolate=True)

    @cached_property
    def ground(self):
        """Boolean (nz, nx): cells whose centre is in the ground (the model's cells)."""
        return self.z[:, None] <= self.ground_surface[None, :]

    @cached_property
    def depth(self):
        """Depth of each cell centre below the ground, m (nz, nx); negative in the air."""
        return self.ground_surface[None, :] - self.z[:, None]

    # --- forward grid -------------------------------------------------------------
    @property
    def h(self):
        """Forward node spacing, m."""
        return self.cell / self.refine

    @property
    def node_shape(self):
        return (self.nz * self.refine + 1, self.nx * self.refine + 1)

    @cached_property
    def node_x(self):
        return self.x0 + np.arange(self.node_shape[1]) * self.h

    @cached_property
    def node_z(self):
        return self.z_top - np.arange(self.node_shape[0]) * self.h

    @cached_property
    def node_ground_surface(self):
        return self.terrain.elevation(self.node_x, extrapolate=True)

    @cached_property
    def node_depth(self):
        """Depth of each node below the ground, m; negative above it."""
        return self.node_ground_surface[None, :] - self.node_z[:, None]

    @cached_property
    def node_active(self):
        """Boolean node mask: True where the eikonal is solved (ground plus skin)."""
        skin_top = self.terrain.max_elevation_near(self.node_x, self.h) + self.h * (1 + 1e-6)
        return self.node_z[:, None] <= skin_top[None, :]

    @cached_property
    def cell_to_node(self):
        """Sparse (n_nodes, n_cells) averaging matrix: node slowness = P @ cell slowness.

        A node inside a cell takes that cell's value; a node on cell edges averages the
        ground cells that share it. Skin nodes and nodes whose neighbours are all air
        take the highest ground cell of their column(s). Rows of inactive nodes are
        empty. Cells are flattened row-major over (nz, nx); nodes likewise.
        """
        r = self.refine
        ny_n, nx_n = self.node_shape
        ground = self.ground

        def candidates(n_nodes, n_cells):
            # the one or two cells each node index touches along one axis
            k = np.arange(n_nodes)
            on_edge = k % r == 0
            first = np.where(on_edge, k // r - 1, k // r)
            second = k // r
            valid = np.column_stack([(first >= 0) & (first < n_cells), on_edge & (second < n_cells)])
            return np.column_stack([first, second]).clip(0, n_cells - 1), valid

        az, vz = candidates(ny_n, self.nz)
        bx, vx = candidates(nx_n, self.nx)
        active = self.node_active
        ii, jj = np.nonzero(active)
        rows, cols, counts = [], [], np.zeros(ii.size)
        members = []
        for p in range(2):
            for q in range(2):
                a, b = az[ii, p], bx[jj, q]
                ok = vz[ii, p] & vx[jj, q] & ground[a, b]
                members.append((ok, a * self.nx + b))
                counts += ok
        # nodes with no ground cell around them (the skin): highest ground cell below
        top_ground = np.argmax(ground, axis=0)
        has_ground = ground.any(axis=0)
        lonely = counts == 0
        for q in range(2):
            b = bx[jj, q]
            ok = lonely & vx[jj, q] & has_ground[b]
            members.append((ok, top_ground[b] * self.nx + b))
            counts += ok
        node = ii * nx_n + jj
        vals = []
        for ok, cell in members:
            rows.append(node[ok])
            cols.append(cell[ok])
            vals.append(1.0 / counts[ok])
        rows, cols, vals = np.concatenate(rows), np.concatenate(cols), np.concatenate(vals)
        return sp.csr_matrix((vals, (rows, cols)), shape=(ny_n * nx_n, self.nz * self.nx))

    def cells_to_nodes(self, cell_values):
        """Map a (nz, nx) cell array to forward nodes (averaging; see ``cell_to_node``)."""
        values = np.where(self.ground, cell_values, 0.0).ravel()
        return (self.cell_to_node @ values).reshape(self.node_shape)

    def window(self, j0, nx, nz):
        """The sub-mesh of model columns ``j0 .. j0 + nx - 1`` and the top ``nz`` rows.

        Its cells, forward nodes, ground and air are this mesh's, sliced: node (i, j)
        of the window is node (i, j0 * refine + j) here (:meth:`node_columns`).
        """
        return Mesh(x0=self.x0 + j0 * self.cell, z_top=self.z_top, cell=self.cell, nx=int(nx), nz=int(nz),
                    refine=self.refine, terrain=self.terrain)

    def node_columns(self, j0, nx):
        """The slice of forward-node columns of model columns ``j0 .. j0 + nx - 1``."""
        return slice(j0 * self.refine, (j0 + nx) * self.refine + 1)

    def contains(self, x, z):
        """True where points (m) lie inside the grid and not above the ground."""
        x = np.asarray(x, float)
        z = np.asarray(z, float)
        inside = (x >= self.x0) & (x <= self.x1) & (z <= self.z_top) & (z >= self.z_bottom)
        ground = self.terrain.elevation(np.clip(x, self.x0, self.x1), extrapolate=True)
        return inside & (z <= ground + 1e-6)

    def describe(self):
        return (f"{self.nx} x {self.nz} cells of {self.cell:g} m "
                f"(x {self.x0:g} to {self.x1:g} m, elevation {self.z_bottom:g} to {self.z_top:g} m); "
                f"forward grid {self.node_shape[1]} x {self.node_shape[0]} nodes at {self.h:.3g} m")

    def as_dict(self):
        return {"x0": self.x0, "z_top": self.z_top, "cell": self.cell, "nx": self.nx,
                "nz": self.nz, "refine": self.refine,
                "terrain_x": self.terrain.x.tolist(), "terrain_z": self.terrain.z.tolist()}


def build_mesh(x_min, x_max, terrain, cell, depth, refine=2, padding=0.0):
    """Build a Mesh covering ``[x_min - padding, x_max + padding]`` and ``depth`` (m) below
    the lowest ground.

    The grid's left edge is a multiple of ``cell`` and its top edge lies at or above
    the highest ground, so that no ground is cut off.
    """
    if not (cell > 0 and depth > 0 and refine >= 1):
        raise InputError(f"mesh needs cell > 0, depth > 0, refine >= 1 (got {cell}, {depth}, {refine})")
    x0 = math.floor((x_min - padding) / cell + 1e-9) * cell
    x1 = math.ceil((x_max + padding) / cell - 1e-9) * cell
    nx = max(int(round((x1 - x0) / cell)), 2)
    xs = np.linspace(x0, x0 + nx * cell, 8 * nx + 1)
    ground = terrain.elevation(xs, extrapolate=True)
    z_top = math.ceil(float(ground.max()) / cell + 1e-9) * cell
    z_low = float(ground.min()) - depth
    nz = max(int(math.ceil((z_top - z_low) / cell - 1e-9)), 2)
    return Mesh(x0=float(x0), z_top=float(z_top), cell=float(cell), nx=nx, nz=nz, refine=int(refine), terrain=terrain)


def mesh_for_picks(picks, terrain=None, spec=None):
    """The mesh for a survey: ``spec`` fields where given, the survey's defaults elsewhere.

    Returns the Mesh and the filled-in MeshSpec. Without terrain, the ground is flat at
    z = 0 over the grid.
    """
    xs = np.concatenate([picks.source_x, picks.receiver_x])
    max_offset = float(np.max(np.abs(picks.offset))) if len(picks) else 10.0
    spec = auto_mesh_spec(station_spacing(picks), max_offset, spec)
    if terrain is None:
        pad = spec.padding_m + spec.cell_m
        terrain = flat_terrain(xs.min() - pad - spec.cell_m, xs.max() + pad + spec.cell_m, 0.0)
    mesh = build_mesh(xs.min(), xs.max(), terrain, spec.cell_m, spec.depth_m, spec.refine, spec.padding_m)
    zs = np.concatenate([picks.source_z, picks.receiver_z])
    bad = ~mesh.contains(xs, zs)
    if np.any(bad):
        k = int(np.flatnonzero(bad)[0])
        raise InputError(f"station at x = {xs[k]:g} m, z = {zs[k]:g} m is outside the mesh ({mesh.describe()})")
    return mesh, spec
