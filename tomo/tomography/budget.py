"""Before a run: the memory and time it will take, and whether it fits.

The estimate plans the windows of the starting model (:mod:`tomo.tomography.windows`),
so it knows the forward nodes of one pass, and times one field of a typical window on
this machine. The rest is scaled from measurements of ``benchmarks/scale.py`` (the
constants below say what each one is): the ray matrix grows with the picks and their
offsets, a pass with the nodes of its windows, an iteration with its passes. It is an
estimate: the number of iterations depends on the picks, and other programs share the
cores.
"""

from __future__ import annotations

import math
import time as _time
from dataclasses import dataclass

import numpy as np

from .fields import field_origins, node_speed, sample_field, solve_field
from .passes import CHUNK_NODES, MIN_CHUNKS, plan_pass

__all__ = ["RunEstimate", "estimate_run", "available_memory", "suggest_cell"]

#: Bytes per ray-matrix entry (CSR: a float64 length and an int32 column).
ENTRY_BYTES = 12
#: Copies of the ray matrix alive at once at the peak: the matrix, the Jacobian, the
#: weighted Jacobian and the solver's stacked system, and one being assembled.
MATRIX_COPIES = 5
#: Matrix entries per model cell of ray length (the bilinear booking shares a piece of
#: ray among the cells around it; measured on benchmarks/scale.py's lines: 2.4-2.6).
ENTRIES_PER_CELL = 2.6
#: Ray length over the straight source-receiver distance (diving and head waves;
#: measured on the same lines: 1.05-1.15).
PATH_FACTOR = 1.15
#: Share of the memory available now that a run may plan to use (the rest for the
#: system and other programs; common practice).
USABLE_SHARE = 0.9
#: Memory of the main process and of a worker before the run (Python with numpy,
#: scipy and scikit-fmm loaded; measured), bytes.
PROCESS_BYTES = 200e6
#: Bytes the main process holds per forward node of the line's grid (node slowness,
#: the node-from-cell matrix, the sums of :func:`tomo.tomography.windows.upper_times`).
LINE_NODE_BYTES = 110
#: Bytes per window node of the fields a trial pass keeps for its rays (single
#: precision), times the passes held at once by the line search (two).
KEPT_NODE_BYTES = 4 * 2
#: Bytes a worker holds per node of its chunk's windows (the field being solved and
#: the fast-marching solver's arrays, the kept fields, the gradients for the rays).
WORKER_NODE_BYTES = 40
#: Ray tracing time over forward time, per pass (measured: 0.25-0.4).
RAYS_PER_FORWARD = 0.35
#: Forward passes per iteration (a trial step, sometimes two or three; measured on
#: benchmarks/scale.py: 1.5-2).
PASSES_PER_ITERATION = 1.8
#: Least-squares seconds per matrix entry per iteration, over the forward seconds per
#: node (the solves scale with the entries, the fields with the nodes). Measured on
#: benchmarks/scale.py's 1.2 km line: 0.4-0.6 s of solves per iteration for 0.72
#: million entries at 0.34 microseconds per node, 1.7-2.5; the larger is kept.
SOLVE_PER_ENTRY = 2.5
#: Iterations of a typical run from the gradient start to chi2 at the target (the
#: lines of benchmarks/scale.py: 8-13).
TYPICAL_ITERATIONS = 12


@dataclass
class RunEstimate:
    """What a run will take (:func:`estimate_run`).

    Attributes
    ----------
    picks, origins, cells : int
        Picks, field origins per pass and ground cells (unknowns).
    nodes_per_pass : int
        Forward nodes solved in one pass, over all windows.
    matrix_entries : int
        Entries of the ray matrix (estimated).
    memory_bytes : float
        Peak memory of the main process and its workers, bytes.
    available_bytes : float or None
        Memory available now, bytes (None where it cannot be read).
    pass_s, iteration_s : float
        Wall seconds of one forward pass and of a typical iteration.
    iterations, max_iterations : int
        A typical and the largest number of iterations.
    workers : int
    """

    picks: int
    origins: int
    cells: int
    nodes_per_pass: int
    matrix_entries: int
    memory_bytes: float
    available_bytes: float | None
    pass_s: float
    iteration_s: float
    iterations: int
    max_iterations: int
    workers: int

    @property
    def fits(self):
        """Whether the peak fits in nine tenths of the memory available now."""
        return self.available_bytes is None or self.memory_bytes <= USABLE_SHARE * self.available_bytes

    def describe(self):
        """One line: time and memory."""
        typical = min(self.iterations, self.max_iterations)
        avail = "" if self.available_bytes is None else f" of {_size(self.available_bytes)} available"
        most = "" if typical == self.max_iterations else (
            f", at most {_duration(self.max_iterations * self.iteration_s)} for {self.max_iterations}")
        return (f"estimated time about {_duration(typical * self.iteration_s)} for {typical} "
                f"iteration{'s' if typical != 1 else ''}{most} ({_duration(self.iteration_s)} each on "
                f"{self.workers} worker{'s' if self.workers != 1 else ''}); peak memory about "
                f"{_size(self.memory_bytes)}{avail} ({self.picks:,} picks, {self.cells:,} cells, "
                f"{self.nodes_per_pass / 1e6:.1f} million forward nodes a pass)")


def _size(n):
    return f"{n / 1e9:.1f} GB" if n >= 1e9 else f"{n / 1e6:.0f} MB"


def _duration(seconds):
    if seconds < 10:
        return f"{seconds:.1f} s"
    return f"{seconds:.0f} s" if seconds < 90 else f"{seconds / 60:.1f} min"


def available_memory():
    """Memory available to a new run now, bytes (psutil), or None where unknown."""
    try:
        import psutil
    except ImportError:  # pragma: no cover - a dependency, but the estimate must not fail
        return None
    return float(psutil.virtual_memory().available)


def estimate_run(mesh, picks, velocity, settings, time_one=True):
    """Estimate the memory and time of inverting ``picks`` on ``mesh`` from ``velocity``.

    Parameters
    ----------
    mesh : Mesh
    picks : Picks
    velocity : ndarray (nz, nx)
        The starting model, m/s (NaN in the air).
    settings : InversionSettings
    time_one : bool
        Time one field on this machine (about as long as one field of the run);
        otherwise assume 0.3 microseconds per node.

    Returns
    -------
    RunEstimate
    """
    cell_s = np.where(mesh.ground, 1.0 / np.where(mesh.ground, velocity, 1.0), 0.0)
    slowness = mesh.cells_to_nodes(cell_s)
    origins, origin_index, targets = field_origins(picks, settings.reciprocity)
    groups = [np.flatnonzero(origin_index == k) for k in range(len(origins))]
    offsets = np.hypot(targets[:, 0] - origins[origin_index, 0], targets[:, 1] - origins[origin_index, 1])
    windows = plan_pass(mesh, slowness, origins, targets, origin_index, groups, settings.windows)[1]
    refine = mesh.refine
    sizes = np.array([(w.nz * refine + 1) * (w.nx * refine + 1) for w in windows], float)
    nodes = int(sizes.sum())
    entries = int(ENTRIES_PER_CELL * PATH_FACTOR * offsets.sum() / mesh.cell)
    per_node = _time_per_node(mesh, slowness, windows, origins, targets, groups, sizes) if time_one else 3e-7
    workers = max(1, min(int(settings.workers), len(origins)))
    chunk = min(CHUNK_NODES, nodes / max(min(len(origins), MIN_CHUNKS), 1))
    memory = (PROCESS_BYTES * (1 + (workers if workers > 1 else 0))
              + LINE_NODE_BYTES * np.prod(mesh.node_shape) + KEPT_NODE_BYTES * nodes
              + MATRIX_COPIES * ENTRY_BYTES * entries + WORKER_NODE_BYTES * chunk * workers)
    pass_s = nodes * per_node / workers
    iteration_s = pass_s * (PASSES_PER_ITERATION + RAYS_PER_FORWARD) + SOLVE_PER_ENTRY * entries * per_node
    return RunEstimate(len(picks), len(origins), int(mesh.ground.sum()), nodes, entries, float(memory),
                       available_memory(), float(pass_s), float(iteration_s), TYPICAL_ITERATIONS,
                       int(settings.max_iterations), workers)


def _time_per_node(mesh, slowness, windows, origins, targets, groups, sizes):
    """Seconds per forward node of one field of the median window, on this machine."""
    k = int(np.argsort(sizes)[len(sizes) // 2])
    w = windows[k]
    wmesh = w.mesh(mesh)
    rows, cols = w.nodes(mesh)
    s = slowness[rows, cols]
    t0 = _time.perf_counter()
    f = solve_field(wmesh, s, *origins[k], speed=node_speed(wmesh, s))
    sample_field(wmesh, f, targets[groups[k], 0], targets[groups[k], 1])
    return (_time.perf_counter() - t0) / sizes[k]


def suggest_cell(estimate, cell_m, available=None):
    """The smallest model cell, m (1, 2 or 5 times a power of ten, above ``cell_m``), at
    which the estimated peak fits the memory available; None when none up to 16 times
    ``cell_m`` does. Window nodes scale with the inverse square of the cell, matrix
    entries with its inverse."""
    available = estimate.available_bytes if available is None else available
    if available is None:
        return None
    base = PROCESS_BYTES * (1 + (estimate.workers if estimate.workers > 1 else 0))
    matrix = MATRIX_COPIES * ENTRY_BYTES * estimate.matrix_entries
    rest = estimate.memory_bytes - base - matrix
    e = math.floor(math.log10(cell_m))
    steps = sorted(m * 10.0 ** k for k in range(e, e + 3) for m in (1, 2, 5))
    for bigger in steps:
        factor = bigger / cell_m
        if factor < 1.01 or factor > 16:
            continue
        if base + matrix / factor + rest / factor ** 2 <= USABLE_SHARE * available:
            return bigger
    return None
