"""One line's survey input read together: picks, ground and, when surveyed, map stations.

The commands that read picks (``check``, ``layers``, ``invert``) call
:func:`read_line` with the files the user named, so that a stations file changes the
same things everywhere: distances along the surveyed line, the ground from the station
elevations, and the map system recorded for the exports.
"""

from __future__ import annotations

from dataclasses import dataclass

from ..core.errors import InputError
from .crs import check_crs
from .picks import read_picks
from .stations import read_stations
from .terrain import Terrain, read_terrain

__all__ = ["LineInput", "read_line"]


@dataclass
class LineInput:
    """The survey of one line as the later stages use it.

    Attributes
    ----------
    picks : tomo.survey.picks.Picks
        Positions in m along the line (along the surveyed line with stations).
    terrain : tomo.survey.terrain.Terrain or None
        The ground; None for flat ground at the stations' elevations (the caller decides).
    stations : tomo.survey.stations.Stations or None
        The line in map coordinates.
    notices : list of str
        Everything a user should know from reading, in file order.
    """

    picks: object
    terrain: object = None
    stations: object = None
    notices: list = None


def read_line(picks_path, terrain_path=None, stations_path=None, crs=None, time_unit="ms", distance_unit="m"):
    """Read the pick file with its terrain or stations file.

    Parameters
    ----------
    picks_path : str or Path
    terrain_path : str or Path, optional
        Terrain file (x, z); not with ``stations_path``, whose elevations are the ground.
    stations_path : str or Path, optional
        Stations file (:mod:`tomo.survey.stations`).
    crs : int or str, optional
        EPSG code of the stations' easting and northing (needs ``stations_path``).
    time_unit, distance_unit : str
        Units of the pick file's times and of its and the terrain file's positions
        (:mod:`tomo.survey.units`); a stations file is in the metres of its map system.

    Returns
    -------
    LineInput

    Raises
    ------
    InputError
        From the readers, for an unknown EPSG code, for ``crs`` without stations, for
        both a terrain and a stations file, and for picks beyond the end stations.
    """
    if stations_path is None:
        if crs is not None:
            raise InputError("an EPSG code places surveyed stations on the map; give --stations STATIONS.csv too",
                             field="--crs")
        terrain = read_terrain(terrain_path, distance_unit) if terrain_path else None
        picks = read_picks(picks_path, terrain=terrain, time_unit=time_unit, distance_unit=distance_unit)
        return LineInput(picks, terrain, None, list(picks.notices))
    if terrain_path is not None:
        raise InputError("the stations file gives the ground elevations; leave out --terrain", field="--terrain")
    map_crs = check_crs(crs) if crs is not None else None
    stations = read_stations(stations_path, crs=map_crs)
    # Elevations interpolated in the picks' x equal those interpolated in distance along
    # the line: both are linear between the same stations.
    ground_in_x = Terrain(stations.x, stations.elevation, path=stations.path)
    picks = stations.along_line(read_picks(picks_path, terrain=ground_in_x, time_unit=time_unit,
                                           distance_unit=distance_unit))
    notices = list(stations.notices) + list(picks.notices)
    return LineInput(picks, stations.terrain(), stations, notices)
