"""Surveyed stations: the line in map coordinates, its distances and its ground.

Stations file (CSV, UTF-8, header row, ``#`` comment lines allowed)::

    x,easting,northing,elevation
    0,512034.210,5203110.455,431.20
    2,512036.180,5203110.801,431.05

``x`` (m) is the distance the pick file uses for the station (a tape chainage or the
station number times the spacing); ``easting, northing`` (m) are its surveyed map
position in the system named by ``--crs``; ``elevation`` (m) its ground elevation.
Rows are in order along the line, ``x`` strictly increasing; two stations on one map
position are an error. Every shot and geophone of the picks must lie between the
first and the last station.

Distance along a crooked line. The section is drawn against the horizontal distance
along the surveyed polyline, not against the picks' ``x``: ``distance_m`` runs from the
first station (where it equals that station's ``x``, so numbers stay familiar) through
every station, and a pick position between two stations is placed linearly between
their distances. The chord of a circular arc of radius R subtending an angle a is
2R sin(a/2) against an arc of R a, so with stations a few metres apart on any
reasonable bend the polyline length differs from the arc length by less than a
millimetre per segment (e.g. R = 60 m, 2 m segments: R a^3/24 = 0.05 mm).

Sideways departure. A 2-D section assumes shots, geophones and rays share one vertical
plane. The departure is measured from the straight line through the first and the last
station. For a line bent on a circular arc with sagitta d over a spread L (d << L), a
shot-geophone pair at the ends is 2R sin(a/2) apart in a straight line against R a
along the line: the along-line offset is too long by a^2/24 = (8/3) (d/L)^2 (plane
geometry; a = 8 d / L to first order). At d/L = 5 % that is 0.7 %, about the size of a
pick error at the far offsets; beyond it the section misplaces depths and velocities
by more, hence :data:`SIDEWAYS_WARNING_FRACTION` (our choice from that estimate).
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace

import numpy as np

from ..core.errors import InputError
from ..core.fileio import parse_float, read_csv_rows
from .terrain import Terrain

__all__ = ["Stations", "Sideways", "read_stations", "SIDEWAYS_WARNING_FRACTION", "STEP_MISMATCH_RATIO"]

#: Largest sideways departure from the end-to-end straight line, as a fraction of the
#: spread, before a warning (module docstring: about 0.7 % offset error at 5 %).
SIDEWAYS_WARNING_FRACTION = 0.05

#: A surveyed step between neighbouring stations more than this factor longer or
#: shorter than their step in x is reported (a mistyped coordinate; common practice).
STEP_MISMATCH_RATIO = 1.25

_COLUMNS = ("x", "easting", "northing", "elevation")


@dataclass(frozen=True)
class Sideways:
    """How far a surveyed line strays from the straight line between its ends.

    Attributes
    ----------
    max_m : float
        Largest perpendicular distance of a station from that straight line, m.
    at_x : float
        The picks' ``x`` of that station, m.
    fraction : float
        ``max_m`` over the spread (distance along the line from first to last station).
    offset_error : float
        Relative excess of along-line over straight offset for an arc of that sagitta,
        (8/3) fraction^2 (module docstring).
    """

    max_m: float
    at_x: float
    fraction: float
    offset_error: float

    @property
    def warn(self):
        return self.fraction > SIDEWAYS_WARNING_FRACTION

    def message(self, path=None):
        where = f"{path}: " if path else ""
        text = (f"{where}largest sideways departure from the straight line between the end stations: "
                f"{self.max_m:.2f} m at x = {self.at_x:g} m ({100 * self.fraction:.1f} % of the spread)")
        if self.warn:
            text += (f"; warning: above {100 * SIDEWAYS_WARNING_FRACTION:g} %, a 2-D section misplaces depths "
                     f"(end-to-end offsets about {100 * self.offset_error:.1f} % too long along the line)")
        return text


@dataclass(frozen=True)
class Stations:
    """Surveyed stations of one line (see module docstring).

    Attributes
    ----------
    x : ndarray
        Distance the picks use, m, strictly increasing.
    easting, northing : ndarray
        Map position, m, in the system ``crs``.
    elevation : ndarray
        Ground elevation, m.
    distance_m : ndarray
        Horizontal distance along the surveyed polyline, m, equal to ``x[0]`` at the
        first station.
    crs : tomo.survey.crs.MapCrs or None
        The map system; None when the file was read without ``--crs``.
    path : str or None
        File it came from, for messages.
    notices : list of str
        What a user should know (ignored columns, odd steps, the sideways departure).
    """

    x: np.ndarray
    easting: np.ndarray
    northing: np.ndarray
    elevation: np.ndarray
    distance_m: np.ndarray
    crs: object = None
    path: str | None = None
    notices: list = field(default_factory=list, compare=False)

    @classmethod
    def from_arrays(cls, x, easting, northing, elevation, crs=None, path=None):
        """Stations from arrays (already checked); distances along the line computed."""
        x, e, n, z = (np.asarray(a, float) for a in (x, easting, northing, elevation))
        steps = np.hypot(np.diff(e), np.diff(n))
        distance = x[0] + np.concatenate([[0.0], np.cumsum(steps)])
        return cls(x, e, n, z, distance, crs, path)

    def __len__(self):
        return int(self.x.size)

    @property
    def spread_m(self):
        """Distance along the line from the first to the last station, m."""
        return float(self.distance_m[-1] - self.distance_m[0])

    def distance_at(self, x):
        """Distance along the surveyed line (m) of positions given in the picks' ``x`` (m)."""
        return np.interp(np.asarray(x, float), self.x, self.distance_m)

    def map_at(self, distance_m, extend=False):
        """Easting and northing (m) at distances along the line (m), on the polyline.

        Beyond the end stations there is no survey: NaN, or with ``extend`` the end
        segments continued straight (for the padding of a model grid).
        """
        d = np.asarray(distance_m, float)
        e = np.interp(d, self.distance_m, self.easting, left=np.nan, right=np.nan)
        n = np.interp(d, self.distance_m, self.northing, left=np.nan, right=np.nan)
        if extend:
            for end, (a, b) in (("first", (0, 1)), ("last", (-2, -1))):
                beyond = d < self.distance_m[0] if end == "first" else d > self.distance_m[-1]
                step = self.distance_m[b] - self.distance_m[a]
                ue, un = (self.easting[b] - self.easting[a]) / step, (self.northing[b] - self.northing[a]) / step
                k = a if end == "first" else b
                e = np.where(beyond, self.easting[k] + (d - self.distance_m[k]) * ue, e)
                n = np.where(beyond, self.northing[k] + (d - self.distance_m[k]) * un, n)
        return e, n

    def terrain(self):
        """The ground along the line: station elevations against distance along it."""
        return Terrain(self.distance_m.copy(), self.elevation.copy(), path=self.path)

    def sideways(self):
        """The largest sideways departure from the end-to-end straight line (:class:`Sideways`)."""
        de, dn = self.easting[-1] - self.easting[0], self.northing[-1] - self.northing[0]
        chord = float(np.hypot(de, dn))
        if chord == 0.0:
            return Sideways(0.0, float(self.x[0]), 0.0, 0.0)
        # perpendicular distance: the cross product with the unit chord direction
        off = np.abs((self.easting - self.easting[0]) * dn - (self.northing - self.northing[0]) * de) / chord
        k = int(np.argmax(off))
        fraction = float(off[k]) / self.spread_m
        return Sideways(float(off[k]), float(self.x[k]), fraction, 8.0 / 3.0 * fraction**2)

    def project(self, easting, northing):
        """Distance along the line (m) and signed sideways offset (m, positive to the
        left looking along increasing distance) of map points, by the nearest point of
        the polyline; ``inside`` is False for a point whose nearest place is beyond an
        end station."""
        e0, n0 = self.easting[:-1], self.northing[:-1]
        de, dn = np.diff(self.easting), np.diff(self.northing)
        length2 = de**2 + dn**2
        out_d, out_off, inside = [], [], []
        for pe, pn in zip(np.atleast_1d(easting), np.atleast_1d(northing)):
            t_raw = ((pe - e0) * de + (pn - n0) * dn) / length2
            t = np.clip(t_raw, 0.0, 1.0)
            dist = np.hypot(e0 + t * de - pe, n0 + t * dn - pn)
            k = int(np.argmin(dist))
            out_d.append(self.distance_m[k] + t[k] * np.sqrt(length2[k]))
            out_off.append(np.sign(de[k] * (pn - n0[k]) - dn[k] * (pe - e0[k])) * dist[k])
            beyond = (k == 0 and t_raw[k] < 0) or (k == len(de) - 1 and t_raw[k] > 1)
            inside.append(not beyond)
        return np.array(out_d), np.array(out_off), np.array(inside)

    def along_line(self, picks):
        """``picks`` with shot and geophone ``x`` replaced by distances along the line (m).

        The picks must already lie within the stations' ``x`` (read them with
        ``Terrain(stations.x, stations.elevation)`` as terrain, which also gives their
        elevations). A notice says how far the distances moved.
        """
        sx, rx = self.distance_at(picks.source_x), self.distance_at(picks.receiver_x)
        # millimetres: finer than any survey, and keeps the shots' x readable
        sx, rx = np.round(sx, 3), np.round(rx, 3)
        moved = float(max(np.max(np.abs(sx - picks.source_x)), np.max(np.abs(rx - picks.receiver_x))))
        # Stations on the ground stay exactly on it at their new distance (the rounding
        # above moves them up to 0.5 mm along a sloping ground).
        sz = np.minimum(picks.source_z, np.interp(sx, self.distance_m, self.elevation))
        rz = np.minimum(picks.receiver_z, np.interp(rx, self.distance_m, self.elevation))
        notices = list(picks.notices)
        if moved >= 0.0005:
            notices.append(f"{self.path}: shots and geophones placed by distance along the surveyed line "
                           f"(up to {moved:.3f} m from the picks' x)")
        return replace(picks, source_x=sx, source_z=sz, receiver_x=rx, receiver_z=rz, notices=notices)


def read_stations(path, crs=None):
    """Read a stations file (module docstring).

    Parameters
    ----------
    path : str or Path
    crs : tomo.survey.crs.MapCrs, optional
        The map system of the easting and northing (checked by
        :func:`tomo.survey.crs.check_crs`).

    Returns
    -------
    Stations
        With ``notices``: ignored columns, unusual steps, and the sideways departure.

    Raises
    ------
    InputError
        One line naming file, line and field: a missing column, a non-number, ``x`` not
        increasing or repeated, two stations on one map position, fewer than two stations.
    """
    path = str(path)
    header, rows = read_csv_rows(path)
    for name in _COLUMNS:
        if name not in header:
            raise InputError(f"missing column '{name}' (header has: {', '.join(header)})", path=path)
    notices = []
    ignored = [h for h in header if h not in _COLUMNS]
    if ignored:
        notices.append(f"{path}: ignored column(s): {', '.join(ignored)}")
    index = {name: header.index(name) for name in _COLUMNS}
    values, lines = {name: [] for name in _COLUMNS}, []
    seen = {}
    for lineno, fields in rows:
        if len(fields) < len(header):
            raise InputError(f"expected {len(header)} fields, got {len(fields)}", path=path, line=lineno)
        row = {name: parse_float(fields[index[name]], path, lineno, name) for name in _COLUMNS}
        if lines:
            previous = values["x"][-1]
            if row["x"] == previous:
                raise InputError(f"duplicate station: x = {row['x']:g} m is also on line {lines[-1]}",
                                 path=path, line=lineno, field="x")
            if row["x"] < previous:
                raise InputError(f"x must increase along the file ({row['x']:g} after {previous:g})",
                                 path=path, line=lineno, field="x")
        key = (round(row["easting"], 3), round(row["northing"], 3))
        if key in seen:
            raise InputError(f"duplicate station: same easting and northing as line {seen[key]}",
                             path=path, line=lineno, field="easting")
        seen[key] = lineno
        for name in _COLUMNS:
            values[name].append(row[name])
        lines.append(lineno)
    if len(lines) < 2:
        raise InputError("a line needs at least two stations", path=path)
    stations = Stations.from_arrays(values["x"], values["easting"], values["northing"], values["elevation"],
                                    crs=crs, path=path)
    notices.extend(_step_notices(stations, lines))
    notices.append(stations.sideways().message(path))
    return replace(stations, notices=notices)


def _step_notices(stations, lines):
    """Neighbouring stations whose surveyed step disagrees with their step in x."""
    steps = np.diff(stations.distance_m)
    dx = np.diff(stations.x)
    ratio = steps / dx
    odd = np.flatnonzero((ratio > STEP_MISMATCH_RATIO) | (ratio < 1 / STEP_MISMATCH_RATIO))
    out = []
    for k in odd[:3]:
        out.append(f"{stations.path}:{lines[k + 1]}: the surveyed step from the previous station is "
                   f"{steps[k]:.2f} m where x steps {dx[k]:g} m; check the coordinates")
    if odd.size > 3:
        out.append(f"{stations.path}: {odd.size - 3} more such step(s)")
    return out
