"""A line's survey as one value: its picks, its ground, its stations on the map and what
reading them noticed.

:func:`read_survey` is the door every workflow goes through (``tomo check``, ``tomo
layers``, ``tomo invert`` and :mod:`tomo.api`); it reads the files with
:func:`tomo.survey.line.read_line` (the terrain or stations file first, the picks are
placed on it). Without either, the tomography draws the ground through the station
elevations (:meth:`Survey.ground`).
"""

from __future__ import annotations

import os
from dataclasses import dataclass, field
from typing import Any

from ..core.errors import InputError
from .line import read_line
from .picks import Picks, read_picks
from .terrain import Terrain, read_terrain, terrain_from_stations
from .units import check_units

__all__ = ["Survey", "read_survey", "NO_TERRAIN_NOTE"]

#: Note recorded when the tomography's ground comes from the station elevations.
NO_TERRAIN_NOTE = "no terrain file: the ground is drawn through the station elevations"


@dataclass(frozen=True)
class Survey:
    """First-arrival picks of one line with its ground.

    Attributes
    ----------
    picks : Picks
        Times and uncertainties in s, positions in m (elevation up positive).
    terrain : Terrain or None
        Ground elevation (m) from a terrain or stations file; None without either.
    stations : Stations or None
        The surveyed line on the map (:mod:`tomo.survey.stations`), when given; the
        picks' x are then distances along it.
    notices : list of str
        What reading the files did that a user should know (ignored columns, stations
        put on the ground, ...), one line each.
    """

    picks: Picks
    terrain: Terrain | None = None
    stations: Any = None
    notices: list[str] = field(default_factory=list)

    @property
    def picks_path(self) -> str | None:
        """The pick file's name, or None for picks made in memory."""
        return self.picks.path

    @property
    def terrain_path(self) -> str | None:
        """The terrain file's name, or None (also when the ground is the stations')."""
        return None if self.terrain is None or self.stations is not None else self.terrain.path

    @property
    def stations_path(self) -> str | None:
        """The stations file's name, or None."""
        return None if self.stations is None else self.stations.path

    def ground(self) -> tuple[Terrain | None, list[str]]:
        """The ground for a model grid and the notes that go with it.

        The terrain file's when there is one; else a ground through the highest station
        at each distance (:func:`terrain_from_stations`), with :data:`NO_TERRAIN_NOTE`;
        None (flat ground at z = 0) when every station is at z = 0.
        """
        if self.terrain is not None:
            return self.terrain, []
        terrain = terrain_from_stations(self.picks)
        return terrain, ([] if terrain is None else [NO_TERRAIN_NOTE])


def read_survey(picks: str | os.PathLike | Picks, terrain: str | os.PathLike | Terrain | None = None,
                stations: str | os.PathLike | None = None, crs: int | str | None = None, *,
                time_unit: str = "ms", distance_unit: str = "m") -> Survey:
    """Read a pick file and, if given, a terrain or stations file into a :class:`Survey`.

    Parameters
    ----------
    picks : str, PathLike or Picks
        Pick file (CSV; columns in :mod:`tomo.survey.picks`) or picks already read.
    terrain : str, PathLike or Terrain, optional
        Terrain file (CSV ``x,z``, m) or a terrain already read. Stations without
        elevations are put on it.
    stations : str or PathLike, optional
        Stations file (x, easting, northing, elevation; :mod:`tomo.survey.stations`),
        instead of ``terrain``: distances along the surveyed line, its elevations as
        the ground. Needs a pick file.
    crs : int or str, optional
        EPSG code of the stations' easting and northing (a projected system in m).
    time_unit : {"ms", "s"}
        Unit of the pick file's time and sigma columns (default ms).
    distance_unit : {"m", "ft", "cm"}
        Unit of the pick and terrain files' positions and elevations (default m).
        Everything read is converted to s and m. Picks whose scales no refraction line
        has in the declared units are refused, naming the likely unit
        (:mod:`tomo.survey.units`).

    Returns
    -------
    Survey

    Raises
    ------
    InputError
        One line naming the file, line and field of the first bad value.
    """
    check_units(time_unit, distance_unit)
    if isinstance(picks, Picks) or isinstance(terrain, Terrain):
        if stations is not None or crs is not None:
            raise InputError("a stations file goes with a pick file and no terrain", field="stations")
        ground = terrain if isinstance(terrain, Terrain) or terrain is None else read_terrain(terrain, distance_unit)
        read = picks if isinstance(picks, Picks) else read_picks(picks, terrain=ground, time_unit=time_unit,
                                                                  distance_unit=distance_unit)
        return Survey(picks=read, terrain=ground, notices=list(read.notices))
    line = read_line(picks, terrain, stations, crs, time_unit=time_unit, distance_unit=distance_unit)
    return Survey(picks=line.picks, terrain=line.terrain, stations=line.stations, notices=list(line.notices))
