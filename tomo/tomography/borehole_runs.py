"""An inversion tied to boreholes: the points its surfaces must pass through, and the run
made twice, without and with them.

Each borehole logged an interface (:mod:`tomo.survey.boreholes`); in the tomogram that
interface is an iso-velocity surface, by default the mean of the layer velocities above
and below the refractor it logged (common practice; the comparison figure reads the
same surface). The run without the boreholes gives the depths the picks alone put the
surface at; the run with them (:mod:`tomo.tomography.constraints`) is the one kept.
Both start from the same model, so what differs between them is the boreholes' doing
(:mod:`tomo.analysis.borehole_fit` compares them).
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np

from ..core.errors import InputError, TomoError
from ..layered.interpret import interpret_line
from ..layered.result import layered_result
from ..survey.boreholes import DEEPEST
from .constraints import ContourPoints
from .inversion import invert

__all__ = ["contour_points", "invert_twice", "STAGES"]

#: Labels of the two runs in the progress lines.
STAGES = ("without boreholes", "with boreholes")


def _contours(boreholes, layered, picks, terrain, contour_m_s):
    """The contour velocity (m/s) of each borehole (module docstring)."""
    if contour_m_s is not None:
        return np.full(len(boreholes), float(contour_m_s))
    result = layered_result(layered)
    if result is None:
        try:  # a gradient start: the layers only name the surface
            result = interpret_line(picks, terrain=terrain)
        except TomoError:
            result = None
    if result is None or len(result.layers) < 2:
        raise InputError("the boreholes need the velocity of the surface they lie on and the layered "
                         "interpretation gives none: give --contour V (m/s)", field="--contour")
    n = len(result.layers) - 1
    for k, interface in enumerate(boreholes.interface):
        if interface > n:
            raise InputError(f"borehole {boreholes.label[k]} logged interface {interface}, but the layered "
                             f"interpretation has {n} refractor(s): give --contour V (m/s)", path=boreholes.path,
                             line=int(boreholes.line[k]), field="interface")
    return np.array([result.contour_m_s(n if k == DEEPEST else int(k)) for k in boreholes.interface], float)


def contour_points(boreholes, mesh, picks, layered=None, terrain=None, contour_m_s=None):
    """The :class:`ContourPoints` of ``boreholes`` (placed on the line) on ``mesh``.

    Parameters
    ----------
    boreholes : tomo.survey.boreholes.Boreholes
    mesh : Mesh
        Its ground gives each borehole's elevation.
    picks : Picks
        Interpreted for the layer velocities when ``layered`` is None and no
        ``contour_m_s`` is given.
    layered : LayeredResult or dict, optional
        The layered result the contours come from.
    terrain : Terrain, optional
        For that interpretation.
    contour_m_s : float, optional
        One surface for every borehole, m/s.

    Raises
    ------
    InputError
        Without a contour to be had, or for a borehole logging an interface the
        layered result does not have.
    """
    velocity = _contours(boreholes, layered, picks, terrain, contour_m_s)
    ground = mesh.terrain.elevation(boreholes.x, extrapolate=True)
    return ContourPoints(np.asarray(boreholes.x, float), ground - boreholes.depth_m, np.asarray(boreholes.sigma_m),
                         velocity, tuple(boreholes.label))


def invert_twice(picks, mesh, start_velocity, settings, points, progress=None, checkpoint=None, **options):
    """The run without ``points`` and the run with them (:func:`tomo.tomography.inversion.invert`
    twice from ``start_velocity``; ``options`` go to both). Only the second is given to
    ``checkpoint``; progress lines carry :data:`STAGES`. Returns ``(free, tied)`` RunData."""
    def staged(stage):
        return None if progress is None else (lambda info: progress(replace(info, stage=stage)))

    notes = options.pop("notes", None) or []
    free = invert(picks, mesh, start_velocity, settings, progress=staged(STAGES[0]), notes=list(notes), **options)
    tied = invert(picks, mesh, start_velocity, settings, progress=staged(STAGES[1]), checkpoint=checkpoint,
                  notes=list(notes), points=points, **options)
    return free, tied
