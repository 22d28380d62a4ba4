"""Where the rays go: coverage, the deepest ray and the depth of investigation of a run.

Every function takes a run (anything with the run file's ``x, z, velocity, coverage,
terrain_x, terrain_z`` arrays; see :mod:`tomo.results.runfile`) and returns arrays on
its model grid or per model column.
"""

from __future__ import annotations

import numpy as np

__all__ = ["ground_elevation", "ray_cells", "deepest_ray_elevation", "covered", "DOI_FRACTION",
           "investigation_elevation"]


def ground_elevation(run, x):
    """Ground elevation (m) at ``x`` (m) from the run's terrain, flat beyond its ends."""
    return np.interp(np.asarray(x, float), run.terrain_x, run.terrain_z)


def ray_cells(run):
    """Boolean (nz, nx): ground cells that some ray crosses (coverage > 0)."""
    v = np.asarray(run.velocity, float)
    return np.isfinite(v) & (np.nan_to_num(np.asarray(run.coverage, float)) > 0)


def deepest_ray_elevation(run):
    """Per model column, the elevation (m) of the bottom edge of the deepest cell a ray
    crosses; NaN in columns no ray crosses."""
    cov = ray_cells(run)
    z = np.asarray(run.z, float)
    cell = abs(z[0] - z[1]) if z.size > 1 else 1.0
    out = np.full(run.x.size, np.nan)
    any_cov = cov.any(axis=0)
    deepest = cov.shape[0] - 1 - np.argmax(cov[::-1, :], axis=0)  # rows go downward
    out[any_cov] = z[deepest[any_cov]] - cell / 2
    return out


def covered(run):
    """Boolean (nz, nx): the ray envelope, ground cells from the ground down to the
    deepest ray of their column, in columns some ray crosses.

    Between ray paths the model is set by the regularisation from the rays around it;
    below the deepest ray and in columns without rays no ray reaches, so the model
    there is the starting model's. Figures blank the cells outside this envelope.
    """
    bottom = deepest_ray_elevation(run)
    z = np.asarray(run.z, float)
    cell = abs(z[0] - z[1]) if z.size > 1 else 1.0
    v = np.asarray(run.velocity, float)
    with np.errstate(invalid="ignore"):
        inside = z[:, None] - cell / 2 >= bottom[None, :] - 1e-9
    return np.isfinite(v) & inside & np.isfinite(bottom)[None, :]


#: Share of a column's ray length that lies above the depth of investigation.
DOI_FRACTION = 0.95


def _running_median(values, width):
    """Median over ``width`` neighbours (NaN ignored; NaN stays NaN)."""
    half = int(width) // 2
    out = np.array(values, float, copy=True)
    for j in np.flatnonzero(np.isfinite(values)):
        block = values[max(0, j - half): j + half + 1]
        out[j] = np.nanmedian(block)
    return out


def investigation_elevation(run, fraction=DOI_FRACTION, window=3, median_width=None):
    """Depth-of-investigation line: per model column, the elevation (m) above which
    ``fraction`` of the ray length in the column lies (the coverage first averaged over
    ``window`` neighbouring columns, the line then a running median over
    ``median_width`` columns, by default 8 % of the grid's width, and never below the
    deepest ray); NaN in columns no ray
    crosses.

    A handful of deep rays carry little weight in the inversion; the line marks where
    the coverage becomes too thin to trust the velocities (a coverage-based depth of
    investigation; common practice, 95 % is our choice). The deepest ray of each
    column is :func:`deepest_ray_elevation`.
    """
    cov = np.where(ray_cells(run), np.nan_to_num(np.asarray(run.coverage, float)), 0.0)
    if window > 1:
        kernel = np.ones(int(window)) / int(window)
        cov = np.apply_along_axis(lambda row: np.convolve(row, kernel, mode="same"), 1, cov)
    z = np.asarray(run.z, float)
    cell = abs(z[0] - z[1]) if z.size > 1 else 1.0
    total = cov.sum(axis=0)
    out = np.full(run.x.size, np.nan)
    deepest = deepest_ray_elevation(run)
    for j in np.flatnonzero((total > 0) & np.isfinite(deepest)):
        share = np.cumsum(cov[:, j]) / total[j]
        k = int(np.searchsorted(share, fraction - 1e-12))
        out[j] = max(z[min(k, z.size - 1)] - cell / 2, deepest[j])
    # a single ray bundle can make one column's line jump; the median keeps it steady
    if median_width is None:
        median_width = max(5, int(0.08 * run.x.size)) | 1
    out = _running_median(out, median_width) if median_width > 1 else out
    return np.maximum(out, np.where(np.isfinite(deepest), deepest, np.nan))
