"""Boreholes on a run's line: placed along it and checked against its spread and grid."""

from __future__ import annotations

import numpy as np

from .coverage import ground_elevation

__all__ = ["place_boreholes", "grid_bottom_elevation", "borehole_elevations"]


def grid_bottom_elevation(run):
    """Elevation (m) of the bottom edge of the run's model grid."""
    z = np.asarray(run.z, float)
    cell = abs(z[0] - z[1]) if z.size > 1 else 1.0
    return float(z.min() - cell / 2)


def place_boreholes(boreholes, run):
    """``boreholes`` (:class:`tomo.survey.boreholes.Boreholes`, as read) placed on the run's line.

    Positions become distances along the line (projected onto the surveyed line when
    given by easting and northing; moved with the stations when the run has them).

    Raises
    ------
    InputError
        Naming file, line and field: a borehole beyond the first or last shot or
        geophone, or a logged depth below the bottom of the model grid.
    """
    p = run.picks
    xs = np.concatenate([np.asarray(p["source_x"], float), np.asarray(p["receiver_x"], float)])
    placed = boreholes.on_line(float(xs.min()), float(xs.max()), stations=run.stations)
    placed.check_depths(ground_elevation(run, placed.x), grid_bottom_elevation(run))
    return placed


def borehole_elevations(run):
    """(ground elevation, interface elevation) of the run's boreholes, m; empty without any."""
    b = run.boreholes
    if b is None or not len(b):
        return np.zeros(0), np.zeros(0)
    ground = ground_elevation(run, b.x)
    return ground, b.elevation_m(ground)
