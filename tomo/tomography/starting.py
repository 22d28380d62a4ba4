"""Starting models for the tomography.

Two choices:

- :func:`gradient_start` fits a 1-D velocity-depth gradient v = v0 + k depth to all
  first arrivals, using the closed-form time in a constant-gradient medium with source
  and receiver on the surface, t = (2/k) asinh(k x / (2 v0)) (Slotnick 1959, Lessons in
  Seismic Computing, SEG; restated by Fomel, Luo & Zhao 2009, J. Comput. Phys. 228).
  With terrain, x is the straight-line shot-geophone distance (an approximation).
- :func:`layered_start` runs the layered interpretation (``tomo.layered``), paints
  its layers onto the mesh and smooths them (:func:`smooth_start`, a Gaussian of
  ``LAYERED_SMOOTHING_CELLS`` cells in log-velocity). The layered methods assume that
  velocity increases with depth; a hidden layer or a velocity inversion is carried
  into the start.

Why smooth the layered start: next to a sharp refractor that steps across the cells,
the ray matrix over-predicts the time changes of the overburden cells just above it by
10-40 % (measured; ``tomo.rays``), so Gauss-Newton steps from a sharp start are cut
again and again, and a tomogram keeps much of a sharp starting interface. Measured on
line (b) of ``benchmarks/invert.py`` from a two-layer reading: chi2 4.8 after 20
iterations from the sharp start, 2.9, 1.44 and 1.42 from starts smoothed over 1, 2 and
3 cells. On the recovery lines of tests/test_inversion.py (noise seeds 1-6) the worst
well-covered contour error fell from 30 % to 18 % (trough) and from 27 % to 19 %
(weathered zone) with 2 cells; on the demo line the bedrock contour's median error
rose from 0.5 to 0.8 m while its largest fell from 2.6 to 1.5 m.

Both are only starting points: the tomography changes them where the rays demand.
"""

from __future__ import annotations

import numpy as np
from scipy.optimize import least_squares

from ..core.errors import InputError
from ..layered.interpret import interpret_line
from ..layered.result import interface_depths

__all__ = ["fit_gradient", "gradient_start", "layered_start", "paint_layers", "smooth_start", "check_smoothing",
           "gradient_time", "LAYERED_SMOOTHING_CELLS", "paint_layer_table"]

#: Standard deviation (model cells) of the Gaussian that smooths the layered start: two
#: cells are about one station spacing on the default mesh (cells of half the spacing).
LAYERED_SMOOTHING_CELLS = 2.0


def gradient_time(distance, v0, k):
    """First-arrival time (s) at ``distance`` (m) on the surface of v = v0 + k depth.

    t = (2/k) asinh(k x / (2 v0)) (Slotnick 1959); t = x / v0 in the limit k -> 0.
    """
    x = np.asarray(distance, float)
    if k < 1e-9:
        return x / v0
    return (2.0 / k) * np.arcsinh(k * x / (2.0 * v0))


def fit_gradient(picks):
    """Fit v0 (m/s) and k (1/s) of v = v0 + k depth to the first arrivals.

    Least squares on the times, weighted by the pick uncertainties when given, with a
    soft-L1 loss so that a few bad picks do not pull the fit (scipy.optimize.least_squares).

    Returns
    -------
    dict
        ``v0_m_s``, ``k_per_s``, ``rms_ms`` (RMS misfit of the fit) and
        ``turning_depth_m`` (deepest ray turning point, at the longest distance).
    """
    if picks.time_s is None or len(picks) < 3:
        raise InputError("a gradient start needs at least 3 picks with times", path=picks.path)
    x = np.hypot(picks.receiver_x - picks.source_x, picks.receiver_z - picks.source_z)
    t = np.asarray(picks.time_s, float)
    sigma = np.full(t.shape, 1e-3) if picks.sigma_s is None else np.asarray(picks.sigma_s, float)
    near = x <= np.quantile(x, 0.2)
    v0_guess = float(np.median(x[near] / t[near]))
    far = x >= np.quantile(x, 0.8)
    v_app = float(np.median(x[far] / t[far]))
    # a gradient k makes the apparent velocity at x about v0 + k x / 2 (small k x / v0)
    k_guess = max(2.0 * (v_app - v0_guess) / max(float(x[far].mean()), 1e-6), 0.1)

    def residual(q):
        v0, k = np.exp(q)
        return (gradient_time(x, v0, k) - t) / sigma

    lo, hi = np.log([10.0, 1e-4]), np.log([2e4, 1e4])
    # picks in the wrong units put the guess outside the bounds: start inside them, the
    # inversion then refuses the start by its velocities (tomo.tomography.inversion)
    guess = np.clip(np.log([v0_guess, k_guess]), lo + 1e-6, hi - 1e-6)
    fit = least_squares(residual, guess, loss="soft_l1", f_scale=2.0, bounds=(lo, hi))
    v0, k = (float(v) for v in np.exp(fit.x))
    rms = float(np.sqrt(np.mean((gradient_time(x, v0, k) - t) ** 2)) * 1e3)
    xmax = float(x.max())
    # turning depth of the ray at xmax: circle centre v0/k above the surface
    turning = (v0 / k) * (np.sqrt(1.0 + (k * xmax / (2.0 * v0)) ** 2) - 1.0)
    return {"v0_m_s": v0, "k_per_s": k, "rms_ms": rms, "turning_depth_m": float(turning)}


def gradient_start(picks, mesh, return_fit=False):
    """Starting model v = v0 + k depth (m/s) on the mesh cells, NaN in the air.

    Parameters
    ----------
    picks : Picks
    mesh : Mesh
    return_fit : bool
        Also return the fit (see :func:`fit_gradient`).

    Returns
    -------
    ndarray (nz, nx), or (ndarray, dict)
    """
    fit = fit_gradient(picks)
    v = fit["v0_m_s"] + fit["k_per_s"] * np.maximum(mesh.depth, 0.0)
    v = np.where(mesh.ground, v, np.nan)
    return (v, fit) if return_fit else v


def check_smoothing(value, name="start_smoothing"):
    """The smoothing of a starting model as a float (cells); InputError naming
    ``name`` unless it is a finite number >= 0."""
    try:
        sigma = float(value)
    except (TypeError, ValueError):
        sigma = float("nan")
    if not (np.isfinite(sigma) and sigma >= 0):
        raise InputError(f"start smoothing must be 0 or more model cells, got {value!r}", field=name)
    return sigma


def smooth_start(velocity, mesh, sigma_cells):
    """A starting model smoothed by a Gaussian of ``sigma_cells`` model cells, m/s.

    The smoothing acts on log-velocity (the inversion's parameter) over the ground
    cells only: the Gaussian-weighted mean of the ground cells around each one
    (normalised convolution), so air never leaks in, cells at the ground surface and
    the grid edges are means of ground cells only, and every value stays within the
    model's range. A constant or, away from the surface and the edges, a linearly
    varying log-velocity is returned unchanged. ``sigma_cells = 0`` returns the model
    as it is. NaN in the air.
    """
    from scipy.ndimage import gaussian_filter

    sigma = check_smoothing(sigma_cells)
    ground = mesh.ground
    v = np.where(ground, np.asarray(velocity, float), np.nan)
    if sigma == 0:
        return v
    weight = ground.astype(float)
    logv = np.where(ground, np.log(np.where(ground, v, 1.0)), 0.0)
    num = gaussian_filter(logv, sigma, mode="nearest")
    den = gaussian_filter(weight, sigma, mode="nearest")
    return np.where(ground, np.exp(num / np.maximum(den, 1e-12)), np.nan)


def layered_start(picks, mesh, terrain=None, n_branches=None, smooth_cells=LAYERED_SMOOTHING_CELLS, result=None,
                  sigma_ms=None):
    """Starting model from the layered interpretation, m/s on the mesh (NaN in air).

    Calls ``tomo.layered.interpret_line(picks, terrain, n_branches=n_branches)``
    (unless ``result``, a ``LayeredResult`` of these picks, is given) and
    :func:`paint_layers`, then :func:`smooth_start` with
    ``smooth_cells`` (0: the sharp layers; why smooth: module docstring). Returns the
    velocity array and the interpretation as a dict (stored in the run file).
    ``n_branches`` fixes the number of travel-time branches on every side (default:
    chosen by the BIC, which reads the curved branches of a strongly undulating
    refractor as extra layers). ``sigma_ms`` is the pick sigma where the picks give none
    (ms; default that of the layered stage), the inversion's own.
    """
    check_smoothing(smooth_cells)
    if result is None:
        sigma = {} if sigma_ms is None else {"sigma_ms": sigma_ms}
        result = interpret_line(picks, terrain=terrain, n_branches=n_branches, **sigma)
    v = np.asarray(paint_layers(result, mesh), float)
    v = np.where(mesh.ground, v, np.nan)
    if not np.all(np.isfinite(v[mesh.ground])) or np.any(v[mesh.ground] <= 0):
        raise InputError("the layered interpretation gave no usable velocity for every ground cell; "
                         "use the gradient start")
    return smooth_start(v, mesh, smooth_cells), result.to_dict()


def paint_layers(result, mesh):
    """A velocity grid (m/s) on ``mesh`` from a layered interpretation.

    Layer velocities of the line table; layer tops from the delay-time refractor where
    known and from the intercept-time depths elsewhere (:func:`interface_depths`).
    Depths are below the ground of the mesh's terrain.

    Returns
    -------
    ndarray, shape (mesh.nz, mesh.nx)
        Velocity, m/s; NaN in the air.
    """
    v = result.velocities
    tops = interface_depths(result, mesh.x) if v.size > 1 else np.zeros((0, mesh.nx))
    return paint_layer_table(v, tops, mesh)


def paint_layer_table(velocities_m_s, tops_m, mesh):
    """A velocity grid (m/s) on ``mesh`` from layer velocities (m/s, top to bottom) and
    the depths of the layer tops 2..n below the ground at every column (m, shape
    (n - 1, mesh.nx)); NaN in the air."""
    v = np.asarray(velocities_m_s, float)
    depth = mesh.depth
    out = np.full(mesh.shape, v[0])
    for k in range(1, v.size):
        out = np.where(depth >= np.asarray(tops_m)[k - 1][None, :], v[k], out)
    out[~mesh.ground] = np.nan
    return out
