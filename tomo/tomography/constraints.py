"""Points an iso-velocity surface must pass through: borehole depths as extra rows of the
inversion's least-squares system.

A borehole that logged an interface at elevation z_b under x_b asks the tomogram's
iso-velocity surface of velocity V (the contour that stands for that interface) to pass
through (x_b, z_b) within the logged depth's uncertainty sigma. Point information of this
kind enters the objective as weighted rows beside the data, as in Lelièvre & Oldenburg
2009 (Geophys. J. Int. 178, "A comprehensive study of including structural orientation
information in geophysical inversions"). Here, for each of the two model columns around
the borehole (weighted as a surface read from a run is interpolated between them,
:func:`tomo.analysis.surface.contour_surface`)::

    w (p(V) - c . m) = w c . u                       at the borehole
    w (p(V) - g_0 dz - m_i) = w u_i                  on every cell i more than sigma above
                                                     it that is faster than that
    w (p(V) + g_0 dz - m_i) = w u_i                  on the cell next below sigma under it,
                                                     if it is slower than that

with p the model parameter (log-velocity or slowness), c the linear interpolation
between the cell centres at z_b, dz the cell's distance from the borehole and g_0 the
least vertical gradient :data:`MIN_GRADIENT_PER_M` (the signs as for log-velocity). The
first row puts V at the borehole; the others keep V from being reached higher up and
make sure it is reached just below, so that the column's first crossing of V (the
surface) lies within sigma of the borehole. (Measured on a synthetic channel, the first row alone
was met to 0.01 sigma by a slower pocket at the borehole while the surface, crossing V
higher up, stayed 2.4 m shallow.) The weight w = 1 / (sigma g), g the column's vertical
gradient of p at the borehole (at least g_0), turns a parameter misfit into about a depth
misfit in sigmas: a row counts as much as a pick missed by one sigma when the surface
misses the borehole by one sigma. Every row is linear in m, so its misfit after a step
is exact and the line search is not misled by it. (Rows on the surface's own elevation,
linearised, were tried first: their steps overshot and were cut to a tenth, and runs
needed 15-20 iterations where these need 6-13.)

The rows never enter the picks' chi2: the discrepancy principle and the stopping rules
read the picks alone (:mod:`tomo.tomography.solver`). On its own weight a borehole is
one row among hundreds of picks, and the smoothing keeps a surface several sigmas from
it; so its weight is raised while it is missed (:class:`PointPenalty`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp

from ..core.errors import InputError
from .regularisation import to_parameter, to_velocity

__all__ = ["ContourPoints", "ConstraintRows", "constraint_rows", "surface_elevation", "misses",
           "PointPenalty", "MIN_GRADIENT_PER_M"]

#: Least vertical gradient of log-velocity the rows assume, 1/m (5 % of the velocity per
#: m; for slowness the same relative change, 0.05 s(V) per m): the weight of a row where
#: the model is nearly uniform, and how much slower than V the cells above a borehole
#: must be. Measured on the synthetic channel of the tests (noise seeds 1-6, two
#: boreholes, sigma 0.3 m): with 0.05 every run reached chi2 1 in 6-13 iterations with
#: both boreholes within 0.2 m; with 0.1 the cells above had to be so much slower that
#: the picks fitted worse and every run stopped above the target (the chi2 of the picks
#: under the boreholes up by 0.3 to 23).
MIN_GRADIENT_PER_M = 0.05


@dataclass(frozen=True)
class ContourPoints:
    """Points the iso-velocity surfaces must pass through, one value per point.

    Attributes
    ----------
    x : ndarray
        Distance along the line, m.
    z : ndarray
        Elevation of the logged interface, m.
    sigma_m : ndarray
        Uncertainty of the depth, m (one standard deviation), positive.
    velocity_m_s : ndarray
        Velocity of the surface each point lies on, m/s.
    label : tuple of str
    """

    x: np.ndarray
    z: np.ndarray
    sigma_m: np.ndarray
    velocity_m_s: np.ndarray
    label: tuple

    def __len__(self):
        return int(np.size(self.x))

    def check(self, mesh):
        """Raise InputError unless every point lies in the ground of ``mesh``; returns self."""
        for k in range(len(self)):
            x, z = float(self.x[k]), float(self.z[k])
            inside = mesh.x0 <= x <= mesh.x1 and mesh.z_bottom <= z <= float(mesh.terrain.elevation(x))
            if not inside:
                raise InputError(f"borehole {self.label[k]} at x = {x:g} m, elevation {z:g} m lies outside the "
                                 f"model's ground ({mesh.describe()})", field="boreholes")
            if not (self.sigma_m[k] > 0 and self.velocity_m_s[k] > 0):
                raise InputError(f"borehole {self.label[k]}: sigma and contour velocity must be positive",
                                 field="boreholes")
        return self


@dataclass
class ConstraintRows:
    """The weighted rows of the points at one model (module docstring), their weights
    frozen for the iteration.

    Attributes
    ----------
    C : sparse matrix (n_active, n_cells)
        The rows in force at the model: weight times interpolation.
    d : ndarray (n_active,)
        Their weighted residuals, weight (p(V) - c . m).
    rows : sparse matrix (n_rows, n_cells)
        Every row, unweighted (interpolation weights); ``C`` is its active part, weighted.
    target, weight : ndarray (n_rows,)
        The parameter each row asks for and its weight.
    one_sided : ndarray of bool (n_rows,)
        Rows on cells above (and just below) a borehole: in force only where the cell
        is faster (slower) than asked; their weight carries the sense (negative below).
    sign : float
        +1 for log-velocity, -1 for slowness (faster is a larger log v, a smaller slowness).
    """

    C: sp.csr_matrix
    d: np.ndarray
    rows: sp.csr_matrix
    target: np.ndarray
    weight: np.ndarray
    one_sided: np.ndarray
    sign: float

    def misfit_at(self, m):
        """The rows' weighted misfit at model ``m`` (exact: each row is linear in m; the
        one-sided rows count where they are not met)."""
        r = self.weight * (self.target - self.rows @ m)
        r[self.one_sided & (self.sign * r >= 0)] = 0.0
        return float(np.sum(r ** 2))


def _cells_of_column(mesh, j):
    """Parameter indices (top down) and centre elevations (m) of column j's ground cells."""
    index = np.cumsum(mesh.ground.ravel()).reshape(mesh.shape) - 1
    rows = np.flatnonzero(mesh.ground[:, j])
    return index[rows, j], mesh.z[rows]


def _columns_of(mesh, x):
    """The two model columns around x (m) and the weights that interpolate linearly
    between their centres (flat beyond the outermost)."""
    f = min(max((float(x) - mesh.x0) / mesh.cell - 0.5, 0.0), mesh.nx - 1.0)
    j0 = min(int(math.floor(f)), max(mesh.nx - 2, 0))
    t = f - j0
    return ((j0, 1.0 - t), (j0 + 1, t)) if mesh.nx > 1 else ((0, 1.0),)


def _at_elevation(z, z0):
    """(indices, weights) interpolating a column with centres at elevations ``z`` (m,
    top down) linearly at ``z0``; the end value beyond the ends."""
    if z0 >= z[0] or z.size == 1:
        return [0], [1.0]
    if z0 <= z[-1]:
        return [z.size - 1], [1.0]
    k = int(np.flatnonzero(z < z0)[0])
    t = (z[k - 1] - z0) / (z[k - 1] - z[k])
    return [k - 1, k], [1.0 - t, t]


def _crossing(z, v, target):
    """The first crossing of velocity ``target`` (m/s) down a column of velocities ``v``
    at elevations ``z`` (m), read as a run's surface is
    (:func:`tomo.analysis.surface.contour_surface`: linear in velocity between cell
    centres; at the top cell's centre when that is already as fast); NaN where the
    column never reaches it."""
    fast = np.flatnonzero(v >= target)
    if fast.size == 0:
        return float("nan")
    k = int(fast[0])
    if k == 0:
        return float(z[0])
    return float(z[k - 1] + (target - v[k - 1]) / (v[k] - v[k - 1]) * (z[k] - z[k - 1]))


def surface_elevation(mesh, m, points, parameter):
    """Each point's surface (its velocity's iso-velocity surface) at its x, elevation m,
    read from model ``m`` as :func:`tomo.analysis.surface.contour_surface` reads a run
    (per column, then linear in x); NaN where a column never reaches the velocity."""
    v = to_velocity(m, parameter)
    out = np.zeros(len(points))
    for k in range(len(points)):
        for j, t in _columns_of(mesh, points.x[k]):
            cells, z = _cells_of_column(mesh, j)
            out[k] += t * (_crossing(z, v[cells], float(points.velocity_m_s[k])) if cells.size else np.nan)
    return out


def misses(mesh, m, points, parameter):
    """(z_b - z_surface) / sigma per point: how far each surface is from its borehole, in
    sigmas (positive: the surface lies too deep; infinite where it is not there)."""
    d = (np.asarray(points.z, float) - surface_elevation(mesh, m, points, parameter)) / np.asarray(points.sigma_m)
    return np.where(np.isfinite(d), d, np.inf)


def constraint_rows(mesh, m, points, parameter, multiplier=None):
    """The :class:`ConstraintRows` of ``points`` (:class:`ContourPoints`) at model ``m``
    (parameter of the ground cells, ``parameter`` "logv" or "slowness").

    For each of the two model columns around a borehole, weighted as the surface is
    interpolated between them: a row asking the column for V at the borehole's
    elevation (linear between cell centres), a row on each cell more than sigma above
    the borehole asking it to be slower than V by the least gradient, and one on the
    cell next below that distance asking it to be faster by as much, each in force only
    where it is not met (so that the column's first crossing of V, the surface, lies
    within sigma of the borehole: not higher, and not lower). Each row is weighted by 1 / (sigma g), g the
    column's vertical gradient of the parameter at the borehole (at least
    :data:`MIN_GRADIENT_PER_M`), times the point's ``multiplier`` (default 1).
    """
    target = to_parameter(np.asarray(points.velocity_m_s, float), parameter)
    sign = 1.0 if parameter == "logv" else -1.0
    scale = np.ones(len(points)) if parameter == "logv" else np.abs(target)
    multiplier = np.ones(len(points)) if multiplier is None else np.asarray(multiplier, float)
    entries, targets, weights, one_sided = [], [], [], []
    for k in range(len(points)):
        sigma, zb, least = float(points.sigma_m[k]), float(points.z[k]), MIN_GRADIENT_PER_M * scale[k]
        for j, t in _columns_of(mesh, points.x[k]):
            cells, z = _cells_of_column(mesh, j)
            if t <= 1e-9 or cells.size == 0:
                continue
            hi, lo = _at_elevation(z, zb + 0.5 * mesh.cell), _at_elevation(z, zb - 0.5 * mesh.cell)
            g = abs(np.dot(hi[1], m[cells[hi[0]]]) - np.dot(lo[1], m[cells[lo[0]]])) / mesh.cell
            w = t * multiplier[k] / (sigma * max(g, least))
            at, tw = _at_elevation(z, zb)
            entries.append((cells[at], tw))
            targets.append(target[k])
            weights.append(w)
            one_sided.append(False)
            # cells above slower than V by the least gradient (a cell at V would already
            # be the surface), and the next cell below faster by as much (so the
            # surface is crossed by then); sign * (target - p) < 0 where they are not
            for i, sense in [(i, 1.0) for i in np.flatnonzero(z > zb + sigma)] + \
                    [(i, -1.0) for i in np.flatnonzero((z < zb - sigma) & (z >= zb - sigma - mesh.cell))]:
                entries.append(([cells[i]], [1.0]))
                targets.append(target[k] - sense * sign * least * abs(z[i] - zb))
                weights.append(sense * w)
                one_sided.append(True)
    data = [(r, c, v) for r, (cs, vs) in enumerate(entries) for c, v in zip(cs, vs)]
    rows = sp.csr_matrix(([v for _, _, v in data], ([r for r, _, _ in data], [c for _, c, _ in data])),
                         shape=(len(entries), m.size))
    target_rows, weight, one_sided = np.array(targets), np.array(weights), np.array(one_sided, bool)
    r = weight * (target_rows - rows @ m)
    active = ~one_sided | (sign * r < 0)
    C = sp.csr_matrix(sp.diags(weight[active]) @ rows[active])
    return ConstraintRows(C, r[active], rows, target_rows, weight, one_sided, sign)


#: Factor by which the weight of a point still missed by more than its sigma grows
#: after an iteration, and the most it may grow in all (a quadratic penalty raised until
#: the constraint holds: Nocedal & Wright 2006, Numerical Optimization, sec. 17.1).
PENALTY_FACTOR = 4.0
PENALTY_MAX = 4.0 ** 5
#: Least relative fall of a missed point's miss per iteration for the run to go on once
#: its weight is at :data:`PENALTY_MAX`.
MIN_PROGRESS = 0.05


class PointPenalty:
    """The rows of the points with a multiplier each, raised while a point is missed.

    With the weight of :func:`constraint_rows` alone a borehole counts as one pick among
    hundreds, and the smoothing leaves the surface several sigmas from it. Occam's rule
    asks the data to be fitted to their uncertainty; for the boreholes that means each
    within one sigma. So after every iteration that aims at the target the multiplier of
    a point whose surface (:func:`surface_elevation`) still misses it by more than one
    sigma grows by :data:`PENALTY_FACTOR`, up to :data:`PENALTY_MAX`, and the run goes
    on while the miss still shrinks; a point the picks will not let the surface reach
    stays missed (and is reported, not forced further).
    """

    def __init__(self, points):
        self.points = points
        self.multiplier = np.ones(len(points))
        self.last_miss = np.full(len(points), np.inf)

    def rows(self, mesh, m, parameter):
        """The :class:`ConstraintRows` at ``m`` with the multipliers applied."""
        return constraint_rows(mesh, m, self.points, parameter, self.multiplier)

    def missed(self, mesh, m, parameter):
        """Per point: its surface misses it by more than one sigma at ``m`` (bool array)."""
        return np.abs(misses(mesh, m, self.points, parameter)) > 1.0

    def raise_missed(self, mesh, m, parameter):
        """Raise the multiplier of every point missed at ``m``; True while that goes on
        to help (a multiplier was raised, or a miss at full weight still shrinks)."""
        miss = np.abs(misses(mesh, m, self.points, parameter))
        missed = miss > 1.0
        grow = missed & (self.multiplier < PENALTY_MAX)
        shrinking = missed & (miss < (1.0 - MIN_PROGRESS) * self.last_miss)
        self.multiplier[grow] = np.minimum(self.multiplier[grow] * PENALTY_FACTOR, PENALTY_MAX)
        self.last_miss = miss
        return bool(grow.any() or shrinking.any())
