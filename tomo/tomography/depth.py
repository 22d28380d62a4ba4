"""How deep the grid must be: below the deepest first-arrival ray of any pick, with room.

A grid that stops above where a first-arrival ray turns makes that ray run along its
bottom, and its time comes out late (a diving wave in v = V0 + K z turns deeper than a
third of its offset x when the gradient is strong, K x / (2 V0) > 2.4, from its turning
depth (V0/K)(sqrt(1 + (K x / 2 V0)^2) - 1); Slotnick 1959). The rule of a third of the
longest offset (:func:`tomo.survey.meshspec.auto_mesh_spec`) is therefore only a first
guess: the rays of that grid are traced, and the grid is made deep enough that its
bottom lies below the deepest ray point by half of that point's depth below the ground
and at least :data:`MIN_ROOM_CELLS` cells (:data:`ROOM`); a ray that reached the
bottom may want to go deeper still, so then the depth is doubled and the rays traced
again.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["DepthCheck", "check_depth", "ROOM", "MIN_ROOM_CELLS"]

#: Room below the deepest ray point, as a fraction of its depth below the ground. Half:
#: the model of an inversion changes as it runs (measured on benchmarks/scale.py's
#: lines: the deepest rays of the final models turn up to 20 % deeper than the start's).
ROOM = 0.5
#: Least room below the deepest ray point, model cells.
MIN_ROOM_CELLS = 3
#: Booked lengths below this fraction of a cell are ignored when looking for a ray's
#: deepest cell (the bilinear booking leaks a little into the cell below a ray).
_LEAK = 0.05


@dataclass
class DepthCheck:
    """Where the deepest first-arrival ray turns, against the bottom of a grid.

    Attributes
    ----------
    deepest_m : float
        Depth of the deepest ray point below the ground there, m (a cell centre).
    x_m, z_m : float
        Its position, m (distance, elevation).
    pick : int
        The pick whose ray it is.
    room_m : float
        The room the grid should leave below it, m.
    grid_depth_m : float
        The grid's depth below its lowest ground, m.
    needed_m : float
        The grid depth below the lowest ground that leaves that room, m.
    reached_bottom : bool
        The ray runs along the grid's bottom (it may want to go deeper).
    """

    deepest_m: float
    x_m: float
    z_m: float
    pick: int
    room_m: float
    grid_depth_m: float
    needed_m: float
    reached_bottom: bool

    @property
    def ok(self):
        return self.needed_m <= self.grid_depth_m + 1e-9 and not self.reached_bottom

    def next_depth(self, current_m, cell_m):
        """The depth (m, whole cells) a grid should have after this check of a grid
        ``current_m`` deep: what the rays need with room, and at least twice the current
        depth when a ray reached the bottom (it may want to go deeper still)."""
        need = max(self.needed_m, 2.0 * float(current_m)) if self.reached_bottom else self.needed_m
        return float(np.ceil(need / cell_m - 1e-9) * cell_m)

    def describe(self, picks=None):
        """One line: where the deepest ray turns and whether the grid leaves room below it."""
        which = ""
        if picks is not None:
            k = self.pick
            which = f" (shot at x = {picks.source_x[k]:g} m to geophone at {picks.receiver_x[k]:g} m)"
        head = (f"the deepest first-arrival ray turns {self.deepest_m:.1f} m below the ground at "
                f"x = {self.x_m:.1f} m{which}")
        if self.reached_bottom:
            return f"{head}, on the bottom of a grid {self.grid_depth_m:.1f} m deep: it may want to go deeper"
        return (f"{head}, at elevation {self.z_m:.1f} m; a grid {self.needed_m:.1f} m deep (below the lowest "
                f"ground) leaves {self.room_m:.1f} m below it")


def ray_bottoms(mesh, matrix):
    """Each ray's deepest ground cell (a flat index into ``mesh.shape``; the lowest row,
    as the grid's bottom is level), or -1 for a ray with no length, from a ray matrix
    with ground-cell columns (path lengths, m)."""
    matrix = matrix.tocsr()
    cells = np.flatnonzero(mesh.ground.ravel())
    # row-major cells: the lowest cell a ray books has the largest flat index
    flat = np.where(matrix.data > _LEAK * mesh.cell, cells[matrix.indices], -1)
    out = np.full(matrix.shape[0], -1)
    full = np.diff(matrix.indptr) > 0
    if flat.size:
        out[full] = np.maximum.reduceat(flat, matrix.indptr[:-1][full])
    return out


def check_depth(mesh, matrix):
    """The :class:`DepthCheck` of the rays of a pass on ``mesh`` (ground-cell columns):
    of all rays, the one that needs the deepest grid."""
    bottoms = ray_bottoms(mesh, matrix)
    rays = np.flatnonzero(bottoms >= 0)
    i, j = np.divmod(bottoms[rays], mesh.nx)
    z = mesh.z[i]
    depth = mesh.ground_surface[j] - z
    room = np.maximum(ROOM * depth, MIN_ROOM_CELLS * mesh.cell)
    lowest = float(mesh.ground_surface.min())
    grid_depth = lowest - mesh.z_bottom
    if rays.size == 0:
        return DepthCheck(0.0, float(mesh.x[0]), lowest, 0, MIN_ROOM_CELLS * mesh.cell, grid_depth,
                          MIN_ROOM_CELLS * mesh.cell, False)
    needed = lowest - z + room
    k = int(np.argmax(needed))
    return DepthCheck(float(depth[k]), float(mesh.x[j[k]]), float(z[k]), int(rays[k]), float(room[k]), grid_depth,
                      float(needed[k]), bool(np.any(i >= mesh.nz - 1)))


def shallow_warning(mesh, matrix, picks=None):
    """A warning (str) when ``mesh``'s bottom leaves less room below the deepest ray of
    ``matrix`` than :data:`ROOM` asks, naming the deepest turning point and a depth that
    would do; None when the grid is deep enough."""
    check = check_depth(mesh, matrix)
    if check.ok:
        return None
    need = check.next_depth(check.grid_depth_m, mesh.cell)
    return (f"warning: the grid may be too shallow for the rays: {check.describe(picks)}, but the grid is "
            f"{check.grid_depth_m:g} m deep; give the mesh spec depth_m = {need:g} or more")
