"""Options shared by the commands that read a pick file: the line in map coordinates."""

from __future__ import annotations


def add_line_options(parser):
    """``--stations STATIONS.csv``, ``--crs EPSG`` (see :mod:`tomo.survey.stations`),
    ``--time-unit`` and ``--distance-unit`` (:mod:`tomo.survey.units`)."""
    from ..api import DISTANCE_UNITS, SURVEY_DEFAULTS, TIME_UNITS

    d = SURVEY_DEFAULTS
    parser.add_argument("--time-unit", choices=list(TIME_UNITS), default=d["time_unit"],
                        help=f"unit of the pick file's time_ms and sigma_ms columns as written (default "
                             f"{d['time_unit']}); a file "
                             "in seconds is refused unless declared")
    parser.add_argument("--distance-unit", choices=list(DISTANCE_UNITS), default=d["distance_unit"],
                        help=f"unit of the positions and elevations of the pick and terrain files (default "
                             f"{d['distance_unit']}; ft is "
                             "the international foot); results are in metres")
    parser.add_argument("--stations", metavar="STATIONS.csv",
                        help="surveyed stations: x (as in the picks), easting, northing, elevation (m); the "
                             "section then runs along the surveyed line and its ground is the station elevations "
                             "(instead of --terrain)")
    parser.add_argument("--crs", metavar="EPSG",
                        help="EPSG code of the stations' easting and northing, a projected system in metres "
                             "(e.g. 32633 for UTM zone 33N); needed to place exports on the map")


def read_survey_args(args):
    """The :class:`tomo.api.Survey` of ``args.picks`` with ``--terrain``, ``--stations``, ``--crs``."""
    from ..api import read_survey

    return read_survey(args.picks, args.terrain, args.stations, args.crs, time_unit=args.time_unit,
                       distance_unit=args.distance_unit)


def add_boreholes_option(parser):
    """``--boreholes B.csv`` for the commands that draw, list or export a run's boreholes."""
    parser.add_argument("--boreholes", metavar="B.csv",
                        help="boreholes: x (or easting, northing), depth_m below ground to the logged "
                             "interface, optional sigma_m, label, interface; drawn and listed beside the "
                             "run's results (replacing any the run file holds)")


def with_boreholes(run, path):
    """``run`` with the boreholes of ``path`` placed on its line (unchanged when ``path`` is None)."""
    from ..api import add_boreholes

    return add_boreholes(run, path)
