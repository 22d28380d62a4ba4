"""The ``tomo pick`` job: records in, a pick file with per-pick sigmas out."""

from __future__ import annotations

from collections import Counter
from dataclasses import dataclass, field
from pathlib import Path

from ..core.errors import InputError
from ..core.fileio import check_output_path
from ..core.version import __version__
from .layout import read_layout
from .picker import PickSettings, pick_gather
from .pickfile import apply_corrections, keep_user_edits, read_corrections, rows_from_picks, write_pick_files
from .reading import read_records, stack_gathers

__all__ = ["PickRun", "pick_records"]


@dataclass
class PickRun:
    """What ``tomo pick`` did.

    Attributes
    ----------
    gathers : list of Gather
        The shot gathers picked (records of one shot stacked).
    picks : list of GatherPicks
        The automatic picks, one per gather.
    rows : list of TraceRow
        Every trace with its final status (hand edits and corrections applied).
    out_path, table_path : Path
    notes : list of str
    """

    gathers: list
    picks: list
    rows: list
    out_path: Path
    table_path: Path
    notes: list = field(default_factory=list)

    def counts(self):
        """Traces per final status."""
        return Counter(row.status for row in self.rows)


def pick_records(record_paths, out_path, layout_path=None, corrections_path=None, settings=None,
                 stack=True, progress=None):
    """Read the records, pick every gather, keep the user's edits, write the pick files.

    Parameters
    ----------
    record_paths : list of str or Path
        SEG-2 or SEG-Y files, one shot each.
    out_path : str or Path
        Pick file to write (its trace table goes beside it, see
        :mod:`tomo.records.pickfile`).
    layout_path, corrections_path : str or Path, optional
    settings : PickSettings, optional
    stack : bool
        Sum records of the same shot position and spread before picking.
    progress : callable, optional
        ``progress(done, total)`` after each gather.

    Returns
    -------
    PickRun
    """
    if not record_paths:
        raise InputError("no record files given")
    settings = (settings or PickSettings()).check()
    check_output_path(out_path)
    layouts = read_layout(layout_path) if layout_path else None
    corrections = read_corrections(corrections_path) if corrections_path else {}
    gathers = read_records(record_paths, layouts)
    if stack:
        gathers = stack_gathers(gathers)
    picks = []
    for k, gather in enumerate(gathers):
        picks.append(pick_gather(gather, settings))
        if progress:
            progress(k + 1, len(gathers))
    rows = rows_from_picks(picks)
    notes = [note for g in gathers for note in g.notes]
    notes += keep_user_edits(rows, out_path)
    notes += apply_corrections(rows, corrections, corrections_path) if corrections else []
    header = _header(record_paths, layout_path, corrections_path, settings, rows, gathers)
    out, table = write_pick_files(out_path, rows, header)
    return PickRun(gathers, picks, rows, Path(out), Path(table), notes)


def _header(record_paths, layout_path, corrections_path, settings, rows, gathers):
    counts = Counter(row.status for row in rows)
    names = [Path(p).name for p in record_paths]
    shown = ", ".join(names[:12]) + (f" and {len(names) - 12} more" if len(names) > 12 else "")
    highcut = "auto (4 x dominant frequency)" if settings.highcut_hz is None else f"{settings.highcut_hz:g} Hz"
    lines = [
        f"first breaks picked by tomo {__version__} (tomo pick): energy ratio, AIC onset, match with each "
        f"gather's first-break waveform, neighbour check; sigma_ms from each trace's signal-to-noise ratio",
        f"records ({len(names)} files, {len(gathers)} shots): {shown}",
        f"settings: high-cut {highcut}, minimum signal-to-noise {settings.min_snr:g}, "
        f"neighbour check {settings.consistency_sigmas:g} sigma",
        "traces: " + ", ".join(f"{n} {status}" for status, n in sorted(counts.items())),
    ]
    if layout_path:
        lines.append(f"layout: {layout_path}")
    if corrections_path:
        lines.append(f"corrections: {corrections_path}")
    lines.append("edit a time or sigma, or delete a row, and run tomo pick again: edited rows are kept")
    return lines
