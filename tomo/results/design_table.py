"""The survey design's table: one row per candidate layout, as CSV and as text lines."""

from __future__ import annotations

import csv
import math

from ..core.fileio import atomic_open

__all__ = ["COLUMNS", "write_design_table", "design_table_lines"]

#: (key, heading on screen, format) of each column; the CSV uses the keys.
COLUMNS = (
    ("layout", "layout", "{}"),
    ("shots", "shots", "{:d}"),
    ("geophones", "geophones", "{:d}"),
    ("traces", "traces", "{:d}"),
    ("spacing_m", "spacing m", "{:.2f}"),
    ("spread_m", "spread m", "{:.1f}"),
    ("doi_depth_m", "DOI m", "{:.1f}"),
    ("target_depth_m", "target m", "{:.1f}"),
    ("error_max_m", "error max m", "{:.2f}"),
    ("error_rms_m", "error RMS m", "{:.2f}"),
    ("band_width_m", "band m", "{:.2f}"),
    ("resolved_pct", "resolved %", "{:.0f}"),
    ("resolves", "resolves", "{}"),
)


def _text(value, fmt):
    if isinstance(value, float) and not math.isfinite(value):
        return "-"
    return fmt.format(value)


def write_design_table(path, result):
    """Write every layout's row (and why a layout does not resolve the target) as CSV,
    atomically; lengths in m. Returns the path."""
    keys = [k for k, _, _ in COLUMNS] + ["chi2", "reason"]
    with atomic_open(path, "w", newline="", encoding="utf-8") as handle:
        handle.write(f"# {result.summary()[0]}\n")
        writer = csv.DictWriter(handle, fieldnames=keys, extrasaction="ignore")
        writer.writeheader()
        for layout in result.layouts:
            row = layout.row()
            writer.writerow({k: ("" if isinstance(row[k], float) and not math.isfinite(row[k]) else row[k])
                             for k in keys})
    return path


def design_table_lines(result):
    """The table as aligned text lines, then each failing layout's reason."""
    rows = [[_text(layout.row()[k], fmt) for k, _, fmt in COLUMNS] for layout in result.layouts]
    heads = [h for _, h, _ in COLUMNS]
    widths = [max(len(h), *(len(r[i]) for r in rows)) for i, h in enumerate(heads)]
    lines = ["  ".join(h.rjust(w) if i else h.ljust(w) for i, (h, w) in enumerate(zip(heads, widths)))]
    for r in rows:
        lines.append("  ".join(c.rjust(w) if i else c.ljust(w) for i, (c, w) in enumerate(zip(r, widths))))
    lines += [f"{layout.name}: {layout.reason}" for layout in result.layouts if layout.reason]
    return lines
