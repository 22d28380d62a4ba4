"""The model parameter and the roughness operator of the inversion.

The model m is log-velocity (default) or slowness of the ground cells, in row-major
order of ``mesh.ground``. The roughness ||R m|| stacks the first differences between
neighbouring ground cells, horizontal ones weighted by ``smooth_x`` and vertical ones
by ``smooth_z`` (a first-difference roughness as in Occam's inversion: Constable,
Parker & Constable 1987, Geophysics 52, eq. 6, in two dimensions with anisotropic
weights, as deGroot-Hedlin & Constable 1990, Geophysics 55).
"""

from __future__ import annotations

import math

import numpy as np
import scipy.sparse as sp

__all__ = ["smoothness_operator", "to_parameter", "to_velocity", "parameter_bounds"]


def smoothness_operator(mesh, smooth_x=1.0, smooth_z=1.0):
    """Stacked first differences between neighbouring ground cells.

    Returns a sparse matrix over the ground cells (in row-major order of
    ``mesh.ground``): horizontal rows weighted by ``smooth_x``, vertical rows by
    ``smooth_z``. Differences are per cell (dimensionless), so the weight of a
    roughness does not depend on the cell size.
    """
    ground = mesh.ground
    index = np.full(ground.shape, -1)
    index[ground] = np.arange(int(ground.sum()))
    n = int(ground.sum())
    blocks = []
    for weight, a, b in ((smooth_x, index[:, :-1], index[:, 1:]), (smooth_z, index[:-1, :], index[1:, :])):
        if weight <= 0:
            continue
        ok = (a >= 0) & (b >= 0)
        a, b = a[ok], b[ok]
        m = a.size
        rows = np.repeat(np.arange(m), 2)
        cols = np.column_stack([a, b]).ravel()
        vals = np.tile([-weight, weight], m)
        blocks.append(sp.csr_matrix((vals, (rows, cols)), shape=(m, n)))
    if not blocks:
        return sp.csr_matrix((0, n))
    return sp.vstack(blocks).tocsr()


def to_parameter(velocity, parameter):
    """Model parameter from velocity (m/s): log-velocity or slowness (s/m)."""
    return np.log(velocity) if parameter == "logv" else 1.0 / velocity


def to_velocity(m, parameter):
    """Velocity (m/s) from the model parameter."""
    return np.exp(m) if parameter == "logv" else 1.0 / m


def parameter_bounds(v_min, v_max, parameter):
    """The velocity bounds (m/s) as (lowest, highest) parameter values."""
    if parameter == "logv":
        return math.log(v_min), math.log(v_max)
    return 1.0 / v_max, 1.0 / v_min
