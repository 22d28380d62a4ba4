"""Windows: the part of the grid each field is solved on, and why no ray leaves it.

A first-arrival field from one origin (a shot, or a geophone with reciprocity) is
needed only at that origin's targets, and the first-arrival ray to each target keeps
to a neighbourhood of the two. Each origin's field is therefore solved on a window of
the line's grid (:meth:`Mesh.window`): the model columns spanning the origin and its
targets plus a margin on each side, from the top of the grid down to a depth, so the
cost of a pass grows with the number of origins, not with the square of the line.

Why a window cannot clip a first-arrival ray (Fermat's principle). Let T(S, R) be the
first-arrival time from S to R and t_W(P) the time of the field solved in a window W.
Paths in W are paths of the line, so t_W(R) >= T(S, R). Suppose the ray from S to R
leaves W, and let B be the first point where it reaches one of W's edges inside the
line (a side edge that is not the grid's end, or a bottom edge above the grid's
bottom). The ray up to B lies in W and is the quickest path to B, so T(S, B) = t_W(B),
and T(S, R) = t_W(B) + T(B, R) >= t_W(B) + L(B, R) for any lower bound L of the time
from B to R. So if, for every target R,

    t_W(R) < min over the inner-edge points B of  t_W(B) + L(B, R),

no first-arrival ray leaves W, and t_W(R) = T(S, R) (:func:`certify`, run on every
solved window; a window that fails is widened and solved again).

The lower bound L. Let s_lb(d) be the least slowness of the line at depth d below the
ground (each band of depth over the whole line, one node spacing either side): every
point of the ground is at least that slow. Measured in (x, depth) coordinates, a path
over ground of slope g' is at least kappa times as long, kappa = the smaller singular
value of [[1, 0], [g', -1]] for the steepest g' of the terrain (1 on flat ground). So
the time between two points is at least kappa times their time in the laterally
uniform medium s_lb(d), which one fast-marching solve from a surface point gives for
every horizontal distance u and depth d (``F(u, d)``; by the triangle inequality,
F(u, d_B) minus the vertical time down to a buried target bounds the time from B to
it). The margins before the solve come from the same bound (:func:`plan_windows`):
in a laterally uniform medium a path from S to R that reaches a horizontal distance m
beyond the span of S and R takes as long as a path to a target mirrored about that
point, at horizontal distance H + 2m (H the distance from S to R, plus both points'
distance to the span's end), and F grows with distance (squeezing a path sideways
shortens it), so the ray cannot reach past the margin m at which kappa F(H + 2m)
exceeds the time; a path that touches depth D takes at least
min_u F(u, D) + F(X - u, D) (X the offset). The times they are compared with are
upper bounds too: the quickest of the paths straight down from S, along one row of
nodes and straight up to R (:func:`upper_times`). The solves are discrete and these
bounds continuous, so every comparison keeps a relative safety of
:data:`SAFETY`, well above the solver's errors (under 1 % against closed forms,
tests/test_forward.py).

A line whose velocities vary a lot along it gets a faster s_lb than most of its ground
and so wider windows; the test is still exact, only the saving is smaller.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..survey.terrain import flat_terrain
from .fields import solve_field
from .mesh import Mesh

__all__ = ["Window", "Bounds", "line_bounds", "upper_times", "plan_windows", "certify", "SAFETY"]

#: Relative safety of every comparison of a time with a bound (see module docstring).
SAFETY = 0.03
#: Rows of the bound's grid above the ground, node spacings: the line's active nodes
#: reach up to two node spacings above the ground on slopes up to 1 in 1 (its skin,
#: :class:`tomo.tomography.mesh.Mesh`), and the row above those is the bound's air.
_SKIN_ROWS = 3


@dataclass(frozen=True)
class Window:
    """Model columns ``j0 .. j0 + nx - 1`` and the top ``nz`` rows of the line's grid."""

    j0: int
    nx: int
    nz: int

    @property
    def j1(self):
        return self.j0 + self.nx

    def mesh(self, line):
        return line.window(self.j0, self.nx, self.nz)

    def nodes(self, line):
        """(row slice, column slice) of the window's forward nodes on the line's."""
        return slice(0, self.nz * line.refine + 1), line.node_columns(self.j0, self.nx)

    def covers(self, other):
        return self.j0 <= other.j0 and self.j1 >= other.j1 and self.nz >= other.nz


@dataclass
class Bounds:
    """The lower bound of travel times of one model (see module docstring).

    ``field`` is F(u, d), s, on nodes of spacing ``h`` (m): columns u = 0, h, 2h, ...;
    rows d = -3h, -2h, -h, 0, h, ... below the ground (row ``_SKIN_ROWS`` at the
    ground). ``vertical`` is the time straight down
    at the least slowness, s, on the same rows (0 at the ground). ``kappa`` is the
    terrain's factor; ``reflection[i, k]`` a bound of the time of a surface-to-surface
    path of offset k ``reflection_step`` node spacings that touches the depth of F's row
    ``reflection_rows[i]`` (:func:`_reflection`), or None when not computed.
    """

    field: np.ndarray
    vertical: np.ndarray
    h: float
    kappa: float
    reflection: np.ndarray | None = None
    reflection_rows: np.ndarray | None = None
    reflection_step: int = 1

    def row(self, depth):
        """The bound's row at or above ``depth`` (m) (shallower: a smaller bound)."""
        r = np.floor(np.asarray(depth, float) / self.h + _SKIN_ROWS + 1e-9).astype(int)
        return np.clip(r, 1, self.field.shape[0] - 1)

    def vertical_time(self, depth):
        """Time straight down from the ground to ``depth`` (m) in the bound's medium, s,
        rounded up (it is subtracted from a bound)."""
        r = np.ceil(np.maximum(np.asarray(depth, float), 0.0) / self.h - 1e-9).astype(int) + _SKIN_ROWS
        return self.vertical[np.clip(r, 0, self.vertical.size - 1)]

    def between(self, u, depth_b, depth_r):
        """Lower bound of the time, s, between a point at ``depth_b`` and a target at
        ``depth_r`` (m below the ground) a horizontal distance ``u`` (m) apart."""
        cols = self.field.shape[1]
        c = np.clip(np.floor(np.abs(u) / self.h).astype(int), 0, cols - 1)
        r = self.row(depth_b)
        # the smaller of the nodes around the point: F is not monotone in depth
        r2 = np.minimum(r + 1, self.field.shape[0] - 1)
        c2 = np.minimum(c + 1, cols - 1)
        f = np.minimum(np.minimum(self.field[r, c], self.field[r2, c]),
                       np.minimum(self.field[r, c2], self.field[r2, c2]))
        return self.kappa * np.maximum(f - self.vertical_time(depth_r), 0.0)


def terrain_kappa(mesh):
    """kappa of the module docstring: the smaller singular value of [[1, 0], [g', -1]]
    for the steepest slope g' of the terrain over the grid."""
    t = mesh.terrain
    xs = np.concatenate([[mesh.x0], t.x[(t.x > mesh.x0) & (t.x < mesh.x1)], [mesh.x1]])
    z = t.elevation(xs, extrapolate=True)
    g = float(np.max(np.abs(np.diff(z) / np.diff(xs)))) if xs.size > 1 else 0.0
    # eigenvalues of M^T M = [[1 + g^2, -g], [-g, 1]]
    a = 2.0 + g * g
    return math.sqrt(max((a - math.sqrt(a * a - 4.0)) / 2.0, 0.0))


def line_bounds(mesh, slowness, width_m, reflection_offset_m=None, reach_s=None):
    """The :class:`Bounds` of a node slowness model (s/m, inactive nodes ignored).

    ``width_m`` is the greatest horizontal distance the bound is needed for (beyond
    it the last column is used: F grows with distance, so that is still a bound),
    doubled up to the grid's width until F at the surface reaches ``reach_s`` (s) when
    that is given; ``reflection_offset_m``, when given, is the greatest offset of the
    depth bound.
    """
    h = mesh.h
    active = mesh.node_active
    depth = mesh.node_depth
    rows = int(math.ceil(float(depth[active].max()) / h)) + _SKIN_ROWS + 2
    band = np.floor(depth / h + _SKIN_ROWS + 0.5).astype(int)
    least = np.full(rows + 2, np.inf)
    ok = active & (band >= 0) & (band < rows)
    np.minimum.at(least, band[ok] + 1, slowness[ok])
    # one band either side: a ray between nodes sees their interpolation
    s_lb = np.minimum(np.minimum(least[:-2], least[1:-1]), least[2:])
    # bands the line does not reach (above its skin, below its deepest node): the
    # nearest band's value (no path of the line gets there)
    known = np.flatnonzero(np.isfinite(s_lb))
    s_lb = s_lb[known[np.clip(np.searchsorted(known, np.arange(s_lb.size)), 0, known.size - 1)]]
    line_width = mesh.x1 - mesh.x0
    width_m = min(width_m, line_width)
    while True:
        field = _lower_field(s_lb, h, rows, width_m)
        if reach_s is None or field[_SKIN_ROWS, -1] >= reach_s or width_m >= line_width:
            break
        width_m = min(2.0 * width_m, line_width)
    vertical = np.zeros(rows)
    below = s_lb[_SKIN_ROWS:]
    vertical[_SKIN_ROWS + 1:] = np.cumsum(0.5 * (below[1:] + below[:-1])) * h
    bounds = Bounds(field, vertical, h, terrain_kappa(mesh))
    if reflection_offset_m is not None:
        bounds.reflection, bounds.reflection_rows, bounds.reflection_step = _reflection(
            field, int(math.ceil(reflection_offset_m / h)) + 1)
    return bounds


def _lower_field(s_lb, h, rows, width_m):
    """F(u, d), s, in the medium s_lb(d) (module docstring), ``width_m`` (m) wide."""
    cols = max(int(math.ceil(width_m / h)) + 2, 3)
    # ground at +h, so that its skin reaches the rows two spacings above depth 0
    grid = Mesh(x0=0.0, z_top=_SKIN_ROWS * h, cell=h, nx=cols - 1, nz=rows - 1, refine=1,
                terrain=flat_terrain(-h, cols * h, h))
    nodes = np.repeat(s_lb[:, None], cols, axis=1)
    field = solve_field(grid, nodes, 0.0, 0.0, order=2).time
    field = np.where(np.isfinite(field), field, np.inf)
    # F does not fall with distance (squeezing a path sideways shortens it): where the
    # solver's small wobbles say otherwise, keep the smaller value (still a bound)
    return np.minimum.accumulate(field[:, ::-1], axis=1)[:, ::-1]


def _reflection(field, n_offsets):
    """The depth bound on a coarser grid: (G, its rows of F, its offset step in nodes).

    G[i, k] is at most the least time of a surface-to-surface path of offset k q node
    spacings or more that touches the depth of F's row ``rows[i]`` or a deeper one: with
    F not falling with distance, a u in the bin [a, a + q] gives F(u) + F(X - u) >=
    F(a) + F(X - a - q), so G[k] = min over bins of F(j q) + F((k - 1 - j) q). Some
    80 depths and 150 offsets: a smaller G than on every node, still a bound.
    """
    n = min(n_offsets, field.shape[1])
    step_r = max(1, int(math.ceil((field.shape[0] - _SKIN_ROWS) / 80)))
    q = max(1, int(math.ceil(n / 150)))
    rows = np.arange(_SKIN_ROWS, field.shape[0], step_r)
    fq = field[rows][:, :n:q]
    g = np.empty_like(fq)
    g[:, 0] = 2.0 * fq[:, 0]
    for k in range(1, fq.shape[1]):
        j = np.arange((k - 1) // 2 + 1)
        g[:, k] = np.min(fq[:, j] + fq[:, k - 1 - j], axis=1)
    # from the ground down, a path that touches depth D touches every depth above it:
    # G does not fall with depth (where the solves wobble, the smaller value is kept)
    g = np.minimum.accumulate(g[::-1], axis=0)[::-1]
    return g, rows, q


def upper_times(mesh, slowness, origins, targets, which, block=4096):
    """Upper bounds of the first-arrival times, s: for each origin-target pair, the
    quickest of the paths straight down from the origin, along one row of forward nodes
    and straight up to the target (each is a path in the ground, so no first arrival
    is slower; trapezoid sums of the node slowness, s/m).

    ``origins`` (n, 2) and ``targets`` (m, 2) are (x, z) in m; ``which`` (m,) the origin
    of each target.
    """
    h = mesh.h
    active = mesh.node_active
    s = np.where(active, slowness, 0.0)
    ny, nx = s.shape
    down = np.zeros((ny, nx))
    down[1:] = np.cumsum(0.5 * (s[1:] + s[:-1]) * h, axis=0)
    along = np.zeros((ny, nx))
    along[:, 1:] = np.cumsum(0.5 * (s[:, 1:] + s[:, :-1]) * h, axis=1)
    gaps = np.cumsum(~active, axis=1)

    def node(xz):
        j = np.clip(np.rint((xz[:, 0] - mesh.x0) / h).astype(int), 0, nx - 1)
        i = np.clip(np.rint((mesh.z_top - xz[:, 1]) / h).astype(int), 0, ny - 1)
        # the highest active node at or below the point
        first = np.argmax(active, axis=0)[j]
        return np.maximum(i, first), j

    io, jo = node(np.asarray(origins, float)[which])
    it, jt = node(np.asarray(targets, float))
    out = np.empty(len(which))
    rows = np.arange(ny)[None, :]
    for k in range(0, len(which), block):
        sl = slice(k, k + block)
        a, b, c, d = io[sl], jo[sl], it[sl], jt[sl]
        time = (down[:, b].T - down[a, b][:, None]) + (down[:, d].T - down[c, d][:, None]) \
            + np.abs(along[:, d].T - along[:, b].T)
        usable = (rows >= np.maximum(a, c)[:, None]) & (gaps[:, d].T == gaps[:, b].T) & active[:, b].T
        out[sl] = np.min(np.where(usable, time, np.inf), axis=1)
    return out


def _surface_reach(bounds, need):
    """Least horizontal distance (m) at which F(u, 0) reaches ``need`` (s); inf where
    the bound's grid is not wide enough."""
    surface = bounds.field[_SKIN_ROWS]
    k = np.searchsorted(surface, need, side="left")
    return np.where(k < surface.size, k * bounds.h, np.inf)


def _depth_reach(bounds, offsets, need):
    """Least depth (m) at which a path of each offset (m) that touches it takes at
    least ``need`` (s) in the bound's medium; inf where the grid is not deep enough."""
    g = bounds.reflection
    c = np.clip(np.floor(np.asarray(offsets) / (bounds.h * bounds.reflection_step)).astype(int), 0, g.shape[1] - 1)
    column = g[:, c]  # (depths, targets), not falling downward
    reached = column >= need[None, :]
    first = bounds.reflection_rows[np.argmax(reached, axis=0)] - _SKIN_ROWS
    return np.where(reached.any(axis=0), first * bounds.h, np.inf)


def plan_windows(mesh, bounds, origins, targets, groups, upper):
    """The window of each origin before its solve (see the module docstring).

    ``origins`` (n, 2) and ``targets`` (m, 2) are (x, z) in m, ``groups[k]`` the target
    indices of origin k and ``upper`` (m,) upper bounds of their times, s
    (:func:`upper_times`). Margins get a cell of slack on every side.
    """
    ground = mesh.terrain.elevation
    targets = np.asarray(targets, float)
    windows = []
    for (xs, zs), g in zip(np.asarray(origins, float), groups):
        xr, zr = targets[g, 0], targets[g, 1]
        buried = bounds.vertical_time(ground(xs, True) - zs) + bounds.vertical_time(ground(xr, True) - zr)
        # kappa (F - buried) must exceed the time with the safety to spare
        need = upper[g] / ((1.0 - SAFETY) * bounds.kappa) + buried
        reach = _surface_reach(bounds, need)
        lo, hi = min(xs, xr.min()), max(xs, xr.max())
        left = np.max((reach - (xs - lo) - (xr - lo)) / 2.0, initial=0.0)
        right = np.max((reach - (hi - xs) - (hi - xr)) / 2.0, initial=0.0)
        j0 = int(math.floor((lo - left - mesh.x0) / mesh.cell)) - 1 if math.isfinite(left) else 0
        j1 = int(math.ceil((hi + right - mesh.x0) / mesh.cell)) + 1 if math.isfinite(right) else mesh.nx
        j0, j1 = max(j0, 0), min(j1, mesh.nx)
        nz = mesh.nz
        if bounds.reflection is not None:
            deepest = float(np.max(_depth_reach(bounds, np.abs(xr - xs), need), initial=0.0))
            if math.isfinite(deepest):
                cols = mesh.x[j0:j1]
                bottom = float(np.min(ground(cols, True))) - deepest
                nz = min(int(math.ceil((mesh.z_top - bottom) / mesh.cell)) + 1, mesh.nz)
        windows.append(Window(j0, j1 - j0, nz))
    return windows


def certify(window, line, time, targets, target_times, bounds):
    """The inner edges of a solved window that a first-arrival ray might cross.

    Parameters
    ----------
    window : Window
    line : Mesh
        The line's grid.
    time : ndarray
        The field solved on the window's forward nodes, s (NaN in the air).
    targets : ndarray (m, 2)
        Target (x, z), m; ``target_times`` their times from ``time``, s.
    bounds : Bounds

    Returns
    -------
    set of str
        Of "left", "right", "bottom": the edges where t_W(R) < t_W(B) + L(B, R) fails
        for some target R and inner-edge node B (module docstring); empty when the
        window holds every first-arrival ray.
    """
    ny, nx = time.shape
    edges = {}
    if window.j0 > 0:
        edges["left"] = (slice(None), slice(0, 1))
    if window.j1 < line.nx:
        edges["right"] = (slice(None), slice(nx - 1, nx))
    if window.nz < line.nz:
        edges["bottom"] = (slice(ny - 1, ny), slice(None))
    if not edges:
        return set()
    wmesh = window.mesh(line)
    xr, zr = targets[:, 0], targets[:, 1]
    dr = wmesh.terrain.elevation(xr, extrapolate=True) - zr
    failed = set()
    for name, (rows, cols) in edges.items():
        tb = time[rows, cols].ravel()
        xb = np.broadcast_to(wmesh.node_x[cols][None, :], time[rows, cols].shape).ravel()
        db = wmesh.node_depth[rows, cols].ravel()
        ok = np.isfinite(tb)
        if not ok.any():
            continue
        reach = tb[ok, None] + bounds.between(xb[ok, None] - xr[None, :], db[ok, None], dr[None, :])
        if np.any(target_times > (1.0 - SAFETY) * reach.min(axis=0)):
            failed.add(name)
    return failed


def widen(window, failed, line, lo_x, hi_x):
    """A larger window after :func:`certify` found ``failed`` edges: each failing side's
    margin beyond the span ``lo_x``..``hi_x`` (m) doubled plus a quarter of the span (at
    least four cells), the bottom taken to the grid's."""
    span = max(int(math.ceil((hi_x - lo_x) / line.cell)), 1)
    extra = max(span // 4, 4)
    j0, j1, nz = window.j0, window.j1, window.nz
    if "left" in failed:
        margin = max(int(math.floor((lo_x - line.x0) / line.cell)) - j0, 0)
        j0 = max(j0 - margin - extra, 0)
    if "right" in failed:
        margin = max(j1 - int(math.ceil((hi_x - line.x0) / line.cell)), 0)
        j1 = min(j1 + margin + extra, line.nx)
    if "bottom" in failed:
        nz = line.nz
    return Window(j0, j1 - j0, nz)
