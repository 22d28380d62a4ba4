"""Ray paths down the travel-time gradient and the sparse sensitivity (ray-length) matrix.

A first-arrival ray is a curve of steepest descent of the travel-time field T: in an
isotropic medium the ray direction is parallel to grad T (the eikonal equation
|grad T| = s; Cerveny 2001, Seismic Ray Theory, sec. 3.1). Starting at a geophone we
step against grad T on the forward grid until the ray is within the source's
exactly-timed start circle, and finish with a straight stretch into the source (inside
that circle the field is exactly r s, so the ray there is straight).

Sensitivity. To first order, a slowness perturbation ds changes a time by the integral
of ds along the unperturbed ray (Fermat's principle; Nolet 2008, A Breakdown of Seismic
Tomography, sec. 2.6). The fast-marching solver sees one slowness per forward node and
node slowness = P @ cell slowness (``Mesh.cell_to_node``). We therefore share each
piece of ray (at most ``PIECE`` node spacings long) among the four nodes around its
midpoint with bilinear weights, or give it to the nearest node (``booking``), and map
node lengths to model cells by P^T (done directly in cell space, ``_CellBooking``):
row p of the matrix holds the length (m) of ray p that each model cell's slowness
acts on, so

    dt_p = sum_c G[p, c] ds_c        (s, with ds in s/m).

Rays stay in the ground: a step that would leave it is put back on the surface, which
is where a direct wave along the ground runs anyway.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp

__all__ = ["Rays", "time_gradient", "trace_rays", "trace_many", "DEFAULT_STEP", "DEFAULT_BOOKING", "BOOKINGS"]

#: Ray step, in forward node spacings; None: one model cell (``mesh.refine`` node
#: spacings). Each step is booked in pieces of at most ``PIECE`` node spacings, so the step
#: only sets how closely the ray follows the gradient (one cell: within a quarter of a
#: cell of the exact arcs in tests/test_rays.py, and within 5 % of finite differences).
DEFAULT_STEP = None

#: How a ray piece's length is shared among forward nodes: "bilinear" over the four
#: around it (default; matches the solver's interpolation between nodes) or the
#: "nearest" node. Against finite differences of the forward solver
#: (tests/test_rays.py, relative L2 error over all picks): for a 1 % block in the
#: cells just above a sharp interface, bilinear 4.9 % and nearest 4.3 % with 2 node
#: intervals per cell, 4.0 % and 2.6 % with 3; elsewhere both within 2 %. Bilinear is
#: the default for the inversion it feeds: over the 12 recovery runs of
#: tests/test_inversion.py (seeds 1-6) all converge with it, one stalls at chi2 1.23
#: with nearest, and its worst trough column is 11.0 % against 13.6 %. Limitation
#: (measured, not tested): where a sharp 600/1800 m/s refractor cuts across cells as a
#: staircase (dipping, a trough, or parallel to uneven ground), 0.1 % changes in the
#: 2 m of overburden cells just above it are over-predicted by 10-40 % with 3 intervals
#: per cell (10-20 % with 4, up to 85 % with 2), by 5-10 % in the cells astride it and
#: 2-8 % below it, with either booking: the traced ray hugs the staircase partly on its
#: slow side, where the solver's head wave does not run. The tomography's smooth
#: models are not sharp like that.
DEFAULT_BOOKING = "bilinear"
#: The booking choices.
BOOKINGS = ("bilinear", "nearest")


@dataclass
class Rays:
    """Traced rays.

    Attributes
    ----------
    matrix : scipy.sparse.csr_matrix, shape (n_rays, n_cells)
        Path length of each ray in each model cell, m (cells flattened row-major over
        the mesh's (nz, nx)).
    length : ndarray (n_rays,)
        Total path length, m.
    paths : list of ndarray (n_k, 2) or None
        Ray points (x, z) in m from the geophone to the source, when asked for.
    unfinished : int
        Rays that did not reach the source within the step limit and were closed with a
        straight stretch (normally 0).
    """

    matrix: sp.csr_matrix
    length: np.ndarray
    paths: list | None
    unfinished: int

    def coverage(self, mesh):
        """Total ray length per model cell, m, shape (nz, nx) (0 where no ray passes)."""
        return np.asarray(self.matrix.sum(axis=0)).reshape(mesh.shape)


def time_gradient(mesh, time):
    """Gradient of a travel-time field on the forward nodes, s/m: (dT/dx, dT/dz).

    ``z`` is elevation (up positive). Each column is first continued above its highest
    solved node by linear extrapolation of the two highest solved values, so that
    central differences there equal the one-sided difference and a ray can be
    interpolated right up to the ground surface; then second-order central differences
    (``numpy.gradient``; one-sided at the grid edges).
    """
    h = mesh.h
    t = np.asarray(time, float)
    solved = np.isfinite(t)
    ny, nx = t.shape
    first = np.argmax(solved, axis=0)
    cols = np.arange(nx)
    t_top = t[first, cols]
    t_next = t[np.minimum(first + 1, ny - 1), cols]
    rows = np.arange(ny)[:, None]
    filled = np.where(rows < first[None, :],
                      t_top[None, :] + (t_top - t_next)[None, :] * (first[None, :] - rows), t)
    if not np.all(np.isfinite(filled)):
        # unsolved nodes inside the grid (not expected): the latest solved time
        filled = np.where(np.isfinite(filled), filled, np.nanmax(t))
    d_row, d_col = np.gradient(filled, h)
    return d_col, -d_row  # rows go down: dT/dz (elevation) = -dT/drow


def trace_rays(mesh, field, x, z, keep_paths=False, step=DEFAULT_STEP, booking=DEFAULT_BOOKING):
    """Trace rays from points (``x``, ``z``), m, to the origin of one travel-time field.

    Parameters
    ----------
    mesh : Mesh
    field : tomo.forward.FieldResult
        Travel times from the source (``field.source``) on the forward nodes.
    x, z : array_like
        Ray start points (geophones), m; on or below the ground.
    keep_paths : bool
        Return the ray points as well (for plots and tests).
    step : float or None
        Step length in forward node spacings (None: one model cell).
    booking : {"nearest", "bilinear"}
        How ray lengths are shared among forward nodes (see :data:`DEFAULT_BOOKING`).

    Returns
    -------
    Rays
    """
    gx, gz = time_gradient(mesh, field.time)
    x = np.atleast_1d(np.asarray(x, float))
    z = np.atleast_1d(np.asarray(z, float))
    return trace_many(mesh, (gx + 1j * gz)[None], np.array([field.source]), np.array([field.radius]),
                      np.column_stack([x, z]), np.zeros(x.size, int), keep_paths=keep_paths, step=step,
                      booking=booking)


def trace_many(mesh, grad, sources, radii, starts, which, keep_paths=False, step=DEFAULT_STEP,
               ground_only=False, booking=DEFAULT_BOOKING, columns=None):
    """Trace rays through several travel-time fields at once (vectorised over all rays).

    Parameters
    ----------
    mesh : Mesh
        The grid the rays are booked on (matrix columns are its cells).
    grad : complex ndarray (n_fields, ny, nx), or list of complex 2-D arrays
        Time gradients dT/dx + i dT/dz from :func:`time_gradient`, s/m (one complex
        array halves the gathers per step; single precision is plenty for a ray
        direction): on ``mesh``'s forward nodes, or each on a window of them (a list,
        with ``columns``).
    sources : ndarray (n_fields, 2)
        Field origins (x, z), m.
    radii : ndarray (n_fields,)
        Radius of each field's exactly-timed start circle, m; inside it a ray goes
        straight to the origin.
    starts : ndarray (n_rays, 2)
        Ray start points (x, z), m.
    which : ndarray of int (n_rays,)
        Field of each ray.
    booking : {"nearest", "bilinear"}
        How ray lengths are shared among forward nodes (see :data:`DEFAULT_BOOKING`).
    ground_only : bool
        Matrix columns for the ground cells only (in row-major order of
        ``mesh.ground``, as the inversion's unknowns) instead of all cells.
    columns : sequence of int, optional
        For a list ``grad``: the forward-node column of ``mesh`` where each field's
        window begins (windows start at the grid's top row; :meth:`Mesh.window`). A ray
        stays in its field's window, as it stays in the grid.

    Returns
    -------
    Rays
        Rows in the order of ``starts``.
    """
    step = float(mesh.refine if step is None else step)
    steps = _march(mesh, _Fields(mesh, grad, columns), sources, radii, starts, which, step * mesh.h, keep_paths)
    if ground_only:
        cols = np.full(mesh.ground.size, -1)
        cols[mesh.ground.ravel()] = np.arange(int(mesh.ground.sum()))
    else:
        cols = np.arange(mesh.ground.size)
    booker = _CellBooking(mesh, booking, cols)
    n = starts.shape[0]
    length = _book(booker, steps, step, n)
    out_paths = [np.array(q) for q in steps.paths] if keep_paths else None
    return Rays(booker.matrix(n), length, out_paths, steps.unfinished)


@dataclass
class _Steps:
    """What marching the rays made: every step (ray, from, to), the straight last
    stretches (ray, midpoint, length), the paths when kept, and the unfinished count."""

    seg_ray: list
    seg_from: list
    seg_to: list
    straight_ray: list
    straight_mid: list
    straight_len: list
    paths: list | None
    unfinished: int = 0


class _Fields:
    """Gradient fields for the ray march, each on a window of ``mesh``'s forward nodes
    (the whole of them for a 3-D array): one flat array, and per field where its nodes
    begin in it, its node rows and columns, and its window's edges (m)."""

    def __init__(self, mesh, grad, columns=None):
        if isinstance(grad, np.ndarray) and grad.ndim == 3:
            n, ny, nx = grad.shape
            self.flat = grad.reshape(-1)
            self.base = np.arange(n) * (ny * nx)
            self.ny, self.nx = np.full(n, ny), np.full(n, nx)
            col0 = np.zeros(n, int)
        else:
            shapes = np.array([g.shape for g in grad], int).reshape(-1, 2)
            self.flat = np.concatenate([np.ravel(g) for g in grad]) if len(grad) else np.zeros(0, np.complex64)
            sizes = shapes[:, 0] * shapes[:, 1]
            self.base = np.concatenate([[0], np.cumsum(sizes)[:-1]]).astype(int)
            self.ny, self.nx = shapes[:, 0], shapes[:, 1]
            col0 = np.zeros(len(grad), int) if columns is None else np.asarray(columns, int)
        h = mesh.h
        self.x_lo = mesh.x0 + col0 * h
        self.x_hi = self.x_lo + (self.nx - 1) * h
        self.z_lo = mesh.z_top - (self.ny - 1) * h


def _march(mesh, fields, sources, radii, starts, which, ds, keep_paths):
    """Step every ray down its field's time gradient by ``ds`` (m) until it is within its
    start circle (or a step) of the source; the rays still travelling are kept compact,
    each within its field's window."""
    h = mesh.h
    n = starts.shape[0]
    which = np.asarray(which, int)
    pos = np.array(starts, float)
    src = np.asarray(sources, float)[which]
    # finish inside the exactly-timed circle, or within a step of the source
    finish = np.maximum(np.asarray(radii, float)[which], ds)
    terrain, top, flat_g = mesh.terrain, mesh.z_top, fields.flat
    dist0 = np.hypot(pos[:, 0] - src[:, 0], pos[:, 1] - src[:, 1])
    # a ray is rarely more than about twice as long as the straight line (common practice)
    max_steps = int(np.ceil(3.0 * (dist0.max(initial=0.0) + ds) / ds)) + 20
    out = _Steps([], [], [], [], [], [], [[q.copy()] for q in pos] if keep_paths else None)
    ids, p, s, fin = np.arange(n), pos.copy(), src.copy(), finish.copy()
    base, nx, ny = fields.base[which], fields.nx[which], fields.ny[which]
    x_lo, x_hi, z_lo = fields.x_lo[which], fields.x_hi[which], fields.z_lo[which]
    for count in range(max_steps + 1):
        if ids.size == 0:
            break
        done = np.hypot(p[:, 0] - s[:, 0], p[:, 1] - s[:, 1]) <= fin
        if count == max_steps:
            out.unfinished = int((~done).sum())
            done[:] = True
        if done.any():
            _straight(p[done], s[done], ids[done], h, out.straight_ray, out.straight_mid, out.straight_len)
            if keep_paths:
                for r, q in zip(ids[done], s[done]):
                    out.paths[r].append(q.copy())
            keep = ~done
            ids, p, s, fin, base, nx, ny = ids[keep], p[keep], s[keep], fin[keep], base[keep], nx[keep], ny[keep]
            x_lo, x_hi, z_lo = x_lo[keep], x_hi[keep], z_lo[keep]
            if ids.size == 0:
                break
        step_dir = _direction(flat_g, base, p, s, x_lo, top, h, nx, ny)
        new_x = np.minimum(np.maximum(p[:, 0] + ds * step_dir.real, x_lo), x_hi)
        new_z = np.minimum(np.maximum(p[:, 1] + ds * step_dir.imag, z_lo), terrain.elevation(new_x, extrapolate=True))
        new = np.column_stack([new_x, new_z])
        out.seg_ray.append(ids)
        out.seg_from.append(p)
        out.seg_to.append(new)
        p = new
        if keep_paths:
            for r, q in zip(ids, new):
                out.paths[r].append(q)
    return out


def _direction(flat_g, base, p, s, x_lo, top, h, nx, ny):
    """Unit step directions (complex: x + i z) down the gradient at the points ``p``,
    bilinear over the four surrounding nodes of each ray's field."""
    fj = (p[:, 0] - x_lo) / h
    fi = (top - p[:, 1]) / h
    j = np.minimum(np.maximum(fj.astype(int), 0), nx - 2)  # points are inside: floor
    i = np.minimum(np.maximum(fi.astype(int), 0), ny - 2)
    tx = np.minimum(np.maximum(fj - j, 0.0), 1.0)
    tz = np.minimum(np.maximum(fi - i, 0.0), 1.0)
    idx = base + i * nx + j
    g = ((1 - tz) * ((1 - tx) * flat_g[idx] + tx * flat_g[idx + 1])
         + tz * ((1 - tx) * flat_g[idx + nx] + tx * flat_g[idx + nx + 1]))
    norm = np.abs(g)
    good = norm > 0
    if good.all():
        return -g / norm
    # no usable gradient (should not happen in the ground): head for the source
    toward = (s[:, 0] - p[:, 0]) + 1j * (s[:, 1] - p[:, 1])
    return np.where(good, -g / np.where(good, norm, 1.0), toward / np.maximum(np.abs(toward), 1e-12))


def _book(booker, steps, step, n):
    """Book every step's length into the cells (in pieces no longer than PIECE node
    spacings, at their midpoints, ray by ray in path order so that consecutive pieces in
    one cell merge cheaply, a block of steps at a time); returns each ray's length, m."""
    rows_s = np.concatenate(steps.seg_ray) if steps.seg_ray else np.zeros(0, int)
    order = np.argsort(rows_s, kind="stable")
    a = np.concatenate(steps.seg_from) if steps.seg_from else np.zeros((0, 2))
    b = np.concatenate(steps.seg_to) if steps.seg_to else np.zeros((0, 2))
    # the per-step pieces are copied now: free them (a long line's steps are large)
    steps.seg_from.clear()
    steps.seg_to.clear()
    sub = max(int(np.ceil(step / PIECE - 1e-9)), 1)
    frac = (np.arange(sub) + 0.5) / sub
    length = np.zeros(n)
    block = max(_BLOCK // sub, 1)
    for k in range(0, order.size, block):
        take = order[k:k + block]
        a_k, b_k, r_k = a[take], b[take], rows_s[take]
        mids = (a_k[:, None, :] + frac[None, :, None] * (b_k - a_k)[:, None, :]).reshape(-1, 2)
        lens = np.hypot(b_k[:, 0] - a_k[:, 0], b_k[:, 1] - a_k[:, 1]) / sub
        booker.add(np.repeat(r_k, sub), mids, np.repeat(lens, sub))
        length += np.bincount(r_k, weights=lens * sub, minlength=n)
    if steps.straight_ray:
        rows, lens = np.concatenate(steps.straight_ray), np.concatenate(steps.straight_len)
        booker.add(rows, np.concatenate(steps.straight_mid), lens)
        length += np.bincount(rows, weights=lens, minlength=n)
    return length


def _straight(p, s, ray_ids, ds, out_ray, out_mid, out_len):
    """Book the straight last stretch from points ``p`` to sources ``s`` in pieces <= ds."""
    d = np.hypot(s[:, 0] - p[:, 0], s[:, 1] - p[:, 1])
    pieces = np.maximum(np.ceil(d / ds).astype(int), 1)
    reps = np.repeat(np.arange(p.shape[0]), pieces)
    k = np.arange(reps.size) - np.repeat(np.cumsum(pieces) - pieces, pieces)
    frac = (k + 0.5) / pieces[reps]
    mids = p[reps] + frac[:, None] * (s[reps] - p[reps])
    out_ray.append(ray_ids[reps])
    out_mid.append(mids)
    out_len.append(d[reps] / pieces[reps])


def _axis_weights(f, n_cells, r, nearest):
    """Weights of the model cells along one axis for points at node coordinate ``f``.

    The point lies between nodes j0 and j0 + 1 (fraction t); node j0 + t contributes
    bilinearly (or the nearer one fully), and a node on a cell edge passes its share on
    half to each of the two cells it touches, as ``Mesh.cell_to_node`` averages them.
    Returns the cell c containing the point and the weights of cells c - 1 and c + 1
    (c gets the rest); neighbours outside the grid give their share to c.
    """
    n_nodes = n_cells * r + 1
    c = np.clip(np.floor(f / r).astype(int), 0, n_cells - 1)
    j0 = np.clip(np.floor(f).astype(int), 0, n_nodes - 2)
    t = np.clip(f - j0, 0.0, 1.0)
    if nearest:
        t = (t >= 0.5).astype(float)
    left = np.where((j0 == r * c) & (c > 0), 0.5 * (1.0 - t), 0.0)
    right = np.where((j0 + 1 == r * (c + 1)) & (c < n_cells - 1), 0.5 * t, 0.0)
    return c, left, right


#: Longest piece of ray booked at one midpoint, node spacings: 3, so that with the
#: default step (one model cell) and grid (3 node intervals per cell) each step is one
#: piece. Against finite differences (tests/test_rays.py, bilinear booking) the worst
#: case is 4.0 % with 3 intervals per cell and 4.9 % with 2, against 3.5 % and 4.8 %
#: with pieces of at most one node spacing, and the tracing is about 40 % faster than
#: with pieces of 1.5 spacings. All 12 recovery runs of tests/test_inversion.py over
#: seeds 1-6 converge with it (chi2 0.93-1.10).
PIECE = 3.0

#: Ray pieces booked at a time (bounds the temporary arrays to some tens of MB).
_BLOCK = 300_000


class _CellBooking:
    """Books ray pieces (midpoints, m; lengths, m) to model cells, block by block.

    Equivalent to booking each piece to the forward nodes around its midpoint (the
    four around it with bilinear weights, or the nearest one) and mapping node lengths
    to cells with P^T (P = ``Mesh.cell_to_node``), but done per axis in cell space:
    the node-to-cell averaging is separable, so a piece touches at most four cells
    (nine when ``refine`` is 1) and no node-sized matrix is built. Near the ground
    surface, shares falling on air cells go to the ground cells among them, and a piece
    with none (just under the ground in an air cell's square) goes to the highest ground
    cell of its column, as P maps such skin nodes.

    ``columns`` maps flattened cell indices to matrix columns (-1: not a column).
    """

    def __init__(self, mesh, booking, columns):
        self.mesh = mesh
        self.nearest = booking == "nearest"
        self.columns = columns
        ground = mesh.ground
        nz, nx = mesh.shape
        self.top_ground = np.argmax(ground, axis=0)
        self.flat_ground = ground.ravel()
        # cells whose eight neighbours are ground too: no air share can arise there
        padded = np.pad(ground, 1, constant_values=True)
        inner = np.ones_like(ground)
        for di in range(3):
            for dj in range(3):
                inner &= padded[di:di + nz, dj:dj + nx]
        self.flat_inner = inner.ravel()
        self.n_cols = int(columns.max()) + 1 if columns.size else 0
        self.out_r, self.out_c, self.out_w = [], [], []

    def _axis(self, f, n_cells):
        r = self.mesh.refine
        c, left, right = _axis_weights(f, n_cells, r, self.nearest)
        if r == 1:
            return c, [(0, 1.0 - left - right), (-1, left), (1, right)]
        # with two or more node intervals per cell at most one neighbour has a share
        return c, [(0, 1.0 - left - right), (np.where(left > 0, -1, 1), left + right)]

    def add(self, rows, mids, lens):
        """Book pieces given ray by ray in path order (runs in one cell are summed)."""
        mesh = self.mesh
        nz, nx = mesh.shape
        for s in range(0, rows.size, _BLOCK):
            sl = slice(s, s + _BLOCK)
            cx, ax = self._axis((mids[sl, 0] - mesh.x0) / mesh.h, nx)
            cz, az = self._axis((mesh.z_top - mids[sl, 1]) / mesh.h, nz)
            main = cz * nx + cx
            cells, weights = [], []
            for oz, wz in az:
                for ox, wx in ax:
                    cells.append(main + oz * nx + ox)
                    weights.append(wz * wx)
            edge = np.flatnonzero(~self.flat_inner[main])
            if edge.size:
                # near the surface: drop the air shares, renormalise over the ground ones
                flat_ground = self.flat_ground
                sub = [flat_ground[np.clip(c[edge], 0, flat_ground.size - 1)] * w[edge]
                       for c, w in zip(cells, weights)]
                total = np.sum(sub, axis=0)
                lonely = total <= 0
                sub[0] = np.where(lonely, 1.0, sub[0])
                first = cells[0].copy()
                first[edge] = np.where(lonely, self.top_ground[cx[edge]] * nx + cx[edge], first[edge])
                cells[0] = first
                total = np.where(lonely, 1.0, total)
                for w, w_edge in zip(weights, sub):
                    w[edge] = w_edge / total
            rr = rows[sl]
            ll = lens[sl]
            for cell, w in zip(cells, weights):
                keep = np.flatnonzero(w > 0)
                if keep.size == 0:
                    continue
                if keep.size == w.size:  # the cell holding the piece: always a share
                    ray, col, val = rr, cell, w * ll
                else:
                    ray, col, val = rr[keep], cell[keep], w[keep] * ll[keep]
                # add up runs of pieces in the same cell here, which leaves the sparse
                # constructor a fraction of the entries to sort
                new = np.empty(ray.size, bool)
                new[0] = True
                np.not_equal(col[1:], col[:-1], out=new[1:])
                new[1:] |= ray[1:] != ray[:-1]
                first = np.flatnonzero(new)
                self.out_r.append(ray[first])
                self.out_c.append(self.columns[col[first]])
                self.out_w.append(np.add.reduceat(val, first))

    def matrix(self, n_rays):
        """The booked lengths as a CSR matrix (n_rays, n_cols), m."""
        if not self.out_w:
            return sp.csr_matrix((n_rays, self.n_cols))
        data = np.concatenate(self.out_w)
        cols = np.concatenate(self.out_c)
        rows = np.concatenate(self.out_r)
        return sp.csr_matrix((data, (rows, cols)), shape=(n_rays, self.n_cols))
