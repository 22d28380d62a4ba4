"""First-arrival times for picks: one travel-time field per shot (or per geophone, by
reciprocity), each solved on its window of the grid (:mod:`tomo.tomography.passes`).

The fields themselves (fast marching with scikit-fmm, the exact start around each
source, the first-order fallback) are :mod:`tomo.tomography.fields`'; their names are
available here too.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..core.errors import InputError
from .fields import (
    DEFAULT_SOURCE_RADIUS,
    SOURCE_UNIFORMITY,
    FieldResult,
    field_origins,
    node_speed,
    origin_kind,
    sample_field,
    solve_field,
    source_slowness,
)
from .passes import solve_pass
from .settings import InversionSettings
from .workers import Workers

__all__ = ["travel_times", "ForwardResult", "solve_field", "sample_field", "field_origins", "origin_kind",
           "node_speed", "source_slowness", "FieldResult", "DEFAULT_SOURCE_RADIUS", "SOURCE_UNIFORMITY"]


@dataclass
class ForwardResult:
    """Computed times for a set of picks.

    Attributes
    ----------
    time_s : ndarray
        One computed time per pick, s.
    n_fields : int
        Eikonal solves done.
    reciprocal : bool
        True when fields were solved from the receivers (fewer of them than shots).
    fallbacks : list of (x, z)
        Field origins whose second-order solve failed and were redone at first order.
    matrix : scipy.sparse.csr_matrix or None
        The ray matrix (picks x ground cells, m) when asked for.
    nodes : int
        Forward nodes solved over all windows.
    """

    time_s: np.ndarray
    n_fields: int
    reciprocal: bool
    fallbacks: list = field(default_factory=list)
    matrix: object = None
    nodes: int = 0


def travel_times(mesh, slowness, picks, order=2, source_radius=DEFAULT_SOURCE_RADIUS,
                 workers=1, reciprocity=True, progress=None, rays=False, windows=True):
    """Computed first-arrival times (s) for every pick.

    One field is solved per unique shot, or per unique geophone when there are fewer
    geophones and ``reciprocity`` is on (the travel time from A to B equals that from B
    to A in an isotropic medium), each on its window of the grid
    (:func:`tomo.tomography.passes.solve_pass`).

    Parameters
    ----------
    mesh : Mesh
    slowness : ndarray
        On the forward nodes (``mesh.node_shape``), s/m.
    picks : Picks
        Only positions are used.
    workers : int
        Processes to spread the fields over (1: in this process).
    progress : callable, optional
        Called as ``progress(done, total)`` as the fields are solved.
    rays : bool
        Also trace the rays (``ForwardResult.matrix``, path lengths in the ground
        cells, m).
    windows : bool
        Solve each field on its window (:mod:`tomo.tomography.windows`); False: on the
        whole grid.
    """
    slowness = np.asarray(slowness, float)
    if slowness.shape != mesh.node_shape:
        raise InputError(f"slowness has shape {slowness.shape}, expected the forward grid {mesh.node_shape}")
    origins, _, targets_xz = field_origins(picks, reciprocity)
    reciprocal = bool(reciprocity and len(origins) < len(picks.sources()[0]))
    bad = ~mesh.contains(targets_xz[:, 0], targets_xz[:, 1])
    if np.any(bad):
        k = int(np.flatnonzero(bad)[0])
        raise InputError(f"station at x = {targets_xz[k, 0]:g} m, z = {targets_xz[k, 1]:g} m "
                         "is outside the ground of the mesh")
    settings = InversionSettings(order=order, source_radius=source_radius, reciprocity=reciprocity, workers=1,
                                 windows=windows)
    with Workers(workers) as pool:
        result = solve_pass(mesh, slowness, picks, settings, pool, rays=rays, progress=progress)
    out = ForwardResult(result.time_s, len(origins), reciprocal, result.fallbacks)
    out.matrix, out.nodes = result.matrix, result.nodes
    return out
