"""The record layout file: where each channel of each record file was, for records whose
headers do not carry the positions (or carry wrong ones).

Layout file (CSV, UTF-8, header row, ``#`` comment lines allowed), one row per channel:

============  ========  ===========================================================
column        required  meaning
============  ========  ===========================================================
record        yes       record file name, without its folder (``shot07.sg2``)
channel       yes       channel number in the record, 1 for the first trace
source_x      yes       shot position along the line, m
receiver_x    yes       geophone position along the line, m
source_z      no        shot elevation, m (default: on the ground)
receiver_z    no        geophone elevation, m (default: on the ground)
polarity      no        1, or -1 for a geophone wired reversed
dead          no        1 for a channel known to be dead, else 0
delay_ms      no        time of the first sample relative to the shot, ms; wins over
                        the record's header (a known trigger delay)
============  ========  ===========================================================

Every channel of a record named in the file must be listed, and the shot position must
be the same on all of a record's rows.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ..core.errors import InputError
from ..core.fileio import parse_float, read_csv_rows

__all__ = ["RecordLayout", "read_layout"]

_REQUIRED = ("record", "channel", "source_x", "receiver_x")
_OPTIONAL = ("source_z", "receiver_z", "polarity", "dead", "delay_ms")


@dataclass
class RecordLayout:
    """The layout of one record file: one entry per channel, sorted by channel, SI.

    Attributes
    ----------
    record : str
    channel : ndarray of int
    source_x, source_z : float
        m; ``source_z`` NaN when not given.
    receiver_x, receiver_z : ndarray
        m; NaN elevations when not given.
    polarity : ndarray
        +1 or -1.
    dead : ndarray of bool
    delay_s : float or None
        Time of the first sample relative to the shot, s; None: take the header's.
    path : str
    line : ndarray of int
        Line of each channel's row in the layout file, for messages.
    """

    record: str
    channel: np.ndarray
    source_x: float
    source_z: float
    receiver_x: np.ndarray
    receiver_z: np.ndarray
    polarity: np.ndarray
    dead: np.ndarray
    delay_s: float | None
    path: str
    line: np.ndarray


def read_layout(path):
    """Read a record layout file.

    Returns
    -------
    dict of str to RecordLayout
        Keyed by record file name.

    Raises
    ------
    InputError
        Naming file, line and field: a missing column, a non-number, a channel below 1 or
        listed twice, a polarity other than 1 or -1, records whose rows give different
        shot positions or delays.
    """
    path = str(path)
    header, rows = read_csv_rows(path)
    for name in _REQUIRED:
        if name not in header:
            raise InputError(f"missing required column '{name}' (header has: {', '.join(header)})", path=path)
    if not rows:
        raise InputError("no channels in layout file", path=path)
    col = {name: header.index(name) for name in _REQUIRED + _OPTIONAL if name in header}
    by_record = {}
    for lineno, fields in rows:
        if len(fields) < len(header):
            raise InputError(f"expected {len(header)} fields, got {len(fields)}", path=path, line=lineno)
        record = Path(fields[col["record"]]).name
        if not record:
            raise InputError("empty record name", path=path, line=lineno, field="record")
        values = {name: parse_float(fields[k], path, lineno, name) for name, k in col.items() if name != "record"}
        by_record.setdefault(record, []).append((lineno, values))
    return {record: _record_layout(record, entries, path) for record, entries in by_record.items()}


def _record_layout(record, entries, path):
    """Check and assemble the rows of one record (see :func:`read_layout`)."""
    entries = sorted(entries, key=lambda e: e[1]["channel"])
    lines = np.array([lineno for lineno, _ in entries])
    channel = np.array([v["channel"] for _, v in entries])
    for (lineno, v) in entries:
        if v["channel"] < 1 or v["channel"] != round(v["channel"]):
            raise InputError(f"channel must be a whole number from 1, got {v['channel']:g}",
                             path=path, line=lineno, field="channel")
        if v.get("polarity", 1.0) not in (1.0, -1.0):
            raise InputError(f"polarity must be 1 or -1, got {v['polarity']:g}",
                             path=path, line=lineno, field="polarity")
        if v.get("dead", 0.0) not in (0.0, 1.0):
            raise InputError(f"dead must be 0 or 1, got {v['dead']:g}", path=path, line=lineno, field="dead")
    repeated = np.flatnonzero(np.diff(channel) == 0)
    if repeated.size:
        k = repeated[0] + 1
        raise InputError(f"channel {int(channel[k])} of {record} listed twice (also line {lines[k - 1]})",
                         path=path, line=lines[k], field="channel")
    for name in ("source_x", "source_z", "delay_ms"):
        values = np.array([v.get(name, np.nan) for _, v in entries])
        differ = np.flatnonzero(~np.isclose(values, values[0], atol=1e-6, equal_nan=True))
        if differ.size:
            k = differ[0]
            raise InputError(f"{record}: {name} {values[k]:g} differs from {values[0]:g} on its first row "
                             f"(one shot per record)", path=path, line=lines[k], field=name)
    first = entries[0][1]
    delay_ms = first.get("delay_ms")
    return RecordLayout(
        record=record, channel=channel.astype(int),
        source_x=first["source_x"], source_z=first.get("source_z", np.nan),
        receiver_x=np.array([v["receiver_x"] for _, v in entries]),
        receiver_z=np.array([v.get("receiver_z", np.nan) for _, v in entries]),
        polarity=np.array([v.get("polarity", 1.0) for _, v in entries]),
        dead=np.array([v.get("dead", 0.0) == 1.0 for _, v in entries]),
        delay_s=None if delay_ms is None else delay_ms * 1e-3, path=path, line=lines,
    )
