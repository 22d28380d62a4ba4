"""The public Python API: whole steps of the workflow, from files or arrays to results.

The command line calls only these functions; a notebook can too. Every function here
uses the same defaults as the command of the same name.
"""

from __future__ import annotations

from .core.errors import InputError, TomoError
from .layered.branches import check_branch_count
from .results.runfile import RunWriter
from .survey.geometry import station_spacing
from .survey.line import read_line
from .survey.meshspec import inversion_mesh_spec, read_mesh_spec
from .survey.terrain import terrain_from_stations
from .tomography.inversion import InversionSettings, invert
from .tomography.mesh import mesh_for_picks
from .tomography.starting import LAYERED_SMOOTHING_CELLS, check_smoothing, gradient_start, layered_start

__all__ = ["run_inversion"]


def run_inversion(picks_path, terrain_path=None, mesh_path=None, start="layered", out_path="run.h5",
                  progress=None, branches=None, start_smoothing=None, stations_path=None, crs=None, **settings):
    """Read the files, build the mesh and starting model, invert, write the run file.

    Parameters
    ----------
    picks_path : str or Path
        Pick file (CSV).
    terrain_path, mesh_path : str or Path, optional
        Terrain file (CSV) and mesh spec (TOML); the mesh is otherwise chosen from the
        survey (``tomo.mesh.mesh_for_picks``).
    start : {"layered", "gradient"}
        Starting model: from the layered interpretation (``tomo.layered``) or a 1-D
        velocity-depth gradient fitted to the picks (``tomo.starting``).
    out_path : str or Path
        Run file, rewritten after every finished iteration.
    progress : callable, optional
        See :func:`invert`.
    branches : int, optional
        Travel-time branches on every side for the layered start
        (``tomo.starting.layered_start``; default: chosen by the BIC).
    start_smoothing : float, optional
        Gaussian smoothing of the layered start, model cells (default
        ``tomo.starting.LAYERED_SMOOTHING_CELLS``; 0: the sharp layers).
    stations_path : str or Path, optional
        Stations file (``tomo.survey.stations``): distances along the surveyed line,
        the ground from its elevations, and the line recorded in the run for exports.
    crs : int or str, optional
        EPSG code of the stations' easting and northing.
    **settings
        Fields of :class:`InversionSettings`.

    Returns
    -------
    RunData
    """
    try:
        opts = InversionSettings.from_dict(settings).check()
    except TypeError as exc:
        raise InputError(f"bad setting: {exc}") from None
    line = read_line(picks_path, terrain_path, stations_path, crs)
    picks, terrain = line.picks, line.terrain
    notes = list(line.notices)
    if terrain is None:
        terrain = terrain_from_stations(picks)
        if terrain is not None:
            notes.append("no terrain file: the ground is drawn through the station elevations")
    spec = inversion_mesh_spec(station_spacing(picks), read_mesh_spec(mesh_path) if mesh_path else None)
    mesh, spec = mesh_for_picks(picks, terrain, spec)
    layered = None
    if start not in ("layered", "gradient"):
        raise InputError(f"unknown starting model {start!r} (expected 'layered' or 'gradient')", field="start")
    if branches is not None:
        if start != "layered":
            raise InputError("branches apply to the layered start only", field="branches")
        check_branch_count(branches)
    if start_smoothing is not None and start != "layered":
        raise InputError("start smoothing applies to the layered start only (the gradient start is smooth)",
                         field="start_smoothing")
    smoothing = LAYERED_SMOOTHING_CELLS if start_smoothing is None else check_smoothing(start_smoothing)
    start_used = start
    if start == "layered":
        try:
            velocity, layered = layered_start(picks, mesh, terrain, n_branches=branches, smooth_cells=smoothing)
        except TomoError as exc:
            # a line the layered methods cannot read still gets a tomogram, from the
            # gradient start, with a note saying so
            notes.append(f"layered starting model not available ({exc}); the gradient start was used")
            start_used = "gradient"
    if start_used == "gradient":
        velocity, info = gradient_start(picks, mesh, return_fit=True)
        notes.append(f"starting model: v = {info['v0_m_s']:.0f} m/s + {info['k_per_s']:.2f} 1/s x depth "
                     f"fitted to the first arrivals")
    extra = {"start": start_used, "start_requested": start, "layered_branches": branches,
             "start_smoothing_cells": smoothing if start_used == "layered" else None,
             "mesh_spec": spec.as_dict(), "picks_file": str(picks_path),
             "terrain_file": None if terrain_path is None else str(terrain_path),
             "mesh_file": None if mesh_path is None else str(mesh_path),
             "stations_file": None if stations_path is None else str(stations_path)}
    result = invert(picks, mesh, velocity, opts, progress=progress,
                    checkpoint=None if out_path is None else RunWriter(out_path, stations=line.stations),
                    layered=layered, notes=notes, extra_settings=extra)
    result.stations = line.stations
    return result


