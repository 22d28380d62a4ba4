"""Units of a pick file and whether its numbers are those of a refraction line at all.

A pick file in seconds instead of milliseconds, or with positions in feet or
centimetres, reads without a single bad value and gives a result that looks normal
(one layer at a million m/s, or 8,700 m/s "bedrock"). So before any computation
:func:`check_plausible` compares four scales of the picks with what shallow refraction
lines produce, and when they are outside, names the unit that would bring them inside
and the option that declares it.

- largest first-arrival time, 1 to 2000 ms: records of shallow lines are 0.25-2 s long
  and their first breaks come a few to a few hundred ms after the shot (common practice);
- median geophone spacing, 0.1 to 50 m: engineering lines use 0.5-10 m, 2-5 m most
  often (common practice);
- velocity to the nearest geophone of each shot side (median over the sides), 100 to
  6500 m/s: from loose dry soil (unsaturated sand from about 200 m/s) to basalt
  (6400 m/s; typical P-wave velocities, Colorado School of Mines refraction notes);
- apparent velocity of the far half of each shot side (median over the sides), 100 to
  8000 m/s: the fastest near-surface rocks give 5500-6400 m/s (same notes); down-dip
  sides read faster and up-dip sides slower, and the median over both cancels most of
  that; 8000 leaves a margin.

Positions in feet scale every velocity by 3.28 and nothing else: they are caught
when the far velocities end above 8000 m/s, i.e. for lines whose fastest layer is
faster than about 2400 m/s; a slower line in feet passes and must be declared.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..core.errors import InputError

__all__ = ["TIME_UNITS", "DISTANCE_UNITS", "GROUND_VELOCITY_M_S", "Scales", "pick_scales", "check_plausible",
           "check_units", "unit_notices"]

#: Time units a pick file may be in: name -> seconds per unit.
TIME_UNITS = {"ms": 1e-3, "s": 1.0}
#: Distance units of positions and elevations: name -> metres per unit (international foot).
DISTANCE_UNITS = {"m": 1.0, "ft": 0.3048, "cm": 0.01}
#: Names of the units in messages.
_NAMES = {"ms": "milliseconds", "s": "seconds", "m": "metres", "ft": "feet", "cm": "centimetres"}
#: Options that declare them on the command line.
_OPTIONS = {"time": "--time-unit", "distance": "--distance-unit"}

#: Velocities of near-surface ground, m/s: slower than any soil with grains in contact,
#: faster than any common rock (see the module table; the starting model of an
#: inversion is held to the same range).
GROUND_VELOCITY_M_S = (100.0, 8000.0)
TIME_RANGE_MS = (1.0, 2000.0)
SPACING_RANGE_M = (0.1, 50.0)
NEAR_VELOCITY_M_S = (100.0, 6500.0)
FAR_VELOCITY_M_S = GROUND_VELOCITY_M_S
#: Far apparent velocities above this (m/s) are possible but rare on engineering lines
#: (fresh granite, limestone, basalt: 5500-6400 m/s, same notes): worth a notice, since
#: a line in feet whose rock is 1700-2400 m/s lands there too.
FAST_NOTICE_M_S = 5500.0


@dataclass(frozen=True)
class Scales:
    """The four scales of a pick file, in the file's numbers read as ms and m.

    Attributes
    ----------
    max_time_ms : float or None
        Largest first-arrival time, ms (None for a layout).
    spacing_m : float or None
        Median spacing of neighbouring geophones, m.
    near_m_s, far_m_s : float or None
        Median over shot sides of the velocity to the nearest geophone and of the
        apparent velocity of the far half of the side (sides of 3 or more picks), m/s.
    """

    max_time_ms: float | None
    spacing_m: float | None
    near_m_s: float | None
    far_m_s: float | None

    def converted(self, time_factor, distance_factor):
        """The scales with times multiplied by ``time_factor`` and distances by ``distance_factor``."""
        def scale(value, factor):
            return None if value is None else value * factor
        v = distance_factor / time_factor
        return Scales(scale(self.max_time_ms, time_factor), scale(self.spacing_m, distance_factor),
                      scale(self.near_m_s, v), scale(self.far_m_s, v))

    def problems(self):
        """What is outside its plausible range, as short phrases (empty when all is well)."""
        out = []
        for value, (lo, hi), what, unit in (
                (self.max_time_ms, TIME_RANGE_MS, "largest time", "ms"),
                (self.spacing_m, SPACING_RANGE_M, "geophone spacing", "m"),
                (self.near_m_s, NEAR_VELOCITY_M_S, "velocity to the nearest geophones", "m/s"),
                (self.far_m_s, FAR_VELOCITY_M_S, "apparent velocity at far offsets", "m/s")):
            if value is not None and not lo <= value <= hi:
                out.append(f"{what} {_number(value)} {unit} (plausible {lo:g}-{hi:g})")
        return out


def _number(value):
    return f"{value:,.0f}" if abs(value) >= 100 else f"{value:.3g}"


def pick_scales(source_x, receiver_x, time_ms=None):
    """The :class:`Scales` of picks (positions as read, times as read, no units applied)."""
    sx, rx = np.asarray(source_x, float), np.asarray(receiver_x, float)
    geos = np.unique(np.round(rx, 6))
    spacing = float(np.median(np.diff(geos))) if geos.size > 1 else None
    if time_ms is None:
        return Scales(None, spacing, None, None)
    t = np.asarray(time_ms, float)
    offset = rx - sx
    near, far = [], []
    for shot in np.unique(np.round(sx, 6)):
        for side in (-1.0, 1.0):
            sel = np.flatnonzero((np.abs(sx - shot) < 1e-6) & (np.sign(offset) == side))
            if sel.size < 3:
                continue
            u = np.abs(offset[sel])
            order = np.argsort(u)
            u, ts = u[order], t[sel][order]
            near.append(u[0] / ts[0])
            half = u >= 0.5 * (u[0] + u[-1])
            if half.sum() >= 2 and np.ptp(u[half]) > 0:
                slope = np.polyfit(u[half], ts[half], 1)[0]
                if slope > 0:
                    far.append(1.0 / slope)
    return Scales(float(np.max(t)), spacing, float(np.median(near)) * 1e3 if near else None,
                  float(np.median(far)) * 1e3 if far else None)


def check_units(time_unit="ms", distance_unit="m"):
    """Check the names of declared units; InputError naming the known ones otherwise."""
    for kind, unit, known in (("time", time_unit, TIME_UNITS), ("distance", distance_unit, DISTANCE_UNITS)):
        if unit not in known:
            raise InputError(f"unknown {kind} unit {unit!r} (expected one of {', '.join(known)})",
                             field=_OPTIONS[kind])
    return TIME_UNITS[time_unit] * 1e3, DISTANCE_UNITS[distance_unit]


def check_plausible(scales, path=None, time_unit="ms", distance_unit="m"):
    """Refuse picks whose scales are not those of a refraction line in the declared units.

    Parameters
    ----------
    scales : Scales
        From :func:`pick_scales`, the file's numbers as read.
    path : str, optional
        The pick file, for the message.
    time_unit, distance_unit : str
        The declared units (keys of :data:`TIME_UNITS` and :data:`DISTANCE_UNITS`).

    Raises
    ------
    InputError
        One line: what is implausible and, when one other pair of units makes every
        scale plausible, that the file looks like it is in those units and the option
        that declares them.
    """
    time_factor, distance_factor = check_units(time_unit, distance_unit)
    problems = scales.converted(time_factor, distance_factor).problems()
    if not problems:
        return
    fits = [(tu, du) for tu in TIME_UNITS for du in DISTANCE_UNITS
            if (tu, du) != (time_unit, distance_unit)
            and not scales.converted(TIME_UNITS[tu] * 1e3, DISTANCE_UNITS[du]).problems()]
    field = "time_ms" if "time" in problems[0] and "velocity" not in problems[0] else "receiver_x"
    where = "; ".join(problems)
    if len(fits) >= 1:
        tu, du = fits[0]
        changed = [(kind, new) for kind, old, new in (("time", time_unit, tu), ("distance", distance_unit, du))
                   if old != new]
        field = "time_ms" if changed[0][0] == "time" else "receiver_x"
        looks = " and ".join(f"{'times' if kind == 'time' else 'positions'} in {_NAMES[new]}, not "
                             f"{_NAMES[time_unit if kind == 'time' else distance_unit]}" for kind, new in changed)
        declare = " ".join(f"{_OPTIONS[kind]} {new}" for kind, new in changed)
        raise InputError(f"looks like {looks}: {where}; declare {declare}", path=path, field=field)
    raise InputError(f"{where}: not what a refraction line gives in any of the known units; check the "
                     "columns and the units of the file", path=path, field=field)


def unit_notices(scales, path=None, time_unit="ms", distance_unit="m"):
    """Notices for plausible but unusual scales: far apparent velocities above
    :data:`FAST_NOTICE_M_S` in metres, which feet would give for a slow rock."""
    time_factor, distance_factor = check_units(time_unit, distance_unit)
    far = scales.converted(time_factor, distance_factor).far_m_s
    if distance_unit == "m" and far is not None and far > FAST_NOTICE_M_S:
        where = f"{path}: " if path else ""
        return [f"{where}far-offset apparent velocity {far:,.0f} m/s, fast for near-surface rock; if the positions "
                f"are in feet ({far * DISTANCE_UNITS['ft']:,.0f} m/s in metres), declare --distance-unit ft"]
    return []
