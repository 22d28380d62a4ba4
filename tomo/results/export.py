"""Exports of a run for other tools: the velocity grid and an iso-velocity surface.

Grid file (CSV, one row per ground cell)::

    x,z,velocity_m_s,coverage_m
    # x: cell-centre distance along the line, m; z: cell-centre elevation, m;
    # velocity_m_s: final model; coverage_m: ray length in the cell (0: no ray)

Surface file (CSV, one row per model column)::

    x,ground_z,depth_m,elevation_m,constrained[,easting,northing]

or, for an ensemble file (``tomo ensemble``)::

    x,ground_z,depth_m,depth_low_m,depth_high_m,elevation_m,constrained,band_from[,easting,northing]

with ``depth_m`` the members' median and ``depth_low_m``, ``depth_high_m`` the 5-95 %
band (:mod:`tomo.uncertainty.bands`); ``band_from`` says which method set the band's
edges in that column: ``members`` (their 5-95 % range) or ``members + extremal bound``
(widened by a most-squares bound, :mod:`tomo.uncertainty.bounds`).

``depth_m`` is vertical, below the ground at ``x``; ``elevation_m`` the elevation of
the first place, going down from the ground, where the model reaches the chosen
velocity; both are empty where the column never reaches it. ``constrained`` is 1 where
that place lies above the depth of investigation (:func:`investigation_elevation`,
where the ray coverage thins out), else 0: a surface drawn where few or no rays go is
mostly the starting model's, not the data's. A run on a line in map coordinates adds
the column's ``easting, northing`` on the surveyed line (m; empty beyond the end stations).

The surface itself and the depth of investigation come from :mod:`tomo.analysis`.
"""

from __future__ import annotations

import numpy as np

from ..analysis.surface import contour_surface
from ..core.fileio import atomic_open
from ..uncertainty.bands import surface_band

__all__ = ["grid_table", "write_grid", "write_surface"]


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
    band = run.ensemble is not None
    if band:
        surface = surface_band(run, velocity_m_s)
    else:
        surface = surface if surface is not None else contour_surface(run, velocity_m_s)
    on_map = run.stations is not None
    if on_map:
        easting, northing = run.stations.map_at(surface["x"])
    what = (f"median of {surface.n_members} members with the 5-95 % band (depth_low_m to depth_high_m)"
            if band else "the tomogram's")
    with atomic_open(path, "w", encoding="utf-8", newline="") as f:
        f.write(f"# tomo {run.tomo_version} {float(velocity_m_s):g} m/s iso-velocity surface, {what}"
                f"{f' from {source}' if source else ''}: depth vertical below ground (m), "
                "empty where not reached; constrained = 1 where rays cross it\n")
        f.write("x,ground_z,depth_m," + ("depth_low_m,depth_high_m," if band else "") + "elevation_m,constrained"
                + (",band_from" if band else "") + (",easting,northing\n" if on_map else "\n"))
        for k in range(surface["x"].size):
            f.write(f"{surface['x'][k]:.3f},{surface['ground_z'][k]:.3f},{_fmt(surface['depth_m'][k], 3)},"
                    + (f"{_fmt(surface.depth_low_m[k], 3)},{_fmt(surface.depth_high_m[k], 3)}," if band else "")
                    + f"{_fmt(surface['elevation_m'][k], 3)},{int(surface['constrained'][k])}"
                    + (f",{surface.band_from[k]}" if band else "")
                    + (f",{_fmt(easting[k], 3)},{_fmt(northing[k], 3)}\n" if on_map else "\n"))
    return surface
