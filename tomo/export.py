"""Exports of a run for other tools: the velocity grid and an iso-velocity surface.

Grid file (CSV, one row per ground cell)::

    x,z,velocity_m_s,coverage_m
    # x: cell-centre distance along the line, m; z: cell-centre elevation, m;
    # velocity_m_s: final model; coverage_m: ray length in the cell (0: no ray)

Surface file (CSV, one row per model column)::

    x,ground_z,depth_m,elevation_m,constrained

``depth_m`` is vertical, below the ground at ``x``; ``elevation_m`` the elevation of
the first place, going down from the ground, where the model reaches the chosen
velocity; both are empty where the column never reaches it. ``constrained`` is 1 where
that place lies above the depth of investigation (:func:`investigation_elevation`,
where the ray coverage thins out), else 0: a surface drawn where few or no rays go is
mostly the starting model's, not the data's.

The surface is the usual way of reading a refractor out of a gridded tomogram: an
iso-velocity contour between the overburden and refractor velocities (e.g. Lanz,
Maurer & Green 1998, Geophysics 63, "Refraction tomography over a buried waste disposal
site", from memory; common practice).
"""

from __future__ import annotations

import numpy as np

from .errors import InputError
from .fileio import atomic_open

__all__ = [
    "ground_elevation", "ray_cells", "deepest_ray_elevation", "covered", "DOI_FRACTION", "investigation_elevation", "grid_table", "contour_surface",
    "check_contour", "check_output_path", "write_grid", "write_surface",
]


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


def grid_table(run):
    """The ground cells of the final model as flat arrays.

    Returns
    -------
    dict
        ``x`` and ``z`` (m, cell centres), ``velocity_m_s`` and ``coverage_m``, one value
        per ground cell, row by row from the top.
    """
    v = np.asarray(run.velocity, float)
    xx, zz = np.meshgrid(run.x, run.z)
    ground = np.isfinite(v)
    return {"x": xx[ground], "z": zz[ground], "velocity_m_s": v[ground],
            "coverage_m": np.asarray(run.coverage, float)[ground]}


def check_contour(run, velocity_m_s):
    """Raise InputError unless ``velocity_m_s`` lies strictly inside the model's range."""
    v = np.asarray(run.velocity, float)
    lo, hi = float(np.nanmin(v)), float(np.nanmax(v))
    value = float(velocity_m_s)
    if not np.isfinite(value) or not (lo < value < hi):
        raise InputError(
            f"contour velocity {value:g} m/s is outside the model's range "
            f"({lo:.0f} to {hi:.0f} m/s)", field="--contour")
    return value


def contour_surface(run, velocity_m_s):
    """The ``velocity_m_s`` iso-velocity surface, column by column.

    In each column the model is read downward from the ground; the surface is the
    first crossing of ``velocity_m_s``, placed by linear interpolation between the two
    cell centres that bracket it. A column whose top ground cell is already faster is
    placed at that cell's centre.

    Returns
    -------
    dict
        ``x`` (m), ``ground_z`` (m), ``depth_m``, ``elevation_m`` (NaN where the column
        never reaches the velocity) and ``constrained`` (bool: the surface lies above
        the depth of investigation, :func:`investigation_elevation`).

    Raises
    ------
    InputError
        If the velocity is outside the model's range.
    """
    value = check_contour(run, velocity_m_s)
    v = np.asarray(run.velocity, float)
    doi = investigation_elevation(run)
    z = np.asarray(run.z, float)
    nz, nx = v.shape
    ground_z = ground_elevation(run, run.x)
    elevation = np.full(nx, np.nan)
    constrained = np.zeros(nx, dtype=bool)
    for j in range(nx):
        rows = np.flatnonzero(np.isfinite(v[:, j]))
        if rows.size == 0:
            continue
        col = v[rows, j]
        fast = np.flatnonzero(col >= value)
        if fast.size == 0:
            continue
        k = fast[0]
        if k == 0:
            elevation[j] = z[rows[0]]
            continue
        a, b = rows[k - 1], rows[k]
        frac = (value - v[a, j]) / (v[b, j] - v[a, j])
        elevation[j] = z[a] + frac * (z[b] - z[a])
    with np.errstate(invalid="ignore"):
        constrained = np.isfinite(elevation) & (elevation >= doi)
    return {"x": np.asarray(run.x, float), "ground_z": ground_z, "depth_m": ground_z - elevation,
            "elevation_m": elevation, "constrained": constrained}


def check_output_path(path):
    """Raise InputError unless ``path`` can be written (its folder exists and is writable,
    and it is not itself a folder). Used to refuse a request before any output is made."""
    import os
    from pathlib import Path

    path = Path(path)
    folder = path.parent if str(path.parent) else Path(".")
    if path.is_dir():
        raise InputError("is a folder, expected a file name", path=path)
    if not folder.is_dir():
        raise InputError("output folder does not exist", path=folder)
    if not os.access(folder, os.W_OK | os.X_OK):
        raise InputError("output folder is not writable", path=folder)
    return path


def _fmt(value, digits):
    return "" if not np.isfinite(value) else f"{value:.{digits}f}"


def write_grid(path, run, source=None):
    """Write the grid export (see module docstring) atomically; returns the row count."""
    table = grid_table(run)
    with atomic_open(path, "w", encoding="utf-8", newline="") as f:
        f.write(f"# tomo {run.tomo_version} velocity grid{f' from {source}' if source else ''}: "
                "x, z cell centres (m), velocity (m/s), ray length in cell (m; 0 = no ray)\n")
        f.write("x,z,velocity_m_s,coverage_m\n")
        for x, z, vel, cov in zip(table["x"], table["z"], table["velocity_m_s"], table["coverage_m"]):
            f.write(f"{x:.3f},{z:.3f},{vel:.1f},{cov:.4f}\n")
    return int(table["x"].size)


def write_surface(path, run, velocity_m_s, source=None, surface=None):
    """Write the iso-velocity surface export (see module docstring) atomically.

    ``surface`` may be passed if already computed by :func:`contour_surface`.
    Returns the surface dict.
    """
    surface = surface if surface is not None else contour_surface(run, velocity_m_s)
    with atomic_open(path, "w", encoding="utf-8", newline="") as f:
        f.write(f"# tomo {run.tomo_version} {float(velocity_m_s):g} m/s iso-velocity surface"
                f"{f' from {source}' if source else ''}: depth vertical below ground (m), "
                "empty where not reached; constrained = 1 where rays cross it\n")
        f.write("x,ground_z,depth_m,elevation_m,constrained\n")
        for k in range(surface["x"].size):
            f.write(f"{surface['x'][k]:.3f},{surface['ground_z'][k]:.3f},{_fmt(surface['depth_m'][k], 3)},"
                    f"{_fmt(surface['elevation_m'][k], 3)},{int(surface['constrained'][k])}\n")
    return surface
