"""The velocity grid of a run as netCDF following the CF conventions (via xarray).

Variables on the (z, x) grid: ``velocity`` (final model), ``start_velocity``,
``coverage`` (ray length per cell); per column: ``ground_elevation`` and
``investigation_elevation`` (depth of investigation). Coordinates ``x`` (distance along
the line) and ``z`` (elevation, positive up), in metres. A line in map coordinates adds
the auxiliary coordinates ``easting, northing`` (projection_x/y_coordinate) and
``lon, lat`` per column, and a ``crs`` grid-mapping variable carrying the EPSG code and
its WKT (CF 1.10, sec. 5.6; ``crs_wkt`` as in its appendix F). Columns of the grid's
padding beyond the end stations are placed on the end segments continued straight.
The run's settings and fit are global attributes (``tomo_*``). Air cells are NaN
(``_FillValue``).
"""

from __future__ import annotations

import datetime as _dt
import json

import numpy as np

from ..analysis.coverage import ground_elevation, investigation_elevation
from ..core.fileio import atomic_path
from ..core.version import __version__

__all__ = ["grid_dataset", "write_netcdf", "CONVENTIONS"]

CONVENTIONS = "CF-1.10"


def _attr(value):
    """A netCDF attribute value: numbers and strings as they are, the rest as JSON."""
    if isinstance(value, bool):
        return int(value)
    if isinstance(value, (int, float, str)):
        return value
    if value is None:
        return "none"
    return json.dumps(value)


def _global_attrs(run, source):
    now = _dt.datetime.now(_dt.UTC).replace(microsecond=0).isoformat()
    attrs = {
        "Conventions": CONVENTIONS,
        "title": "Seismic refraction travel-time tomogram (P-wave velocity section)",
        "source": f"tomo {run.tomo_version} first-arrival travel-time tomography",
        "history": f"{run.created or '?'} tomo invert; {now} tomo {__version__} export"
                   + (f" from {source}" if source else ""),
        "comment": "One of many models that fit the picks: cells below the depth of investigation show mostly "
                   "the starting model; velocity does not identify rock type; calibrate depths against boreholes; "
                   "designs need review by a licensed professional.",
        "tomo_chi2": float(run.chi2), "tomo_rms_ms": float(run.rms_ms), "tomo_iterations": int(run.iterations),
        "tomo_converged": int(bool(run.converged)), "tomo_stop_reason": str(run.stop_reason),
        "tomo_settings": json.dumps(run.settings, default=str),
    }
    for name, value in sorted((run.settings or {}).items()):
        attrs[f"tomo_setting_{name}"] = _attr(value)
    return attrs


def _map_coordinates(run, coords, data_vars):
    """Add easting, northing, lon, lat per column and the ``crs`` variable (in place)."""
    st = run.stations
    e, n = st.map_at(run.x, extend=True)
    coords["easting"] = ("x", e, {"standard_name": "projection_x_coordinate", "long_name": "easting", "units": "m"})
    coords["northing"] = ("x", n, {"standard_name": "projection_y_coordinate", "long_name": "northing", "units": "m"})
    if st.crs is None:
        return None
    lon, lat = st.crs.to_lonlat(e, n)
    coords["lon"] = ("x", lon, {"standard_name": "longitude", "long_name": "longitude", "units": "degrees_east"})
    coords["lat"] = ("x", lat, {"standard_name": "latitude", "long_name": "latitude", "units": "degrees_north"})
    data_vars["crs"] = ((), np.int32(0), {"crs_wkt": st.crs.wkt, "spatial_ref": st.crs.wkt,
                                          "epsg_code": f"EPSG:{st.crs.epsg}", "long_name": st.crs.name})
    return "crs"


def grid_dataset(run, source=None):
    """The run's grid as an :class:`xarray.Dataset` (module docstring)."""
    import xarray as xr

    coords = {
        "x": ("x", np.asarray(run.x, float), {"long_name": "distance along the line", "units": "m", "axis": "X"}),
        "z": ("z", np.asarray(run.z, float), {"long_name": "elevation", "units": "m", "positive": "up",
                                              "axis": "Z", "comment": "vertical datum as surveyed"}),
    }
    data_vars = {
        "velocity": (("z", "x"), np.asarray(run.velocity, float),
                     {"long_name": "P-wave velocity of the final model", "units": "m s-1"}),
        "start_velocity": (("z", "x"), np.asarray(run.start_velocity, float),
                           {"long_name": "P-wave velocity of the starting model", "units": "m s-1"}),
        "coverage": (("z", "x"), np.asarray(run.coverage, float),
                     {"long_name": "ray length in the cell (0: no ray crosses it)", "units": "m"}),
        "ground_elevation": ("x", ground_elevation(run, run.x), {"long_name": "ground elevation", "units": "m"}),
        "investigation_elevation": ("x", investigation_elevation(run),
                                    {"long_name": "depth of investigation: elevation above which 95 % of the "
                                                  "column's ray length lies", "units": "m"}),
    }
    mapping = _map_coordinates(run, coords, data_vars) if run.stations is not None else None
    ds = xr.Dataset(data_vars={k: v for k, v in data_vars.items()}, coords=coords, attrs=_global_attrs(run, source))
    if mapping:
        for name in ("velocity", "start_velocity", "coverage"):
            ds[name].attrs["grid_mapping"] = mapping
    return ds


def write_netcdf(path, run, source=None):
    """Write :func:`grid_dataset` to ``path`` (netCDF-4 via h5netcdf) atomically; returns the dataset."""
    ds = grid_dataset(run, source)
    encoding = {name: {"_FillValue": np.nan} for name in ("velocity", "start_velocity", "coverage",
                                                          "ground_elevation", "investigation_elevation")}
    with atomic_path(path) as tmp:
        ds.to_netcdf(tmp, engine="h5netcdf", encoding=encoding)
    return ds
