"""First-arrival travel times by the fast marching method on the forward grid.

The eikonal equation |grad T| = s(x, z) (s the slowness, s/m) is solved with
``skfmm.travel_time`` (Sethian 1996, PNAS 93; second order as in Sethian 1999, Level Set
Methods and Fast Marching Methods, ch. 8) on the mesh's forward nodes, with the air
masked out.

Point sources. A point source is the largest error of a fast-marching solver: the
wavefront is sharply curved near it and the finite differences are poor there
(Rickett & Fomel 1999; Sethian & Popovici 1999, Geophysics 64). We therefore start the
march from a circle of radius ``source_radius`` node spacings around the source, on
which times are exact for the source's own velocity (t = r s); inside the circle times
are the exact ``r s`` as well. ``benchmarks/forward.py`` and the tests measure the gain
against a bare point start.

Fallback. scikit-fmm's second-order update can fail on sharp contrasts (a "negative
discriminant" error); the field for that source is then solved at first order and the
fallback is recorded.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import skfmm

from ..core.errors import InputError, SolverError

__all__ = ["solve_field", "sample_field", "field_origins", "origin_kind", "node_speed", "source_slowness",
           "FieldResult", "DEFAULT_SOURCE_RADIUS", "SOURCE_UNIFORMITY"]

#: Largest radius of the exactly-timed start around each source, in node spacings.
DEFAULT_SOURCE_RADIUS = 6.0
#: The start circle shrinks so that the slowness inside it stays within this fraction
#: of the source's own (times inside are exact only for a uniform neighbourhood).
SOURCE_UNIFORMITY = 0.05


def _bilinear(grid_x0, grid_z0, h, values, x, z):
    """Bilinear interpolation on a node grid whose row index grows downward.

    ``grid_z0`` is the elevation of row 0; elevations decrease by ``h`` per row.
    Returns values and the (i, j, fi, fj) stencil for reuse.
    """
    ny, nx = values.shape
    fj = (np.asarray(x, float) - grid_x0) / h
    fi = (grid_z0 - np.asarray(z, float)) / h
    j = np.clip(np.floor(fj).astype(int), 0, nx - 2)
    i = np.clip(np.floor(fi).astype(int), 0, ny - 2)
    tx = np.clip(fj - j, 0.0, 1.0)
    tz = np.clip(fi - i, 0.0, 1.0)
    v = (values[i, j] * (1 - tx) * (1 - tz) + values[i, j + 1] * tx * (1 - tz)
         + values[i + 1, j] * (1 - tx) * tz + values[i + 1, j + 1] * tx * tz)
    return v


def source_slowness(mesh, slowness, x, z):
    """Slowness (s/m) at a point, bilinear over the active nodes around it."""
    ny, nx = mesh.node_shape
    i = int(np.clip(np.floor((mesh.z_top - z) / mesh.h), 0, ny - 2))
    j = int(np.clip(np.floor((x - mesh.x0) / mesh.h), 0, nx - 2))
    block = np.where(mesh.node_active[i:i + 2, j:j + 2], slowness[i:i + 2, j:j + 2], np.nan)
    value = _bilinear(mesh.node_x[j], mesh.node_z[i], mesh.h, block, x, z)
    if not np.isfinite(value):
        # a point next to masked nodes: the mean of the active stencil values
        value = np.nanmean(block) if np.any(np.isfinite(block)) else np.nan
    return float(value)


def node_speed(mesh, slowness):
    """Speed (m/s) on the forward nodes for skfmm, 1 on inactive nodes (never used)."""
    active = mesh.node_active
    return np.where(active, 1.0 / np.where(active, slowness, 1.0), 1.0)


@dataclass
class FieldResult:
    """One travel-time field: ``time`` (s) on the forward nodes (NaN where not solved)."""

    time: np.ndarray
    order: int
    fallback: bool
    source: tuple
    source_slowness: float
    radius: float


def solve_field(mesh, slowness, x, z, order=2, source_radius=DEFAULT_SOURCE_RADIUS, speed=None):
    """Travel times (s) from a point source at (``x``, ``z``) m to every forward node.

    Parameters
    ----------
    mesh : Mesh
    slowness : ndarray, shape ``mesh.node_shape``
        Slowness on the forward nodes, s/m (values at inactive nodes are ignored).
    x, z : float
        Source position, m (distance, elevation); anywhere on or below the ground.
    order : {1, 2}
        Finite-difference order of the fast marching update.
    source_radius : float
        Largest radius of the exactly-timed start, in node spacings (0 gives a point
        start). The circle is shrunk to stay inside a neighbourhood whose slowness is
        within ``SOURCE_UNIFORMITY`` of the source's, but not below one node spacing.
    speed : ndarray, optional
        ``node_speed(mesh, slowness)``, when solving many sources in one model.

    Returns
    -------
    FieldResult
    """
    h = mesh.h
    active = mesh.node_active
    s0 = source_slowness(mesh, slowness, x, z)
    if not np.isfinite(s0) or s0 <= 0:
        raise InputError(f"source at x = {x:g} m, z = {z:g} m is not in the ground of the mesh")
    ny, nx = mesh.node_shape
    radius = max(float(source_radius), 0.0) * h
    # phi: signed distance to the start circle near the source, +1 elsewhere (skfmm only
    # uses values next to the zero contour; far away only the sign matters).
    reach = int(np.ceil(radius / h)) + 3
    jc = int(round((x - mesh.x0) / h))
    ic = int(round((mesh.z_top - z) / h))
    i0, i1 = max(ic - reach, 0), min(ic + reach + 1, ny)
    j0, j1 = max(jc - reach, 0), min(jc + reach + 1, nx)
    phi = np.ones((ny, nx))
    dist = np.hypot(mesh.node_x[None, j0:j1] - x, mesh.node_z[i0:i1, None] - z)
    if radius > h:
        window = slowness[i0:i1, j0:j1]
        differs = active[i0:i1, j0:j1] & (np.abs(window - s0) > SOURCE_UNIFORMITY * s0)
        if np.any(differs):
            radius = float(np.clip(dist[differs].min() - h, h, radius))
    eps = 1e-3 * h
    # A point start needs the zero contour to enclose the source: keep at least one node
    # on the negative side.
    r_eff = max(radius, eps)
    local = dist - r_eff
    if not np.any(local[active[i0:i1, j0:j1]] < 0):
        nearest = np.unravel_index(np.argmin(np.where(active[i0:i1, j0:j1], dist, np.inf)), dist.shape)
        r_eff = dist[nearest] + eps
        local = dist - r_eff
    phi[i0:i1, j0:j1] = local
    if speed is None:
        speed = node_speed(mesh, slowness)
    phi_m = np.ma.MaskedArray(phi, mask=~active)
    fallback = False
    try:
        t = skfmm.travel_time(phi_m, speed, dx=h, order=order)
    except ValueError as exc:
        if order == 1 or "discriminant" not in str(exc).lower():
            raise SolverError(f"fast marching failed for the source at x = {x:g} m: {exc}") from None
        t = skfmm.travel_time(phi_m, speed, dx=h, order=1)
        order, fallback = 1, True
    # masked (air and unreached) nodes become NaN
    time = np.ma.filled(t.astype(float), np.nan)
    time += r_eff * s0
    inner = (local <= 0) & active[i0:i1, j0:j1]
    block = time[i0:i1, j0:j1]
    block[inner] = dist[inner] * s0
    return FieldResult(time, order, fallback, (float(x), float(z)), s0, r_eff)


def sample_field(mesh, field, x, z):
    """Times (s) at points (m) from a FieldResult: exact within the start circle, else
    bilinear over the four surrounding nodes (all active for points in the ground)."""
    x = np.asarray(x, float)
    z = np.asarray(z, float)
    t = _bilinear(mesh.x0, mesh.z_top, mesh.h, field.time, x, z)
    xs, zs = field.source
    r = np.hypot(x - xs, z - zs)
    near = r <= field.radius
    t = np.where(near, r * field.source_slowness, t)
    return t


def field_origins(picks, reciprocity=True):
    """Where fields are solved from: the shots, or the geophones when there are fewer of
    them and ``reciprocity`` is on (the time from A to B equals that from B to A in an
    isotropic medium). Returns (origins (n, 2) of (x, z) m, each pick's origin index,
    each pick's target (x, z) m)."""
    src, src_index = picks.sources()
    rec, rec_index = picks.receivers()
    if reciprocity and len(rec) < len(src):
        return rec, rec_index, np.column_stack([picks.source_x, picks.source_z])
    return src, src_index, np.column_stack([picks.receiver_x, picks.receiver_z])


def origin_kind(picks, reciprocity=True):
    """What :func:`field_origins` solves fields from: "shot" or "geophone"."""
    return "geophone" if reciprocity and len(picks.receivers()[0]) < len(picks.sources()[0]) else "shot"
