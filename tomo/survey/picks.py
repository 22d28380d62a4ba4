"""First-arrival picks and station layouts: the pick file and the ``Picks`` type.

Pick file (CSV, UTF-8, header row, ``#`` comment lines allowed):

=============  ========  =====================================================
column         required  meaning
=============  ========  =====================================================
source_x       yes       shot position along the line, m
receiver_x     yes       geophone position along the line, m
time_ms        yes*      first-arrival time, ms (*not in a layout file; blank: no pick)
source_z       no        shot elevation, m, up positive (default: on the ground)
receiver_z     no        geophone elevation, m, up positive (default: on the ground)
sigma_ms       no        pick uncertainty (one standard deviation), ms
=============  ========  =====================================================

A blank ``time_ms`` (an unpickable trace) leaves that pair out, with a notice that
counts them and gives their lines. A file in other units (times in seconds; positions
in feet or centimetres) is read when its units are declared (``time_unit``,
``distance_unit``; ``--time-unit``, ``--distance-unit``), and refused when its numbers
are not those of a refraction line in the units assumed (:mod:`tomo.survey.units`).
Inside tomo everything is SI: metres and seconds. Milliseconds exist only in files.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace

import numpy as np

from ..core.errors import InputError
from ..core.fileio import atomic_open, parse_float, read_csv_rows
from .units import check_plausible, check_units, pick_scales, unit_notices

__all__ = ["Picks", "read_picks", "write_picks", "check_picks"]

#: A station may sit this far above the terrain (m) and is then put on it; more is an error.
ABOVE_GROUND_TOLERANCE_M = 0.1


@dataclass
class Picks:
    """First-arrival picks (or a layout, when ``time_s`` is None), one entry per pair.

    All arrays have one value per pick; positions in m along the line, elevations in m
    (up positive), times and uncertainties in s.

    Attributes
    ----------
    source_x, source_z, receiver_x, receiver_z : ndarray
    time_s : ndarray or None
        Observed first-arrival time, s; None for a layout.
    sigma_s : ndarray or None
        Pick uncertainty, s; None when the file gave none.
    line : ndarray of int or None
        Line number of each pick in its file, for messages.
    path : str or None
    notices : list of str
        Things the reader did that a user should know (ignored columns, ...).
    """

    source_x: np.ndarray
    source_z: np.ndarray
    receiver_x: np.ndarray
    receiver_z: np.ndarray
    time_s: np.ndarray | None = None
    sigma_s: np.ndarray | None = None
    line: np.ndarray | None = None
    path: str | None = None
    notices: list = field(default_factory=list)

    def __post_init__(self):
        for name in ("source_x", "source_z", "receiver_x", "receiver_z"):
            setattr(self, name, np.asarray(getattr(self, name), dtype=float).ravel())
        n = self.source_x.size
        for name in ("source_z", "receiver_x", "receiver_z", "time_s", "sigma_s"):
            value = getattr(self, name)
            if value is not None:
                value = np.asarray(value, dtype=float).ravel()
                if value.size != n:
                    raise InputError(f"{name} has {value.size} values, expected {n}")
                setattr(self, name, value)

    def __len__(self):
        return int(self.source_x.size)

    @property
    def offset(self):
        """Signed horizontal offset receiver_x - source_x, m."""
        return self.receiver_x - self.source_x

    def sources(self):
        """Unique shots as an (n, 2) array of (x, z), m, and each pick's shot index."""
        return _unique_points(self.source_x, self.source_z)

    def receivers(self):
        """Unique geophones as an (n, 2) array of (x, z), m, and each pick's index."""
        return _unique_points(self.receiver_x, self.receiver_z)

    def subset(self, mask):
        """A new Picks holding only the picks selected by ``mask``."""
        def take(a):
            return None if a is None else a[mask]
        return replace(
            self,
            source_x=self.source_x[mask], source_z=self.source_z[mask],
            receiver_x=self.receiver_x[mask], receiver_z=self.receiver_z[mask],
            time_s=take(self.time_s), sigma_s=take(self.sigma_s), line=take(self.line),
            notices=list(self.notices),
        )

    def with_times(self, time_s, sigma_s=None):
        """A copy with new times (s) and uncertainties (s)."""
        sigma = None if sigma_s is None else np.broadcast_to(np.asarray(sigma_s, float), self.source_x.shape).copy()
        return replace(self, time_s=np.asarray(time_s, float), sigma_s=sigma, notices=list(self.notices))


def _unique_points(x, z):
    pts = np.column_stack([x, z])
    # Round to 0.1 mm so that positions read from text compare equal.
    key = np.round(pts, 4)
    uniq, index = np.unique(key, axis=0, return_inverse=True)
    return uniq, index.ravel()


_REQUIRED = ("source_x", "receiver_x")
_OPTIONAL = ("source_z", "receiver_z", "sigma_ms")


def read_picks(path, terrain=None, layout=False, time_unit="ms", distance_unit="m"):
    """Read a pick file (or a layout file, ``layout=True``, which has no ``time_ms``).

    Parameters
    ----------
    path : str or Path
    terrain : Terrain, optional
        Ground elevation, m. Stations without elevations are put on it; stations outside
        its range are an error. Without terrain, missing elevations are 0 (flat ground).
    layout : bool
        Read a layout: ``time_ms`` is not required (and ignored if present).
    time_unit : {"ms", "s"}
        Unit of the time and sigma columns as the file holds them (declared by the
        user; the columns keep their names).
    distance_unit : {"m", "ft", "cm"}
        Unit of the positions and elevations in the file.

    Returns
    -------
    Picks
        Times and uncertainties in s, positions in m; ``notices`` lists what a user
        should know (blank times skipped, ignored columns, ...).

    Raises
    ------
    InputError
        One line naming file, line and field: a missing required column, a non-number, a
        time that is zero, negative or NaN, sigma <= 0, a geophone on its shot, the same
        pair twice with different times, a station outside the terrain, or times and
        distances no refraction line gives in the declared units
        (:mod:`tomo.survey.units`, which names the likely unit).
    """
    path = str(path)
    time_factor, distance_factor = check_units(time_unit, distance_unit)
    header, rows = read_csv_rows(path)
    required = _REQUIRED if layout else _REQUIRED + ("time_ms",)
    for name in required:
        if name not in header:
            raise InputError(f"missing required column '{name}' (header has: {', '.join(header)})", path=path,
                             line=None)
    known = set(required) | set(_OPTIONAL) | ({"time_ms"} if layout else set())
    notices = []
    ignored = [h for h in header if h not in known]
    if ignored:
        notices.append(f"{path}: ignored column(s): {', '.join(ignored)}")
    if layout and "time_ms" in header:
        notices.append(f"{path}: layout file has a time_ms column; it is ignored")
    columns = [c for c in header if c in known and not (layout and c == "time_ms")]
    data, lines = _read_columns(path, header, rows, columns, layout, notices)
    if not layout:
        t = data["time_ms"]
        bad = np.flatnonzero(t <= 0)
        if bad.size:
            k = bad[0]
            raise InputError(f"time must be positive, got {t[k]:g} ms", path=path, line=lines[k], field="time_ms")
    if "sigma_ms" in data:
        s = data["sigma_ms"]
        bad = np.flatnonzero(s <= 0)
        if bad.size:
            k = bad[0]
            raise InputError(f"sigma must be positive, got {s[k]:g} ms", path=path, line=lines[k], field="sigma_ms")
    # before anything is computed from them: are these the numbers of a refraction line?
    scales = pick_scales(data["source_x"], data["receiver_x"], data.get("time_ms"))
    check_plausible(scales, path, time_unit, distance_unit)
    notices += unit_notices(scales, path, time_unit, distance_unit)
    for c in ("source_x", "receiver_x", "source_z", "receiver_z"):
        if c in data:
            data[c] = data[c] * distance_factor
    sx, rx = data["source_x"], data["receiver_x"]
    if terrain is not None:
        _check_on_terrain(sx, rx, terrain, path, lines)
    sz = _place_on_ground(sx, data.get("source_z"), terrain, path, lines, "source", notices)
    rz = _place_on_ground(rx, data.get("receiver_z"), terrain, path, lines, "receiver", notices)
    picks = Picks(
        source_x=sx, source_z=sz, receiver_x=rx, receiver_z=rz,
        time_s=None if layout else data["time_ms"] * time_factor * 1e-3,
        sigma_s=data["sigma_ms"] * time_factor * 1e-3 if "sigma_ms" in data else None,
        line=lines, path=path, notices=notices,
    )
    return check_picks(picks)


def _read_columns(path, header, rows, columns, layout, notices):
    """The numbers of ``columns`` per row, and each row's line; a blank time skips its row."""
    index = {c: header.index(c) for c in columns}
    keep, skipped = [], []
    for lineno, fields in rows:
        if len(fields) < len(header):
            raise InputError(f"expected {len(header)} fields, got {len(fields)}", path=path, line=lineno)
        if not layout and fields[index["time_ms"]] == "":
            # an unpickable trace: its pick is left out, not the line
            skipped.append(lineno)
            continue
        keep.append((lineno, fields))
    if skipped:
        shown = ", ".join(str(n) for n in skipped[:10]) + (", ..." if len(skipped) > 10 else "")
        notices.append(f"{path}: {len(skipped)} pick(s) with a blank time_ms skipped (unpicked traces; "
                       f"line(s) {shown})")
    if not keep:
        raise InputError("no picks in file" if not skipped else "every time_ms is blank: no picks in file",
                         path=path)
    data = {c: np.empty(len(keep)) for c in columns}
    lines = np.empty(len(keep), dtype=int)
    for k, (lineno, fields) in enumerate(keep):
        lines[k] = lineno
        for c in columns:
            text = fields[index[c]]
            if text == "" and c in _OPTIONAL:
                raise InputError("empty value", path=path, line=lineno, field=c)
            data[c][k] = parse_float(text, path, lineno, c)
    return data, lines


def _check_on_terrain(sx, rx, terrain, path, lines):
    """Refuse the first line in the file with a station off the terrain."""
    outside = ~terrain.covers(sx) | ~terrain.covers(rx)
    if np.any(outside):
        k = int(np.flatnonzero(outside)[0])
        role, x = ("source", sx[k]) if not terrain.covers(sx[k]) else ("receiver", rx[k])
        raise InputError(
            f"{role} at x = {x:g} m is outside the terrain{f' of {terrain.path}' if terrain.path else ''} "
            f"({terrain.x[0]:g} to {terrain.x[-1]:g} m)",
            path=path, line=lines[k], field=f"{role}_x",
        )


def _place_on_ground(x, z, terrain, path, lines, role, notices):
    """Elevations for stations at ``x`` (already checked to lie on the terrain)."""
    if terrain is not None:
        ground = terrain.elevation(x)
        if z is None:
            return ground
        above = z - ground
        bad = np.flatnonzero(above > ABOVE_GROUND_TOLERANCE_M)
        if bad.size:
            k = int(bad[0])
            raise InputError(
                f"{role} elevation {z[k]:g} m is {above[k]:.2f} m above the terrain ({ground[k]:g} m)",
                path=path, line=lines[k], field=f"{role}_z",
            )
        # positions rounded in a file (0.1 mm) sit a hair above the terrain: not worth a notice
        snapped = above > 1e-3
        if np.any(snapped):
            notices.append(f"{path}: {int(snapped.sum())} {role} elevation(s) up to {ABOVE_GROUND_TOLERANCE_M} m "
                           "above the terrain were put on it")
        return np.minimum(z, ground)
    if z is None:
        return np.zeros_like(x)
    return z


def check_picks(picks):
    """Check a Picks for impossible geometry; return it (duplicates removed) or raise.

    A geophone on top of its shot and the same shot-geophone pair twice with different
    times are errors; an exact repeat is dropped with a notice.
    """
    path, lines = picks.path, picks.line
    def where(k):
        return None if lines is None else int(lines[k])
    same = (np.abs(picks.source_x - picks.receiver_x) < 1e-6) & (np.abs(picks.source_z - picks.receiver_z) < 1e-6)
    if np.any(same):
        k = int(np.flatnonzero(same)[0])
        raise InputError(f"geophone on top of its shot (x = {picks.source_x[k]:g} m)", path=path, line=where(k),
                         field="receiver_x")
    if picks.time_s is not None:
        t = picks.time_s
        if not np.all(np.isfinite(t)) or np.any(t <= 0):
            k = int(np.flatnonzero(~(np.isfinite(t) & (t > 0)))[0])
            raise InputError(f"time must be positive and finite, got {t[k]:g} s", path=path, line=where(k),
                             field="time_ms")
    if picks.sigma_s is not None:
        s = picks.sigma_s
        if not np.all(np.isfinite(s)) or np.any(s <= 0):
            k = int(np.flatnonzero(~(np.isfinite(s) & (s > 0)))[0])
            raise InputError(f"sigma must be positive, got {s[k]:g} s", path=path, line=where(k), field="sigma_ms")
    key = np.round(np.column_stack([picks.source_x, picks.source_z, picks.receiver_x, picks.receiver_z]), 4)
    _, first, inverse = np.unique(key, axis=0, return_index=True, return_inverse=True)
    inverse = inverse.ravel()
    if first.size == len(picks):
        return picks
    keep = np.zeros(len(picks), dtype=bool)
    keep[first] = True
    for k in np.flatnonzero(~keep):
        j = first[inverse[k]]
        if picks.time_s is not None and abs(picks.time_s[k] - picks.time_s[j]) > 1e-7:
            raise InputError(
                f"same shot-geophone pair as line {where(j)} with a different time "
                f"({picks.time_s[k] * 1e3:g} ms against {picks.time_s[j] * 1e3:g} ms)",
                path=path, line=where(k), field="time_ms",
            )
    out = picks.subset(keep)
    out.notices.append(f"{path}: {int((~keep).sum())} repeated pick(s) dropped")
    return out


def write_picks(path, picks, elevations=True):
    """Write picks to a CSV pick file atomically (temporary name, then rename).

    Times and uncertainties are written in ms with 0.001 ms resolution.
    """
    cols = ["source_x", "receiver_x"]
    if elevations:
        cols += ["source_z", "receiver_z"]
    if picks.time_s is not None:
        cols.append("time_ms")
    if picks.sigma_s is not None:
        cols.append("sigma_ms")
    with atomic_open(path, "w", encoding="utf-8", newline="") as out:
        out.write(",".join(cols) + "\n")
        for k in range(len(picks)):
            row = [f"{picks.source_x[k]:.4f}", f"{picks.receiver_x[k]:.4f}"]
            if elevations:
                row += [f"{picks.source_z[k]:.4f}", f"{picks.receiver_z[k]:.4f}"]
            if picks.time_s is not None:
                row.append(f"{picks.time_s[k] * 1e3:.4f}")
            if picks.sigma_s is not None:
                row.append(f"{picks.sigma_s[k] * 1e3:.4f}")
            out.write(",".join(row) + "\n")
