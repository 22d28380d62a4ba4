"""One forward pass of the inversion: computed times for every pick and, when asked, the
ray matrix (the sensitivities of the times to the cell slownesses).

Fields are solved per origin (shot, or geophone when there are fewer geophones and
reciprocity is on: the time from A to B equals that from B to A in an isotropic medium),
in chunks of origins spread over a :class:`~tomo.tomography.workers.Workers` pool. A
trial model of the line search needs only its times; its rays are traced later, from
the time fields kept with the pass, only if the line search keeps the model
(:func:`trace_pass`). Each task carries all its inputs, so results are the same for any
number of workers and no state is shared between passes or inversions.
"""

from __future__ import annotations

import time as _time
from dataclasses import dataclass, field

import numpy as np
import scipy.sparse as sp

from ..core.errors import SolverError
from .forward import field_origins, node_speed, sample_field, solve_field
from .rays import time_gradient, trace_many
from .settings import InversionSettings
from .workers import Workers

__all__ = ["PassResult", "forward_pass", "trace_pass"]


@dataclass
class PassResult:
    """Computed times (s), the ray matrix (picks x ground cells, m) and timings of one pass.

    ``matrix`` is None while the rays are pending (``forward_pass(..., rays=False)``);
    :func:`trace_pass` traces them from the kept time fields (``pending``). Times are
    CPU seconds summed over the workers (``forward_s``, ``rays_s``) and wall seconds.
    """

    time_s: np.ndarray
    matrix: sp.csr_matrix | None
    forward_s: float
    rays_s: float
    wall_s: float
    fallbacks: list
    unfinished: int
    pending: list | None = field(default=None, repr=False)


@dataclass(frozen=True)
class _Options:
    order: int
    source_radius: float
    ray_step: float | None
    ray_booking: str


def _chunks(groups, n_workers):
    """Origins in chunks: several per task amortise numpy overhead in the ray tracer,
    a few chunks per worker balance the load (big groups spread first)."""
    n_chunks = min(len(groups), max(1, 2 * n_workers)) if n_workers > 1 else 1
    order = np.argsort([-g.size for g in groups], kind="stable")
    return [sorted(order[k::n_chunks].tolist()) for k in range(n_chunks)]


def _solve_chunk(task):
    """Worker: fields of a chunk of origins, times at their targets; rays now or later."""
    mesh, slowness, origins, targets, rays, opts = task
    t0 = _time.perf_counter()
    speed = node_speed(mesh, slowness)
    fields = [solve_field(mesh, slowness, x, z, order=opts.order, source_radius=opts.source_radius, speed=speed)
              for x, z in origins]
    times = [sample_field(mesh, f, t[:, 0], t[:, 1]) for f, t in zip(fields, targets)]
    forward_s = _time.perf_counter() - t0
    traced = {"fields": [f.time for f in fields], "sources": np.array([f.source for f in fields]),
              "radii": np.array([f.radius for f in fields]), "targets": targets}
    fallbacks = [f.source for f in fields if f.fallback]
    if rays:
        matrix, rays_s, unfinished = _trace(mesh, traced, opts)
        return times, forward_s, fallbacks, None, matrix, rays_s, unfinished
    return times, forward_s, fallbacks, traced, None, 0.0, 0


def _trace(mesh, traced, opts):
    t0 = _time.perf_counter()
    grad = np.empty((len(traced["fields"]),) + mesh.node_shape, np.complex64)
    for g, time in zip(grad, traced["fields"]):
        g.real, g.imag = time_gradient(mesh, time)
    starts = np.concatenate(traced["targets"])
    which = np.concatenate([np.full(len(t), k) for k, t in enumerate(traced["targets"])])
    out = trace_many(mesh, grad, traced["sources"], traced["radii"], starts, which,
                     step=opts.ray_step, ground_only=True, booking=opts.ray_booking)
    return out.matrix, _time.perf_counter() - t0, out.unfinished


def _trace_chunk(task):
    """Worker: the rays of one chunk from its kept time fields."""
    mesh, traced, opts = task
    return _trace(mesh, traced, opts)


def forward_pass(mesh, cell_slowness, picks, settings=None, workers=None, rays=True):
    """Computed times and (with ``rays``) the ray matrix for a cell slowness model.

    Parameters
    ----------
    mesh : Mesh
    cell_slowness : ndarray (nz, nx)
        Slowness of the model cells, s/m (air cells ignored).
    picks : Picks
    settings : InversionSettings, optional
        ``order``, ``source_radius``, ``ray_step``, ``ray_booking``, ``reciprocity``
        (default: the defaults).
    workers : Workers, optional
        Pool to use (default: this process alone).
    rays : bool
        Trace the rays now; otherwise keep the time fields for :func:`trace_pass`.

    Returns
    -------
    PassResult
        ``matrix`` has one row per pick and one column per ground cell (row-major order
        of ``mesh.ground``): path length, m.
    """
    settings = settings or InversionSettings()
    workers = workers or Workers(1)
    t_start = _time.perf_counter()
    slowness = mesh.cells_to_nodes(np.where(mesh.ground, cell_slowness, 0.0))
    origins, origin_index, targets = field_origins(picks, settings.reciprocity)
    groups = [np.flatnonzero(origin_index == k) for k in range(len(origins))]
    chunks = _chunks(groups, workers.n)
    opts = _Options(settings.order, settings.source_radius, settings.ray_step, settings.ray_booking)
    tasks = [(mesh, slowness, origins[c], [targets[groups[k]] for k in c], rays, opts) for c in chunks]
    parts = workers.map(_solve_chunk, tasks)
    times = np.empty(len(picks))
    rows = [np.concatenate([groups[k] for k in c]) for c in chunks]
    for r, part in zip(rows, parts):
        times[r] = np.concatenate(part[0])
    if not np.all(np.isfinite(times)):
        raise SolverError("some stations were not reached by the wavefront (isolated by the air mask?)")
    result = PassResult(times, None, sum(p[1] for p in parts), sum(p[5] for p in parts), 0.0,
                        [fb for p in parts for fb in p[2]], sum(p[6] for p in parts))
    if rays:
        result.matrix = _assemble(rows, [p[4] for p in parts], len(picks))
    else:
        result.pending = [(r, p[3]) for r, p in zip(rows, parts)]
    result.wall_s = _time.perf_counter() - t_start
    return result


def _assemble(rows, matrices, n_picks):
    """Stack the chunks' ray rows and put them back in pick order."""
    perm = np.concatenate(rows)
    inverse = np.empty(n_picks, int)
    inverse[perm] = np.arange(n_picks)
    return sp.vstack(matrices).tocsr()[inverse]


def trace_pass(mesh, result, settings=None, workers=None):
    """Trace the pending rays of a ``forward_pass(..., rays=False)`` result in place.

    Sets ``result.matrix``, adds the tracing time to ``rays_s`` and ``wall_s``, and
    returns the seconds (CPU summed over workers, wall) this call took.
    """
    if result.pending is None:
        return 0.0, 0.0
    settings = settings or InversionSettings()
    workers = workers or Workers(1)
    t_start = _time.perf_counter()
    opts = _Options(settings.order, settings.source_radius, settings.ray_step, settings.ray_booking)
    parts = workers.map(_trace_chunk, [(mesh, traced, opts) for _, traced in result.pending])
    result.matrix = _assemble([r for r, _ in result.pending], [p[0] for p in parts], len(result.time_s))
    result.unfinished = sum(p[2] for p in parts)
    result.pending = None
    rays_s, wall_s = sum(p[1] for p in parts), _time.perf_counter() - t_start
    result.rays_s += rays_s
    result.wall_s += wall_s
    return rays_s, wall_s
