"""One forward pass: computed times for every pick and, when asked, the ray matrix (the
sensitivities of the times to the cell slownesses).

Fields are solved per origin (shot, or geophone when there are fewer geophones and
reciprocity is on: the time from A to B equals that from B to A in an isotropic
medium), each on its window of the grid (:mod:`tomo.tomography.windows`: the columns
its rays can use and as deep as they can turn, proved by a bound after the solve; a
window that fails the proof is widened and solved again), so a pass costs in
proportion to the number of origins, not to the square of the line's length. Origins
go in chunks of neighbours (their windows overlap, so a task carries one slice of the
slowness for all of them) over a :class:`~tomo.tomography.workers.Workers` pool. A
trial model of the line search needs only its times; its rays are traced later, from
the time fields kept with the pass (single precision, on their windows), only if the
line search keeps the model (:func:`trace_pass`). Rays are traced on the windows and
booked on the line's cells, so the matrix has the line's columns. Chunks depend only
on the origins and their windows and each task carries all its inputs, so results are
the same for any number of workers and nothing is shared between passes or inversions.
"""

from __future__ import annotations

import math
import time as _time
from dataclasses import dataclass, field

import numpy as np
import scipy.sparse as sp

from ..core.errors import SolverError
from .fields import field_origins, node_speed, sample_field, solve_field
from .rays import time_gradient, trace_many
from .settings import InversionSettings
from .windows import SAFETY, Window, certify, line_bounds, plan_windows, terrain_kappa, upper_times, widen
from .workers import Workers

__all__ = ["PassResult", "forward_pass", "solve_pass", "trace_pass", "plan_pass", "CHUNK_NODES", "MIN_CHUNKS"]

#: Most forward nodes of the windows of one task (a worker holds their fields and
#: gradients, 12 bytes a node: about 25 MB).
CHUNK_NODES = 2_000_000
#: Least number of tasks a pass is cut into when it has that many origins (enough to
#: keep a few workers busy; fixed, so that results do not depend on the worker count).
MIN_CHUNKS = 8


@dataclass
class PassResult:
    """Computed times (s), the ray matrix (picks x ground cells, m) and timings of one pass.

    ``matrix`` is None while the rays are pending (``forward_pass(..., rays=False)``);
    :func:`trace_pass` traces them from the kept time fields (``pending``). Times are
    CPU seconds summed over the workers (``forward_s``, ``rays_s``) and wall seconds.
    ``nodes`` counts the forward nodes solved (over all windows), ``widened`` the
    windows solved again after failing their proof.
    """

    time_s: np.ndarray
    matrix: sp.csr_matrix | None
    forward_s: float
    rays_s: float
    wall_s: float
    fallbacks: list
    unfinished: int
    pending: list | None = field(default=None, repr=False)
    nodes: int = 0
    widened: int = 0
    windows: list = field(default_factory=list, repr=False)


@dataclass(frozen=True)
class _Options:
    order: int
    source_radius: float
    ray_step: float | None
    ray_booking: str


def _chunks(order, sizes):
    """Neighbouring origins (``order``: sorted along the line) in runs of at most
    CHUNK_NODES forward nodes, and at least MIN_CHUNKS runs when there are as many
    origins, balanced by nodes."""
    total = float(np.sum(sizes))
    n = min(len(order), max(MIN_CHUNKS, int(math.ceil(total / CHUNK_NODES))))
    edges = np.searchsorted(np.cumsum(np.asarray(sizes, float)[order]), total * np.arange(1, n) / n)
    return [c.tolist() for c in np.split(np.asarray(order), edges) if c.size]


def _task_input(mesh, slowness, windows, chunk):
    """The slice of the line's node slowness that covers a chunk's windows: (union
    window, slowness on its nodes, each window's model-column offset in it)."""
    j0 = min(windows[k].j0 for k in chunk)
    j1 = max(windows[k].j1 for k in chunk)
    nz = max(windows[k].nz for k in chunk)
    union = Window(j0, j1 - j0, nz)
    rows, cols = union.nodes(mesh)
    return union, np.ascontiguousarray(slowness[rows, cols])


def _solve_chunk(task):
    """Worker: each origin's field on its window, proved or not; times at its targets;
    rays now (``rays``) or later (the fields kept, single precision)."""
    mesh, union, slowness, origins, windows, targets, bounds, rays, opts = task
    t0 = _time.perf_counter()
    out = {"times": [], "failed": [], "fallbacks": [], "fields": [], "sources": [], "radii": []}
    for (x, z), w, xz in zip(origins, windows, targets):
        wmesh = w.mesh(mesh)
        rows, cols = w.nodes(mesh)
        c0 = (w.j0 - union.j0) * mesh.refine
        s = slowness[rows, c0:c0 + cols.stop - cols.start]
        f = solve_field(wmesh, s, x, z, order=opts.order, source_radius=opts.source_radius,
                        speed=node_speed(wmesh, s))
        t = sample_field(wmesh, f, xz[:, 0], xz[:, 1])
        failed = certify(w, mesh, f.time, xz, t, bounds) if bounds is not None else set()
        out["times"].append(t)
        out["failed"].append(failed)
        if f.fallback:
            out["fallbacks"].append(f.source)
        out["fields"].append(f.time.astype(np.float32) if not failed else None)
        out["sources"].append(f.source)
        out["radii"].append(f.radius)
    out["forward_s"] = _time.perf_counter() - t0
    keep = [k for k, failed in enumerate(out["failed"]) if not failed]
    traced = {"fields": [out["fields"][k] for k in keep], "sources": np.array([out["sources"][k] for k in keep]),
              "radii": np.array([out["radii"][k] for k in keep]), "targets": [targets[k] for k in keep],
              "columns": [windows[k].j0 * mesh.refine for k in keep], "kept": keep}
    del out["fields"]
    if rays and keep:
        out["matrix"], out["rays_s"], out["unfinished"] = _trace(mesh, traced, opts)
    else:
        out["traced"] = traced if keep else None
    return out


def _trace(mesh, traced, opts):
    t0 = _time.perf_counter()
    grads = []
    for time in traced["fields"]:
        gx, gz = time_gradient(mesh, time)
        grads.append((gx + 1j * gz).astype(np.complex64))
    starts = np.concatenate(traced["targets"])
    which = np.concatenate([np.full(len(t), k) for k, t in enumerate(traced["targets"])])
    out = trace_many(mesh, grads, traced["sources"], traced["radii"], starts, which, step=opts.ray_step,
                     ground_only=True, booking=opts.ray_booking, columns=traced["columns"])
    return out.matrix, _time.perf_counter() - t0, out.unfinished


def _trace_chunk(task):
    """Worker: the rays of one chunk from its kept time fields."""
    mesh, traced, opts = task
    return _trace(mesh, traced, opts)


def plan_pass(mesh, slowness, origins, targets, origin_index, groups, windowed=True):
    """The bounds of this model and each origin's first window (the whole grid when
    ``windowed`` is off)."""
    whole = Window(0, mesh.nx, mesh.nz)
    if not windowed:
        return None, [whole] * len(origins)
    offsets = np.abs(targets[:, 0] - origins[origin_index, 0])
    longest = float(offsets.max(initial=0.0))
    upper = upper_times(mesh, slowness, origins, targets, origin_index)
    # wide enough for the bound to pass the slowest time (no margin needs more)
    reach = 1.1 * float(upper.max(initial=0.0)) / ((1.0 - SAFETY) * terrain_kappa(mesh))
    bounds = line_bounds(mesh, slowness, 2.0 * longest + 10.0 * mesh.cell, reflection_offset_m=longest + mesh.cell,
                         reach_s=reach)
    return bounds, plan_windows(mesh, bounds, origins, targets, groups, upper)


def solve_pass(mesh, slowness, picks, settings=None, workers=None, rays=True, progress=None):
    """Computed times and (with ``rays``) the ray matrix for a node slowness model.

    Parameters
    ----------
    mesh : Mesh
    slowness : ndarray, shape ``mesh.node_shape``
        Slowness on the forward nodes, s/m (inactive nodes ignored).
    picks : Picks
    settings : InversionSettings, optional
        ``order``, ``source_radius``, ``ray_step``, ``ray_booking``, ``reciprocity``,
        ``windows`` (default: the defaults).
    workers : Workers, optional
        Pool to use (default: this process alone).
    rays : bool
        Trace the rays now; otherwise keep the time fields for :func:`trace_pass`.
    progress : callable, optional
        ``progress(done, total)`` as the fields are solved (origins).

    Returns
    -------
    PassResult
        ``matrix`` has one row per pick and one column per ground cell (row-major order
        of ``mesh.ground``): path length, m.
    """
    settings = settings or InversionSettings()
    workers = workers or Workers(1)
    t_start = _time.perf_counter()
    origins, origin_index, targets = field_origins(picks, settings.reciprocity)
    groups = [np.flatnonzero(origin_index == k) for k in range(len(origins))]
    bounds, windows = plan_pass(mesh, slowness, origins, targets, origin_index, groups, settings.windows)
    opts = _Options(settings.order, settings.source_radius, settings.ray_step, settings.ray_booking)
    along = np.lexsort((origins[:, 1], origins[:, 0]))
    times = np.full(len(picks), np.nan)
    result = PassResult(times, None, 0.0, 0.0, 0.0, [], 0, pending=[] if not rays else None)
    parts, todo, done, total = [], along.tolist(), 0, len(origins)
    while todo:
        sizes = np.zeros(len(origins))
        sizes[todo] = [_nodes(mesh, windows[k]) for k in todo]
        chunks = _chunks(np.asarray(todo), sizes)
        todo = []
        tasks = [(mesh,) + _task_input(mesh, slowness, windows, c)
                 + (origins[c], [windows[k] for k in c], [targets[groups[k]] for k in c], bounds, rays, opts)
                 for c in chunks]
        for c, part in zip(chunks, workers.imap(_solve_chunk, tasks)):
            failed = _take(result, mesh, c, part, groups, windows, parts)
            for k, edges in failed:
                lo = min(origins[k, 0], targets[groups[k], 0].min())
                hi = max(origins[k, 0], targets[groups[k], 0].max())
                windows[k] = widen(windows[k], edges, mesh, lo, hi)
                todo.append(k)
            done += len(c) - len(failed)
            total += len(failed)
            if progress is not None:
                progress(done, total)
    if not np.all(np.isfinite(times)):
        raise SolverError("some stations were not reached by the wavefront (isolated by the air mask?)")
    if rays:
        result.matrix = _assemble([p[0] for p in parts], [p[1] for p in parts], len(picks))
    result.windows = windows
    result.wall_s = _time.perf_counter() - t_start
    return result


def _nodes(mesh, window):
    return (window.nz * mesh.refine + 1) * (window.nx * mesh.refine + 1)


def _take(result, mesh, chunk, part, groups, windows, parts):
    """Book one chunk's results into ``result``; returns the (origin, failed edges) to
    solve again on a wider window."""
    failed = [(k, edges) for k, edges in zip(chunk, part["failed"]) if edges]
    for k, t, edges in zip(chunk, part["times"], part["failed"]):
        if not edges:
            result.time_s[groups[k]] = t
            result.nodes += _nodes(mesh, windows[k])
    result.widened += len(failed)
    result.forward_s += part["forward_s"]
    result.fallbacks += part["fallbacks"]
    kept = [chunk[k] for k in range(len(chunk)) if not part["failed"][k]]
    if kept:
        rows = np.concatenate([groups[k] for k in kept])
        if "matrix" in part:
            parts.append((rows, part["matrix"]))
            result.rays_s += part["rays_s"]
            result.unfinished += part["unfinished"]
        else:
            result.pending.append((rows, part["traced"]))
    return failed


def forward_pass(mesh, cell_slowness, picks, settings=None, workers=None, rays=True, progress=None):
    """:func:`solve_pass` for a cell slowness model (s/m on ``mesh``'s cells; air ignored)."""
    slowness = mesh.cells_to_nodes(np.where(mesh.ground, cell_slowness, 0.0))
    return solve_pass(mesh, slowness, picks, settings, workers, rays, progress)


def _assemble(rows, matrices, n_picks):
    """Stack the chunks' ray rows and put them back in pick order."""
    perm = np.concatenate(rows)
    inverse = np.empty(n_picks, int)
    inverse[perm] = np.arange(n_picks)
    return sp.vstack(matrices).tocsr()[inverse]


def trace_pass(mesh, result, settings=None, workers=None, progress=None):
    """Trace the pending rays of a ``forward_pass(..., rays=False)`` result in place.

    Sets ``result.matrix``, adds the tracing time to ``rays_s`` and ``wall_s``, and
    returns the seconds (CPU summed over workers, wall) this call took; ``progress``
    is called as ``progress(done, total)`` (origins) as chunks finish.
    """
    if result.pending is None:
        return 0.0, 0.0
    settings = settings or InversionSettings()
    workers = workers or Workers(1)
    t_start = _time.perf_counter()
    opts = _Options(settings.order, settings.source_radius, settings.ray_step, settings.ray_booking)
    total = sum(len(traced["kept"]) for _, traced in result.pending)
    matrices, done, unfinished, rays_s = [], 0, 0, 0.0
    tasks = [(mesh, traced, opts) for _, traced in result.pending]
    for (_, traced), part in zip(result.pending, workers.imap(_trace_chunk, tasks)):
        matrices.append(part[0])
        rays_s += part[1]
        unfinished += part[2]
        done += len(traced["kept"])
        if progress is not None:
            progress(done, total)
    result.matrix = _assemble([r for r, _ in result.pending], matrices, len(result.time_s))
    result.unfinished = unfinished
    result.pending = None
    wall_s = _time.perf_counter() - t_start
    result.rays_s += rays_s
    result.wall_s += wall_s
    return rays_s, wall_s
