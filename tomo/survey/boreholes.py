"""Boreholes on a line: where each one logged an interface, and how sure that depth is.

Borehole file (CSV, UTF-8, header row, ``#`` comment lines allowed):

===========  ========  ===========================================================
column       required  meaning
===========  ========  ===========================================================
x            yes*      position along the line, m, in the picks' distance
easting      yes*      map position, m (*either ``x`` or ``easting`` and
northing     yes*      ``northing``; the line then needs a stations file)
depth_m      yes       depth below the ground to the interface, m, positive
sigma_m      no        uncertainty of that depth (one standard deviation), m
label        no        name shown on figures and in the report (default BH1, BH2, ...)
interface    no        which interface: 1 is the top of the second layer, 2 of the
                       third, ...; empty: the top of the fastest layer
===========  ========  ===========================================================

Reading checks each row on its own (numbers, a positive depth). Whether a borehole
lies on the line and above the bottom of the model can only be said against a line
and a grid: :meth:`Boreholes.on_line` and :meth:`Boreholes.check_depths`.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from ..core.errors import InputError
from ..core.fileio import parse_float, read_csv_rows

__all__ = ["Boreholes", "read_boreholes", "DEFAULT_SIGMA_M", "DEEPEST"]

#: Depth uncertainty where the file gives none, m: a logged rock head is usually known
#: to about the sampling interval of the log (common practice).
DEFAULT_SIGMA_M = 0.5

#: ``interface`` value meaning "the top of the fastest layer".
DEEPEST = 0

_KNOWN = ("x", "easting", "northing", "depth_m", "sigma_m", "label", "interface")


@dataclass(frozen=True)
class Boreholes:
    """Boreholes of one line, one value per borehole in every array.

    Attributes
    ----------
    x : ndarray
        Distance along the line, m; NaN until :meth:`on_line` places a borehole given
        by easting and northing.
    depth_m : ndarray
        Depth below the ground to the logged interface, m, positive.
    sigma_m : ndarray
        Uncertainty of that depth, m (:data:`DEFAULT_SIGMA_M` where not given).
    label : tuple of str
    interface : ndarray of int
        Interface number from the top (1: top of the second layer); :data:`DEEPEST`
        (0) for the top of the fastest layer.
    easting, northing : ndarray
        Map position, m; NaN where not given.
    offset_m : ndarray
        Sideways distance from the line, m (positive to the left looking along the
        line); 0 for boreholes given by ``x``.
    line : ndarray of int
        Line of each borehole in its file, for messages.
    path : str or None
    """

    x: np.ndarray
    depth_m: np.ndarray
    sigma_m: np.ndarray
    label: tuple
    interface: np.ndarray
    easting: np.ndarray
    northing: np.ndarray
    offset_m: np.ndarray
    line: np.ndarray
    path: str | None = None

    def __len__(self):
        return int(self.depth_m.size)

    def on_line(self, x_min, x_max, stations=None, x_is_distance=False):
        """Boreholes placed along a line whose stations span ``x_min`` to ``x_max`` (m).

        Boreholes given by easting and northing are projected onto the surveyed line
        (``stations``, :class:`tomo.survey.stations.Stations`); those given by ``x``
        are moved to distance along the surveyed line when there are stations, unless
        ``x_is_distance`` (they already were).

        Raises
        ------
        InputError
            Naming file, line and field: a borehole beyond the line's ends, or one
            given by map position on a line without stations.
        """
        x = self.x.copy()
        offset = self.offset_m.copy()
        by_map = ~np.isfinite(x)
        if by_map.any():
            if stations is None:
                k = int(np.flatnonzero(by_map)[0])
                raise InputError("a borehole given by easting and northing needs the line in map coordinates "
                                 "(--stations STATIONS.csv)", path=self.path, line=int(self.line[k]), field="easting")
            d, off, inside = stations.project(self.easting[by_map], self.northing[by_map])
            for k, ok in zip(np.flatnonzero(by_map), inside):
                if not ok:
                    raise InputError(f"borehole {self.label[k]} lies beyond the end of the surveyed line",
                                     path=self.path, line=int(self.line[k]), field="easting")
            x[by_map], offset[by_map] = d, off
        if stations is not None and not x_is_distance and (~by_map).any():
            # the file's x is the picks' distance, like the stations file's x
            outside = (~by_map) & ((x < stations.x[0] - 1e-6) | (x > stations.x[-1] + 1e-6))
            self._refuse_outside(outside, x, stations.x[0], stations.x[-1])
            x[~by_map] = stations.distance_at(x[~by_map])
        outside = (x < x_min - 1e-6) | (x > x_max + 1e-6)
        self._refuse_outside(outside, x, x_min, x_max)
        return replace(self, x=x, offset_m=offset)

    def _refuse_outside(self, outside, x, lo, hi):
        if np.any(outside):
            k = int(np.flatnonzero(outside)[0])
            field = "x" if np.isnan(self.easting[k]) else "easting"
            raise InputError(f"borehole {self.label[k]} at x = {x[k]:g} m is outside the line "
                             f"({lo:g} to {hi:g} m)", path=self.path, line=int(self.line[k]), field=field)

    def check_depths(self, ground_z, bottom_z):
        """Raise unless every logged interface lies above the model's bottom.

        Parameters
        ----------
        ground_z : ndarray
            Ground elevation at each borehole, m.
        bottom_z : float
            Elevation of the bottom of the model grid, m.
        """
        room = np.asarray(ground_z, float) - float(bottom_z)
        deep = np.flatnonzero(self.depth_m > room)
        if deep.size:
            k = int(deep[0])
            raise InputError(f"borehole {self.label[k]} depth {self.depth_m[k]:g} m is deeper than the model grid "
                             f"({room[k]:.1f} m below the ground there)", path=self.path,
                             line=int(self.line[k]), field="depth_m")
        return self

    def elevation_m(self, ground_z):
        """Elevation (m) of each logged interface below ground at ``ground_z`` (m)."""
        return np.asarray(ground_z, float) - self.depth_m


def read_boreholes(path):
    """Read a borehole file (module docstring).

    Returns
    -------
    Boreholes
        Not yet placed on a line (:meth:`Boreholes.on_line`).

    Raises
    ------
    InputError
        One line naming file, line and field: a missing column, a non-number, a depth
        or sigma that is not positive, an interface that is not a whole number >= 1,
        a repeated label, or a file without boreholes.
    """
    path = str(path)
    header, rows = read_csv_rows(path)
    by_x = "x" in header
    if not by_x and not ("easting" in header and "northing" in header):
        raise InputError(f"missing column 'x' (or 'easting' and 'northing'); header has: {', '.join(header)}",
                         path=path)
    if "depth_m" not in header:
        raise InputError(f"missing column 'depth_m' (header has: {', '.join(header)})", path=path)
    if not rows:
        raise InputError("no boreholes in file", path=path)
    col = {name: header.index(name) for name in _KNOWN if name in header}
    out = {name: [] for name in ("x", "easting", "northing", "depth_m", "sigma_m", "interface", "label", "line")}
    for lineno, fields in rows:
        if len(fields) < len(header):
            raise InputError(f"expected {len(header)} fields, got {len(fields)}", path=path, line=lineno)
        row = _row(fields, col, by_x, path, lineno, default_label=f"BH{len(out['line']) + 1}")
        if row["label"] in out["label"]:
            first = out["line"][out["label"].index(row["label"])]
            raise InputError(f"label {row['label']!r} is already used on line {first}", path=path, line=lineno,
                             field="label")
        for name, value in row.items():
            out[name].append(value)
        out["line"].append(lineno)
    n = len(out["line"])
    return Boreholes(x=np.array(out["x"], float), depth_m=np.array(out["depth_m"], float),
                     sigma_m=np.array(out["sigma_m"], float), label=tuple(out["label"]),
                     interface=np.array(out["interface"], int), easting=np.array(out["easting"], float),
                     northing=np.array(out["northing"], float), offset_m=np.zeros(n),
                     line=np.array(out["line"], int), path=path)


def _row(fields, col, by_x, path, lineno, default_label):
    """One borehole row as a dict of checked values."""
    def number(name):
        return parse_float(fields[col[name]], path, lineno, name)

    def optional(name):
        return name in col and fields[col[name]] != ""

    row = {"x": number("x") if by_x else np.nan,
           "easting": number("easting") if optional("easting") or (not by_x and "easting" in col) else np.nan,
           "northing": number("northing") if optional("northing") or (not by_x and "northing" in col) else np.nan}
    row["depth_m"] = number("depth_m")
    if row["depth_m"] <= 0:
        raise InputError(f"depth must be positive (below the ground), got {row['depth_m']:g} m", path=path,
                         line=lineno, field="depth_m")
    row["sigma_m"] = number("sigma_m") if optional("sigma_m") else DEFAULT_SIGMA_M
    if row["sigma_m"] <= 0:
        raise InputError(f"sigma must be positive, got {row['sigma_m']:g} m", path=path, line=lineno, field="sigma_m")
    row["interface"] = DEEPEST
    if optional("interface"):
        text = fields[col["interface"]]
        if not text.isdigit() or int(text) < 1:
            raise InputError(f"expected a whole number >= 1 (1: top of the second layer), got {text!r}",
                             path=path, line=lineno, field="interface")
        row["interface"] = int(text)
    row["label"] = fields[col["label"]] if optional("label") else default_label
    return row
