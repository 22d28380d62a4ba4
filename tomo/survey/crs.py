"""Map coordinate reference systems: an EPSG code checked with pyproj.

A surveyed line is given in a projected system in metres (easting, northing); the
code names it in the EPSG registry. GeoJSON needs WGS 84 longitude and latitude
(RFC 7946, sec. 4), so the system also converts to those. pyproj (the PROJ library)
does the geodesy; tomo writes none of its own.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..core.errors import InputError

__all__ = ["MapCrs", "check_crs", "WGS84_EPSG"]

#: WGS 84 geographic (longitude, latitude in degrees), the only system of GeoJSON.
WGS84_EPSG = 4326


@dataclass(frozen=True)
class MapCrs:
    """A projected coordinate reference system in metres.

    Attributes
    ----------
    epsg : int
        EPSG code.
    name : str
        Its name in the EPSG registry (as pyproj reports it).
    """

    epsg: int
    name: str

    def __str__(self):
        return f"EPSG:{self.epsg} ({self.name})"

    @property
    def wkt(self):
        """The system as OGC WKT2 text (for CF netCDF ``crs_wkt``)."""
        from pyproj import CRS

        return CRS.from_epsg(self.epsg).to_wkt()

    def to_lonlat(self, easting_m, northing_m):
        """WGS 84 longitude and latitude (degrees) of points given in this system (m).

        ``always_xy`` keeps (easting, northing) in and (longitude, latitude) out,
        whatever axis order the EPSG registry gives either system.
        """
        from pyproj import CRS, Transformer

        transformer = Transformer.from_crs(CRS.from_epsg(self.epsg), CRS.from_epsg(WGS84_EPSG), always_xy=True)
        lon, lat = transformer.transform(np.asarray(easting_m, float), np.asarray(northing_m, float))
        return np.asarray(lon, float), np.asarray(lat, float)


def check_crs(code, field="--crs"):
    """The :class:`MapCrs` of an EPSG code (``32633``, ``"32633"`` or ``"EPSG:32633"``).

    Raises
    ------
    InputError
        If the code is not a number, is not in the EPSG registry as pyproj knows it, or
        is not a projected system with metre axes (a geographic system in degrees
        cannot measure distances along a line).
    """
    from pyproj import CRS
    from pyproj.exceptions import CRSError

    text = str(code).strip()
    number = text[5:] if text.upper().startswith("EPSG:") else text
    try:
        epsg = int(number)
    except ValueError:
        raise InputError(f"expected an EPSG code such as 32633 or EPSG:32633, got {text!r}", field=field) from None
    try:
        crs = CRS.from_epsg(epsg)
    except CRSError:
        raise InputError(f"unknown EPSG code {epsg} (not in the EPSG registry known to pyproj)", field=field) from None
    if not crs.is_projected:
        raise InputError(f"EPSG:{epsg} ({crs.name}) is not a projected system; easting and northing need "
                         "one in metres (e.g. a UTM zone)", field=field)
    units = {axis.unit_name for axis in crs.axis_info}
    if units != {"metre"}:
        raise InputError(f"EPSG:{epsg} ({crs.name}) has axes in {', '.join(sorted(units))}; tomo needs metres",
                         field=field)
    return MapCrs(epsg, crs.name)
