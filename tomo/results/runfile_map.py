"""The run file's optional groups for the line on the map and its boreholes.

Layout (lengths m; both groups absent when the run had no stations or boreholes, so
files without them read as before)::

    /stations      attrs: crs_epsg (0: none given), crs_name, path
    /stations/x, easting, northing, elevation, distance   (n_stations)
    /boreholes     attrs: path
    /boreholes/x, depth_m, sigma_m, easting, northing, offset_m, interface, line   (n_boreholes)
    /boreholes/label                                       (n_boreholes) UTF-8 strings
"""

from __future__ import annotations

import numpy as np

from ..survey.boreholes import Boreholes
from ..survey.crs import MapCrs
from ..survey.stations import Stations

__all__ = ["write_map_groups", "read_map_groups"]

_STATION_FIELDS = ("x", "easting", "northing", "elevation")
_BOREHOLE_FIELDS = ("x", "depth_m", "sigma_m", "easting", "northing", "offset_m")


def write_map_groups(f, run):
    """Write ``run.stations`` and ``run.boreholes`` (when set) into the open h5py file ``f``."""
    import h5py

    if run.stations is not None:
        s = run.stations
        g = f.create_group("stations")
        for name in _STATION_FIELDS:
            g[name] = np.asarray(getattr(s, name), float)
        g["distance"] = np.asarray(s.distance_m, float)
        g.attrs["crs_epsg"] = 0 if s.crs is None else int(s.crs.epsg)
        g.attrs["crs_name"] = "" if s.crs is None else str(s.crs.name)
        g.attrs["path"] = str(s.path or "")
    if run.boreholes is not None:
        b = run.boreholes
        g = f.create_group("boreholes")
        for name in _BOREHOLE_FIELDS:
            g[name] = np.asarray(getattr(b, name), float)
        g["interface"] = np.asarray(b.interface, int)
        g["line"] = np.asarray(b.line, int)
        g.create_dataset("label", data=list(b.label), dtype=h5py.string_dtype("utf-8"))
        g.attrs["path"] = str(b.path or "")


def read_map_groups(f):
    """``{"stations": Stations or None, "boreholes": Boreholes or None}`` from an open run file."""
    out = {"stations": None, "boreholes": None}
    if "stations" in f:
        g = f["stations"]
        epsg = int(g.attrs.get("crs_epsg", 0))
        crs = MapCrs(epsg, str(g.attrs.get("crs_name", ""))) if epsg else None
        values = {name: np.asarray(g[name][()], float) for name in _STATION_FIELDS}
        out["stations"] = Stations(distance_m=np.asarray(g["distance"][()], float), crs=crs,
                                   path=str(g.attrs.get("path", "")) or None, **values)
    if "boreholes" in f:
        g = f["boreholes"]
        values = {name: np.asarray(g[name][()], float) for name in _BOREHOLE_FIELDS}
        labels = tuple(v.decode("utf-8") if isinstance(v, bytes) else str(v) for v in g["label"][()])
        out["boreholes"] = Boreholes(label=labels, interface=np.asarray(g["interface"][()], int),
                                     line=np.asarray(g["line"][()], int),
                                     path=str(g.attrs.get("path", "")) or None, **values)
    return out
