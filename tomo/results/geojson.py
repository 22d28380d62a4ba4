"""Surfaces, stations and boreholes of a run as GeoJSON (RFC 7946) on the map.

RFC 7946 fixes the coordinate system: WGS 84 longitude and latitude in decimal degrees,
longitude first (sec. 3.1.1 and 4); the ``crs`` member of older GeoJSON is gone. The
surveyed easting and northing are converted with pyproj from the run's EPSG system.
Positions carry 8 decimals (about 1 mm). No third coordinate is written: RFC 7946 makes
it a height above the WGS 84 ellipsoid, while surveyed elevations are on a local
datum; elevations and depths are properties instead (m).

Features (``properties.kind``):

- ``line``: LineString through the stations, with the EPSG code, the spread and the
  largest sideways departure.
- ``station``: Point per surveyed station: ``x_m`` (picks' distance), ``distance_m``
  (along the surveyed line), ``elevation_m``, ``easting_m``, ``northing_m``.
- ``surface``: Point per model column (or geophone, for a layered refractor) where the
  surface is reached within the surveyed line: ``surface`` (its key), ``velocity_m_s``,
  ``distance_m``, ``ground_elevation_m``, ``depth_m``, ``elevation_m``, ``constrained``
  and, with a band, ``depth_low_m`` / ``depth_high_m`` (shallower / deeper edge) and, for an
  ensemble, ``band_from`` (which method set the band: members, or members + extremal bound).
- ``borehole``: Point per borehole: ``label``, ``depth_m``, ``elevation_m``,
  ``sigma_m``, ``distance_m``, ``offset_m``; at its own easting and northing when the
  file gave them, else on the line.
"""

from __future__ import annotations

import json

import numpy as np

from ..analysis.boreholes import borehole_elevations
from ..core.errors import InputError
from ..core.fileio import atomic_open

__all__ = ["feature_collection", "write_geojson", "DECIMALS"]

#: Decimals of a longitude or latitude: 1e-8 deg is at most 1.1 mm on the ground.
DECIMALS = 8


def _check_map(run):
    if run.stations is None:
        raise InputError("the run has no map coordinates: invert with --stations STATIONS.csv --crs EPSG",
                         field="--geojson")
    if run.stations.crs is None:
        raise InputError("the run's stations have no coordinate system: give --crs EPSG (here or when inverting)",
                         field="--crs")


def _points(crs, easting, northing, properties):
    """Point features at map positions (m) with one properties dict each."""
    lon, lat = crs.to_lonlat(np.asarray(easting, float), np.asarray(northing, float))
    return [{"type": "Feature", "geometry": {"type": "Point", "coordinates": [round(float(a), DECIMALS),
                                                                               round(float(b), DECIMALS)]},
             "properties": props} for a, b, props in zip(np.atleast_1d(lon), np.atleast_1d(lat), properties)]


def _num(value, digits=3):
    """A JSON number rounded to ``digits`` (None for NaN: JSON has no NaN)."""
    return None if not np.isfinite(value) else round(float(value), digits)


def _line_features(st):
    lon, lat = st.crs.to_lonlat(st.easting, st.northing)
    side = st.sideways()
    line = {"type": "Feature", "geometry": {"type": "LineString", "coordinates": [
        [round(float(a), DECIMALS), round(float(b), DECIMALS)] for a, b in zip(lon, lat)]},
        "properties": {"kind": "line", "crs_surveyed": f"EPSG:{st.crs.epsg}", "stations": len(st),
                       "spread_m": _num(st.spread_m), "sideways_departure_m": _num(side.max_m),
                       "sideways_departure_fraction": _num(side.fraction, 4)}}
    props = [{"kind": "station", "x_m": _num(st.x[k]), "distance_m": _num(st.distance_m[k]),
              "elevation_m": _num(st.elevation[k]), "easting_m": _num(st.easting[k]),
              "northing_m": _num(st.northing[k])} for k in range(len(st))]
    return [line] + _points(st.crs, st.easting, st.northing, props)


def _surface_features(st, surface):
    e, n = st.map_at(surface.x)
    keep = np.flatnonzero(np.isfinite(surface.elevation_m) & np.isfinite(e))
    props = []
    for k in keep:
        p = {"kind": "surface", "surface": surface.key, "velocity_m_s": surface.velocity_m_s,
             "distance_m": _num(surface.x[k]), "ground_elevation_m": _num(surface.ground_z[k]),
             "depth_m": _num(surface.depth_m[k]), "elevation_m": _num(surface.elevation_m[k]),
             "constrained": bool(surface.constrained[k])}
        if surface.has_band:
            p["depth_low_m"] = _num(surface.ground_z[k] - surface.high_elevation_m[k])
            p["depth_high_m"] = _num(surface.ground_z[k] - surface.low_elevation_m[k])
        if surface.band_from is not None:
            p["band_from"] = str(surface.band_from[k])
        props.append(p)
    return _points(st.crs, e[keep], n[keep], props)


def _borehole_features(run):
    b = run.boreholes
    if b is None or not len(b):
        return []
    ground, interface = borehole_elevations(run)
    e, n = run.stations.map_at(b.x)
    own = np.isfinite(b.easting) & np.isfinite(b.northing)
    e, n = np.where(own, b.easting, e), np.where(own, b.northing, n)
    props = [{"kind": "borehole", "label": b.label[k], "depth_m": _num(b.depth_m[k]), "sigma_m": _num(b.sigma_m[k]),
              "elevation_m": _num(interface[k]), "ground_elevation_m": _num(ground[k]),
              "distance_m": _num(b.x[k]), "offset_m": _num(b.offset_m[k])} for k in range(len(b))]
    return _points(run.stations.crs, e, n, props)


def feature_collection(run, surfaces):
    """The GeoJSON FeatureCollection (a dict) of the run's line, ``surfaces``
    (:class:`tomo.results.surfaces.SectionSurface`) and boreholes."""
    _check_map(run)
    st = run.stations
    features = _line_features(st)
    for surface in surfaces:
        features.extend(_surface_features(st, surface))
    features.extend(_borehole_features(run))
    return {"type": "FeatureCollection", "features": features}


def write_geojson(path, run, surfaces):
    """Write :func:`feature_collection` to ``path`` atomically; returns the collection."""
    collection = feature_collection(run, surfaces)
    with atomic_open(path, "w", encoding="utf-8") as f:
        json.dump(collection, f, allow_nan=False, separators=(",", ":"))
        f.write("\n")
    return collection
