"""Boreholes in the workflow's steps (private to :mod:`tomo.api.workflow`): placed on a
survey's line and checked against a grid, the layered start tied to them, and the
inversion made without and with them."""

from __future__ import annotations

import copy
import math
import os
from collections.abc import Callable
from typing import Any

import numpy as np

from ..core.errors import InputError, TomoError
from ..layered.interpret import interpret_line
from ..layered.result import LayeredResult
from ..survey.boreholes import Boreholes, read_boreholes
from ..survey.survey import Survey
from ..tomography.inversion import InversionSettings, IterationInfo, invert
from ..tomography.mesh import Mesh

__all__: list[str] = []

PathLike = str | os.PathLike


def place_boreholes(boreholes: PathLike | Boreholes, survey: Survey) -> Boreholes:
    """Boreholes (a file or read) placed along the survey's line: refused beyond its
    first and last shot or geophone (InputError naming the borehole's file line)."""
    read = boreholes if isinstance(boreholes, Boreholes) else read_boreholes(boreholes)
    p = survey.picks
    xs = np.concatenate([p.source_x, p.receiver_x])
    return read.on_line(float(xs.min()), float(xs.max()), stations=survey.stations)


def grid_boreholes(survey: Survey, grid: Mesh | None, boreholes: PathLike | Boreholes | None,
                   contour_m_s: float | None) -> Boreholes | None:
    """The boreholes of a run placed on its line and checked against its grid (when
    given; and the contour velocity checked); None without boreholes."""
    if contour_m_s is not None and not (math.isfinite(contour_m_s) and contour_m_s > 0):
        raise InputError(f"contour velocity must be a positive number of m/s, got {contour_m_s!r}", field="--contour")
    if boreholes is None:
        if contour_m_s is not None:
            raise InputError("a contour velocity goes with boreholes (--boreholes B.csv)", field="--contour")
        return None
    placed = place_boreholes(boreholes, survey)
    if grid is None:
        return placed
    return placed.check_depths(grid.terrain.elevation(placed.x, extrapolate=True), grid.z_bottom)


def tied_layers(survey: Survey, terrain: Any, layers: LayeredResult | None, branches: int | None,
                boreholes: Boreholes, sigma_ms: float) -> LayeredResult | None:
    """The layered result of the start tied to the boreholes (:mod:`tomo.layered.ties`)
    unless it already is; None where the picks give none (the start then says why)."""
    from ..layered.ties import tie_to_boreholes

    if layers is None:
        try:
            layers = interpret_line(survey.picks, terrain=terrain, n_branches=branches, sigma_ms=sigma_ms)
        except TomoError:
            return None
    return layers if layers.ties else tie_to_boreholes(copy.deepcopy(layers), boreholes)


def invert_with_boreholes(survey: Survey, grid: Mesh, terrain: Any, velocity: Any, opts: InversionSettings,
                          progress: Callable[[IterationInfo], object], checkpoint: Any, layered: Any,
                          notes: list[str], extra: dict[str, Any], placed: Boreholes | None,
                          contour_m_s: float | None, **passes: Any) -> Any:
    """The inversion (:func:`tomo.tomography.inversion.invert`); with boreholes, the run
    without them and the run with them (returned, and written), with the comparison of
    the two in ``borehole_fit``; ``passes`` (``pass_progress``, ``start_pass``) go to each run."""
    if placed is None:
        return invert(survey.picks, grid, velocity, opts, progress=progress, checkpoint=checkpoint,
                      layered=layered, notes=notes, extra_settings=extra, **passes)
    from ..analysis.borehole_fit import fit_boreholes
    from ..tomography.borehole_runs import contour_points, invert_twice

    points = contour_points(placed, grid, survey.picks, layered, terrain, contour_m_s)
    extra = dict(extra, boreholes_file=placed.path, borehole_contours_m_s=[float(v) for v in points.velocity_m_s])
    free, data = invert_twice(survey.picks, grid, velocity, opts, points, progress=progress, checkpoint=checkpoint,
                              layered=layered, notes=notes, extra_settings=extra, **passes)
    data.borehole_fit = fit_boreholes(free, data, points, opts.chi2_tolerance)
    if checkpoint is not None:
        checkpoint(data)  # once more, with the comparison
    return data
