"""Reading shot records (SEG-2, SEG-Y) through ObsPy into :class:`Gather` objects.

ObsPy (``obspy.read``) decodes the files; this module takes from their headers what
picking needs and checks it: the sample interval, the delay (time of the first sample
relative to the shot), the source and receiver positions, dead channels and the number
of stacked shots. Header fields used:

- SEG-2 (Pullan 1990, Geophysics 55, 1260-1271; strings of each trace descriptor block):
  ``SAMPLE_INTERVAL`` (s), ``DELAY`` (s; ObsPy leaves it unapplied), ``SOURCE_LOCATION``
  and ``RECEIVER_LOCATION`` (x, or x y z, m), ``STACK``, ``CHANNEL_NUMBER``,
  ``DESCALING_FACTOR`` and ``TRACE_TYPE`` (``DEAD``).
- SEG-Y (SEG-Y rev 1 and 2.0 trace header): sample interval, delay recording time (ms),
  source and group x with their coordinate scalar, source and receiver elevations with
  their scalar, trace identification code (2 = dead), vertically summed traces.

A layout file (:mod:`tomo.records.layout`) gives or overrides the geometry.
"""

from __future__ import annotations

import warnings
from pathlib import Path

import numpy as np

from ..core.errors import InputError
from .gather import Gather

__all__ = ["read_record", "read_records", "stack_gathers"]

#: Formats (as ObsPy names them) whose headers we know how to read.
FORMATS = ("SEG2", "SEGY", "SU")


def read_record(path, layouts=None):
    """Read one record file into a Gather.

    Parameters
    ----------
    path : str or Path
    layouts : dict of str to RecordLayout, optional
        From :func:`tomo.records.layout.read_layout`; the entry named like the file (if
        any) gives the geometry, otherwise the headers must.

    Raises
    ------
    InputError
        One line naming the file (and channel): not seismic data ObsPy can read, a
        truncated file, zero-length or unequal traces, no positions and no layout, a
        layout whose channels do not match the record.
    """
    path = Path(path)
    stream = _read_stream(path)
    data, dt_s = _samples(stream, path)
    header = _header_geometry(stream, path)
    layout = (layouts or {}).get(path.name)
    if layout is not None:
        geometry = _layout_geometry(layout, header, data.shape[0], path)
    elif header["positions"]:
        geometry = header
    else:
        raise InputError("no source and receiver positions in the headers; give a layout file (--layout) "
                         "naming this record", path=path)
    return Gather(
        data=data, dt_s=dt_s, delay_s=geometry["delay_s"], source_x=geometry["source_x"],
        source_z=geometry["source_z"], receiver_x=geometry["receiver_x"], receiver_z=geometry["receiver_z"],
        channel=geometry["channel"], dead=header["dead"] | geometry.get("dead", False),
        polarity=geometry.get("polarity", np.ones(data.shape[0])), stack=header["stack"],
        path=str(path), paths=[str(path)], notes=list(geometry.get("notes", [])),
    )


def read_records(paths, layouts=None):
    """Read several record files; a layout entry naming no given file is an error."""
    names = [Path(p).name for p in paths]
    for name in set(names):
        if names.count(name) > 1 and layouts and name in layouts:
            raise InputError(f"two record files are named {name}; the layout cannot tell them apart")
    if layouts:
        unused = sorted(set(layouts) - set(names))
        if unused:
            first = layouts[unused[0]]
            raise InputError(f"layout names record {unused[0]!r}, which is not among the records given",
                             path=first.path, line=int(first.line[0]), field="record")
    return [read_record(p, layouts) for p in paths]


def _read_stream(path):
    import obspy

    if not path.exists():
        raise InputError("file does not exist", path=path)
    if path.is_dir():
        raise InputError("is a folder, not a record file", path=path)
    if path.stat().st_size == 0:
        raise InputError("empty file", path=path)
    with warnings.catch_warnings():
        # ObsPy warns that it leaves SEG-2's DELAY unapplied and that vendors add their
        # own header strings; both are handled here, so the warnings would only alarm.
        warnings.simplefilter("ignore")
        try:
            stream = obspy.read(str(path))
        except TypeError as exc:
            if "Unknown format" in str(exc):
                raise InputError("not a seismic record (expected SEG-2 or SEG-Y)", path=path) from None
            raise InputError(f"cannot read as a seismic record: {exc}", path=path) from None
        except Exception as exc:  # a damaged file can fail anywhere inside the decoder
            reason = str(exc).strip().splitlines()[0] if str(exc).strip() else type(exc).__name__
            raise InputError(f"damaged or truncated record ({reason})", path=path) from None
    if len(stream) == 0:
        raise InputError("record holds no traces", path=path)
    fmt = getattr(stream[0].stats, "_format", "?")
    if fmt not in FORMATS:
        raise InputError(f"is a {fmt} file; expected SEG-2 or SEG-Y", path=path)
    return stream


def _samples(stream, path):
    """The traces as one (n_traces, n_samples) float array, descaled, and the sample interval."""
    lengths = np.array([tr.stats.npts for tr in stream])
    empty = np.flatnonzero(lengths == 0)
    if empty.size:
        raise InputError(f"channel {empty[0] + 1} has no samples (zero-length trace)", path=path)
    odd = np.flatnonzero(lengths != lengths[0])
    if odd.size:
        k = odd[0]
        raise InputError(f"channel {k + 1} has {lengths[k]} samples, channel 1 has {lengths[0]}: "
                         f"truncated or inconsistent record", path=path)
    deltas = np.array([tr.stats.delta for tr in stream])
    if not np.all(np.isfinite(deltas)) or np.any(deltas <= 0):
        raise InputError("sample interval missing or not positive", path=path)
    if np.any(np.abs(deltas - deltas[0]) > 1e-9 * deltas[0]):
        k = int(np.flatnonzero(np.abs(deltas - deltas[0]) > 1e-9 * deltas[0])[0])
        raise InputError(f"channel {k + 1} has a sample interval of {deltas[k] * 1e3:g} ms, channel 1 "
                         f"{deltas[0] * 1e3:g} ms", path=path)
    data = np.empty((len(stream), lengths[0]))
    for k, tr in enumerate(stream):
        calib = float(getattr(tr.stats, "calib", 1.0) or 1.0)
        data[k] = np.asarray(tr.data, dtype=float) * calib
    bad = np.flatnonzero(~np.all(np.isfinite(data), axis=1))
    if bad.size:
        raise InputError(f"channel {bad[0] + 1} holds samples that are not finite numbers", path=path)
    return data, float(deltas[0])


def _header_geometry(stream, path):
    fmt = stream[0].stats._format
    reader = _seg2_trace if fmt == "SEG2" else _segy_trace
    rows = [reader(tr, k + 1, path) for k, tr in enumerate(stream)]
    geometry = {
        "channel": np.array([r["channel"] for r in rows], dtype=int),
        "dead": np.array([r["dead"] for r in rows]),
        "stack": max(r["stack"] for r in rows),
        "receiver_x": np.array([r["receiver_x"] for r in rows]),
        "receiver_z": np.array([r["receiver_z"] for r in rows]),
        "delay_s": rows[0]["delay_s"],
    }
    delays = np.array([r["delay_s"] for r in rows])
    if np.any(np.abs(delays - delays[0]) > 1e-9):
        k = int(np.flatnonzero(np.abs(delays - delays[0]) > 1e-9)[0])
        raise InputError(f"channel {k + 1} starts at {delays[k] * 1e3:g} ms, channel 1 at {delays[0] * 1e3:g} ms "
                         f"(one delay per record expected)", path=path)
    sources = np.array([(r["source_x"], r["source_z"]) for r in rows], dtype=float)
    known = [r["positions"] for r in rows]
    # SEG-Y writes zeros where it knows no position, so one trace with a position is enough
    geometry["positions"] = all(known) if fmt == "SEG2" else any(known)
    if geometry["positions"]:
        differ = np.flatnonzero(np.any(~np.isclose(sources, sources[0], atol=1e-6, equal_nan=True), axis=1))
        if differ.size:
            raise InputError(f"channel {differ[0] + 1} names another shot position than channel 1 "
                             f"({sources[differ[0], 0]:g} m against {sources[0, 0]:g} m)", path=path)
        geometry["source_x"], geometry["source_z"] = sources[0]
    return geometry


def _location(text, path, channel, name):
    """x (and elevation z when three values are given) from a SEG-2 location string."""
    try:
        values = [float(v) for v in str(text).replace(",", " ").split()]
    except ValueError:
        raise InputError(f"channel {channel}: {name} {text!r} is not a list of numbers", path=path) from None
    if not values or not all(np.isfinite(values)):
        raise InputError(f"channel {channel}: {name} {text!r} is not a list of numbers", path=path)
    return values[0], (values[2] if len(values) >= 3 else np.nan)


def _seg2_number(strings, key, default, path, channel):
    if key not in strings:
        return default
    try:
        value = float(str(strings[key]).split()[0])
    except (ValueError, IndexError):
        raise InputError(f"channel {channel}: {key} {strings[key]!r} is not a number", path=path) from None
    if not np.isfinite(value):
        raise InputError(f"channel {channel}: {key} {strings[key]!r} is not a finite number", path=path)
    return value


def _seg2_trace(trace, index, path):
    strings = getattr(trace.stats, "seg2", {})
    channel = int(_seg2_number(strings, "CHANNEL_NUMBER", index, path, index))
    row = {"channel": channel, "delay_s": _seg2_number(strings, "DELAY", 0.0, path, channel),
           "stack": int(_seg2_number(strings, "STACK", 1, path, channel)),
           "dead": str(strings.get("TRACE_TYPE", "")).strip().upper() == "DEAD"}
    has = "SOURCE_LOCATION" in strings and "RECEIVER_LOCATION" in strings
    row["positions"] = has
    sx, sz = _location(strings["SOURCE_LOCATION"], path, channel, "SOURCE_LOCATION") if has else (np.nan, np.nan)
    rx, rz = _location(strings["RECEIVER_LOCATION"], path, channel, "RECEIVER_LOCATION") if has else (np.nan, np.nan)
    row.update(source_x=sx, source_z=sz, receiver_x=rx, receiver_z=rz)
    return row


def _scaled(value, scalar):
    """SEG-Y scalar convention: positive multiplies, negative divides, 0 means 1."""
    scalar = int(scalar)
    if scalar > 0:
        return value * scalar
    if scalar < 0:
        return value / -scalar
    return float(value)


def _segy_trace(trace, index, path):
    h = trace.stats.segy.trace_header if hasattr(trace.stats, "segy") else trace.stats.su.trace_header
    xy = h.scalar_to_be_applied_to_all_coordinates
    el = h.scalar_to_be_applied_to_all_elevations_and_depths
    channel = int(h.trace_number_within_the_original_field_record) or index
    sx, rx = _scaled(h.source_coordinate_x, xy), _scaled(h.group_coordinate_x, xy)
    sz, rz = _scaled(h.surface_elevation_at_source, el), _scaled(h.receiver_group_elevation, el)
    # all-zero positions are what a recorder writes when it knows none
    positions = any(v != 0 for v in (sx, rx))
    elevations = any(v != 0 for v in (sz, rz))
    return {"channel": channel, "delay_s": h.delay_recording_time * 1e-3,
            "stack": max(int(h.number_of_vertically_summed_traces_yielding_this_trace), 1),
            "dead": int(h.trace_identification_code) == 2, "positions": positions,
            "source_x": sx, "receiver_x": rx,
            "source_z": sz if elevations else np.nan, "receiver_z": rz if elevations else np.nan}


def _layout_geometry(layout, header, n_traces, path):
    """The geometry of a record from its layout entry, checked against the record."""
    if layout.channel.size != n_traces:
        raise InputError(f"layout lists {layout.channel.size} channel(s) for {layout.record}, the record has "
                         f"{n_traces}", path=layout.path, line=int(layout.line[0]), field="channel")
    expected = np.arange(1, n_traces + 1)
    wrong = np.flatnonzero(layout.channel != expected)
    if wrong.size:
        k = wrong[0]
        raise InputError(f"{layout.record} has channels 1 to {n_traces}; layout row gives channel "
                         f"{layout.channel[k]}", path=layout.path, line=int(layout.line[k]), field="channel")
    notes = []
    if header["positions"] and (abs(header["source_x"] - layout.source_x) > 1e-3
                                or np.any(np.abs(header["receiver_x"] - layout.receiver_x) > 1e-3)):
        notes.append(f"{path}: positions in the headers differ from the layout; the layout's are used")
    return {"channel": layout.channel, "source_x": layout.source_x, "source_z": layout.source_z,
            "receiver_x": layout.receiver_x, "receiver_z": layout.receiver_z, "polarity": layout.polarity,
            "dead": layout.dead, "delay_s": header["delay_s"] if layout.delay_s is None else layout.delay_s,
            "notes": notes}


def stack_gathers(gathers):
    """Sum the records of one shot (same shot position, geophones and timing) into one.

    Records that share a shot position and geophones but not the sampling are an error:
    they cannot be summed and would give two different picks for the same pairs.
    """
    groups = {}
    for g in gathers:
        key = (round(g.source_x, 3), tuple(np.round(g.receiver_x, 3)))
        groups.setdefault(key, []).append(g)
    out = []
    for members in groups.values():
        first = members[0]
        for g in members[1:]:
            if (g.n_samples, round(g.dt_s, 12), round(g.delay_s, 9)) != \
                    (first.n_samples, round(first.dt_s, 12), round(first.delay_s, 9)):
                raise InputError(f"same shot ({first.source_x:g} m) and geophones as {first.path}, but other "
                                 f"sampling or delay: cannot stack them", path=g.path)
        if len(members) == 1:
            out.append(first)
            continue
        stacked = first.with_data(np.sum([g.data for g in members], axis=0))
        stacked.stack = sum(g.stack for g in members)
        stacked.dead = np.any([g.dead for g in members], axis=0)
        stacked.paths = [p for g in members for p in g.paths]
        stacked.notes.append(f"{len(members)} records of the shot at {first.source_x:g} m stacked: "
                             + ", ".join(Path(g.path).name for g in members))
        out.append(stacked)
    return out
