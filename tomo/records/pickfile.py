"""The pick file ``tomo pick`` writes, its trace table, and the user's edits to them.

``tomo pick ... --out picks.csv`` writes two files:

- ``picks.csv``, the pick file every other command reads (``tomo.survey.picks``): one
  row per pick with ``sigma_ms``, a ``#`` comment header naming the records and the
  settings, and a ``# no pick:`` comment line for every trace left unpicked, with why.
- ``picks.traces.csv``, the trace table: one row per trace (record, channel, positions,
  status, time and sigma as written, signal-to-noise ratio, reason). It is how a later
  run knows what it wrote.

Picks are corrected by editing ``picks.csv`` (change a time or sigma, delete a row, add
one) or through a corrections file, and running ``tomo pick`` again: every row that
differs from what the tool last wrote is the user's and is kept as it is; a deleted row
stays deleted. Corrections file (CSV): ``source_x``, ``receiver_x``, ``time_ms`` (a time
in ms, or ``drop``) and optionally ``sigma_ms``.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ..core.errors import InputError
from ..core.fileio import atomic_path, parse_float, read_csv_rows

__all__ = ["TraceRow", "rows_from_picks", "keep_user_edits", "read_corrections", "apply_corrections",
           "write_pick_files", "trace_table_path", "HAND_SIGMA_MS"]

#: Sigma of a hand pick given without one, ms, when the trace has no automatic sigma
#: (common practice: pick errors of 0.5-2 ms are usual).
HAND_SIGMA_MS = 1.0
#: Statuses of rows that go into the pick file.
PICKED = ("picked", "re-picked", "edited", "added", "corrected")
#: Statuses the user made; a later run keeps them.
BY_HAND = ("edited", "added", "dropped", "corrected")
#: Written times are rounded to this (ms); a difference beyond it is an edit.
WRITTEN_DECIMALS = 4


@dataclass
class TraceRow:
    """One trace of the picked line (SI inside: m, s)."""

    record: str
    channel: int
    source_x: float
    source_z: float
    receiver_x: float
    receiver_z: float
    status: str
    time_s: float
    sigma_s: float
    snr: float
    reason: str

    @property
    def key(self):
        return (round(self.source_x, WRITTEN_DECIMALS), round(self.receiver_x, WRITTEN_DECIMALS))

    @property
    def picked(self):
        return self.status in PICKED


def trace_table_path(out_path):
    """``picks.csv`` -> ``picks.traces.csv`` beside it."""
    out_path = Path(out_path)
    return out_path.with_name(out_path.stem + ".traces.csv")


def rows_from_picks(gather_picks):
    """One TraceRow per trace of every GatherPicks, in record and channel order."""
    rows = []
    for p in gather_picks:
        record = ", ".join(Path(r.strip()).name for r in p.record.split(","))
        for k in range(p.channel.size):
            rows.append(TraceRow(record, int(p.channel[k]), float(p.source_x), float(p.source_z),
                                 float(p.receiver_x[k]), float(p.receiver_z[k]), str(p.status[k]),
                                 float(p.time_s[k]), float(p.sigma_s[k]), float(p.snr[k]), p.reason[k]))
    return rows


def _ms(value_s):
    return round(value_s * 1e3, WRITTEN_DECIMALS)


def keep_user_edits(rows, out_path):
    """Keep the user's changes to a pick file this tool wrote before (see module doc).

    Returns a list of notes (how many picks were kept as edited, added, dropped).

    Raises
    ------
    InputError
        When ``out_path`` exists but has no trace table beside it: it was not written
        by ``tomo pick`` (or its table was removed), and its picks cannot be told from
        the user's, so it is not overwritten.
    """
    out_path = Path(out_path)
    if not out_path.exists():
        return []
    table_path = trace_table_path(out_path)
    if not table_path.exists():
        raise InputError(f"exists and was not written by tomo pick (no {table_path.name} beside it); "
                         f"choose another --out or move it away", path=out_path)
    theader, table_rows = read_csv_rows(table_path)
    for name in ("source_x", "receiver_x", "status", "time_ms", "sigma_ms"):
        if name not in theader:
            raise InputError(f"missing column '{name}': not a trace table of tomo pick", path=table_path)
    previous = {_key(f, theader, table_path, n): f for n, f in table_rows}
    header, file_rows = read_csv_rows(out_path)
    for name in ("source_x", "receiver_x", "time_ms"):
        if name not in header:
            raise InputError(f"missing required column '{name}'", path=out_path)
    current = {}
    for lineno, f in file_rows:
        key = _key(f, header, out_path, lineno)
        time_ms = parse_float(f[header.index("time_ms")], out_path, lineno, "time_ms")
        sigma_ms = parse_float(f[header.index("sigma_ms")], out_path, lineno, "sigma_ms") \
            if "sigma_ms" in header else np.nan
        current[key] = (time_ms, sigma_ms)
    counts = {"edited": 0, "added": 0, "dropped": 0}
    for row in rows:
        old = previous.get(row.key)
        old_status = old[theader.index("status")] if old else ""
        written = None
        if old and old_status in PICKED:
            written = (float(old[theader.index("time_ms")]), float(old[theader.index("sigma_ms")]))
        mine = current.get(row.key)
        if mine is None:
            if written is not None or old_status == "dropped":
                _set(row, "dropped", np.nan, np.nan, "dropped by hand from the pick file")
                counts["dropped"] += 1
            continue
        if written is not None and old_status not in BY_HAND and _same(mine, written):
            continue
        if written is not None and old_status == "corrected" and _same(mine, written):
            continue  # the corrections file made it; it applies again below
        status = "edited" if (written is not None or row.picked) else "added"
        auto_ms = row.sigma_s * 1e3 if np.isfinite(row.sigma_s) else HAND_SIGMA_MS
        sigma_ms = mine[1] if np.isfinite(mine[1]) else auto_ms
        _set(row, status, mine[0] * 1e-3, sigma_ms * 1e-3, f"{status} by hand in the pick file")
        counts[status] += 1
    return [f"kept {n} pick(s) {what} by hand in {out_path}" for what, n in counts.items() if n]


def _key(fields, header, path, lineno):
    """(source_x, receiver_x) of a CSV row, rounded as written."""
    return tuple(round(parse_float(fields[header.index(name)], path, lineno, name), WRITTEN_DECIMALS)
                 for name in ("source_x", "receiver_x"))


def _same(a, b):
    tol = 1.5 * 10.0 ** -WRITTEN_DECIMALS
    return abs(a[0] - b[0]) <= tol and (not np.isfinite(a[1]) or abs(a[1] - b[1]) <= tol)


def _set(row, status, time_s, sigma_s, reason):
    row.status, row.time_s, row.sigma_s, row.reason = status, time_s, sigma_s, reason


def read_corrections(path):
    """Read a corrections file: {(source_x, receiver_x): (time_s or None for drop, sigma_s or NaN, line)}."""
    path = str(path)
    header, rows = read_csv_rows(path)
    for name in ("source_x", "receiver_x", "time_ms"):
        if name not in header:
            raise InputError(f"missing required column '{name}' (header has: {', '.join(header)})", path=path)
    out = {}
    for lineno, f in rows:
        if len(f) < len(header):
            raise InputError(f"expected {len(header)} fields, got {len(f)}", path=path, line=lineno)
        key = _key(f, header, path, lineno)
        text = f[header.index("time_ms")]
        time_s = None if text.lower() == "drop" else parse_float(text, path, lineno, "time_ms") * 1e-3
        if time_s is not None and time_s <= 0:
            raise InputError(f"time must be positive (or 'drop'), got {text}", path=path, line=lineno, field="time_ms")
        sigma_s = np.nan
        if "sigma_ms" in header and f[header.index("sigma_ms")]:
            sigma_s = parse_float(f[header.index("sigma_ms")], path, lineno, "sigma_ms") * 1e-3
            if sigma_s <= 0:
                raise InputError("sigma must be positive", path=path, line=lineno, field="sigma_ms")
        if key in out:
            raise InputError(f"shot {key[0]:g} m, geophone {key[1]:g} m corrected twice (also line {out[key][2]})",
                             path=path, line=lineno)
        out[key] = (time_s, sigma_s, lineno)
    return out


def apply_corrections(rows, corrections, path):
    """Apply a corrections file's entries; each must name a trace of the records."""
    by_key = {row.key: row for row in rows}
    for key, (time_s, sigma_s, lineno) in corrections.items():
        row = by_key.get(key)
        if row is None:
            raise InputError(f"no trace of the records has shot {key[0]:g} m and geophone {key[1]:g} m",
                             path=path, line=lineno)
        if time_s is None:
            _set(row, "dropped", np.nan, np.nan, f"dropped by {Path(path).name} line {lineno}")
            continue
        if not np.isfinite(sigma_s):
            sigma_s = row.sigma_s if np.isfinite(row.sigma_s) else HAND_SIGMA_MS * 1e-3
        _set(row, "corrected", time_s, sigma_s, f"corrected by {Path(path).name} line {lineno}")
    return [f"{len(corrections)} correction(s) applied from {path}"] if corrections else []


def write_pick_files(out_path, rows, header_lines):
    """Write the pick file and its trace table, both atomically.

    Elevations are written only when every station has one (otherwise the stations
    are put on the terrain by the commands that read the picks).
    """
    out_path = Path(out_path)
    picked = [r for r in rows if r.picked]
    if not picked:
        raise InputError("no trace could be picked; nothing to write (see the reasons above)", path=out_path)
    elevations = all(np.isfinite(r.source_z) and np.isfinite(r.receiver_z) for r in picked)
    table = trace_table_path(out_path)
    with atomic_path(table) as tmp_table, atomic_path(out_path) as tmp_out:
        with open(tmp_out, "w", encoding="utf-8", newline="") as out:
            for line in header_lines:
                out.write(f"# {line}\n")
            columns = ["source_x", "receiver_x"] + (["source_z", "receiver_z"] if elevations else [])
            out.write(",".join(columns + ["time_ms", "sigma_ms"]) + "\n")
            for r in picked:
                values = [r.source_x, r.receiver_x] + ([r.source_z, r.receiver_z] if elevations else [])
                out.write(",".join(f"{v:.4f}" for v in values) + f",{_ms(r.time_s):.4f},{_ms(r.sigma_s):.4f}\n")
            for r in rows:
                if not r.picked:
                    out.write(f"# no pick: {r.record} channel {r.channel} (source_x {r.source_x:g} m, "
                              f"receiver_x {r.receiver_x:g} m): {r.reason}\n")
        with open(tmp_table, "w", encoding="utf-8", newline="") as out:
            out.write("# every trace given to tomo pick; the pick file's rows as written (do not edit)\n")
            out.write("record,channel,source_x,receiver_x,status,time_ms,sigma_ms,snr,reason\n")
            for r in rows:
                time_ms = f"{_ms(r.time_s):.4f}" if r.picked else ""
                sigma_ms = f"{_ms(r.sigma_s):.4f}" if r.picked else ""
                snr = f"{r.snr:.2f}" if np.isfinite(r.snr) else ""
                reason = r.reason.replace('"', "'")
                out.write(f'"{r.record}",{r.channel},{r.source_x:.4f},{r.receiver_x:.4f},{r.status},'
                          f'{time_ms},{sigma_ms},{snr},"{reason}"\n')
    return out_path, table
