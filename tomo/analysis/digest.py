"""Whether two runs hold the same picks and geometry: a digest of the picks.

A comparison of two runs ("the same picks from another starting model") is only true
of two runs of the same picks. The run file stores a SHA-256 digest of its picks
(positions and elevations to 0.1 mm, times and sigmas to 0.1 microsecond, in a fixed
order), and every two-run feature checks it before comparing anything. An older run
file without the digest is compared by the picks it stores, with a notice.
"""

from __future__ import annotations

import hashlib

import numpy as np

from ..core.errors import InputError

__all__ = ["picks_digest", "check_same_picks", "DIGEST_ATTR"]

#: Run-file attribute holding the digest.
DIGEST_ATTR = "picks_digest"

_GEOMETRY = ("source_x", "source_z", "receiver_x", "receiver_z")
_VALUES = ("observed_ms", "sigma_ms")


def _table(picks):
    """The picks as integer rows (0.1 mm, 0.1 us), sorted, for hashing and comparing."""
    geometry = np.column_stack([np.round(np.asarray(picks[c], float) * 1e4) for c in _GEOMETRY])
    values = np.column_stack([np.round(np.nan_to_num(np.asarray(picks[c], float), nan=-1.0) * 1e4)
                              for c in _VALUES])
    rows = np.column_stack([geometry, values]).astype(np.int64)
    return rows[np.lexsort(rows.T[::-1])]


def picks_digest(picks):
    """SHA-256 (hex) of a run's picks (a dict of arrays as in :class:`RunData.picks`)."""
    return "sha256:" + hashlib.sha256(_table(picks).tobytes()).hexdigest()


def _difference(a, b):
    """What differs between two pick tables, in words."""
    ta, tb = _table(a), _table(b)
    def summary(p):
        shots = np.unique(np.round(np.asarray(p["source_x"], float), 3))
        geos = np.unique(np.round(np.asarray(p["receiver_x"], float), 3))
        return (f"{len(p['source_x'])} picks from {shots.size} shots, geophones at x = {geos.min():g} to "
                f"{geos.max():g} m")
    if ta.shape != tb.shape or not np.array_equal(ta[:, :4], tb[:, :4]):
        return f"different shots or geophones ({summary(a)} against {summary(b)})"
    dt = np.abs(ta[:, 4] - tb[:, 4]) * 1e-4
    if dt.max() > 0:
        k = int(np.argmax(dt))
        return (f"the same shots and geophones but different times at {int((dt > 0).sum())} picks (largest "
                f"{dt[k]:.3g} ms, shot x = {ta[k, 0] * 1e-4:g} m, geophone x = {ta[k, 2] * 1e-4:g} m)")
    return "the same times but different pick uncertainties"


def check_same_picks(run, other, labels=("this run", "the other run")):
    """Refuse two runs that do not hold the same picks and geometry; returns notices.

    Parameters
    ----------
    run, other : RunData
        Their ``picks`` (arrays) and ``picks_digest`` ("" for a run file written
        before the digest existed, None for a run made in memory).
    labels : (str, str)
        Names of the runs in messages.

    Returns
    -------
    list of str
        A notice for each run compared without a stored digest (an older run file).

    Raises
    ------
    InputError
        Naming the difference (shots and geophones, times, or uncertainties).
    """
    notes = []
    digests = []
    for r, label in zip((run, other), labels):
        stored = getattr(r, "picks_digest", None)
        if stored == "":
            notes.append(f"{label} is an older run file without a picks digest: compared by the picks it stores")
        digests.append(stored or picks_digest(r.picks))
    if digests[0] != digests[1]:
        why = _difference(run.picks, other.picks)
        raise InputError(f"{labels[0]} and {labels[1]} do not hold the same picks: {why}; a comparison of two "
                         "runs is only true of the same picks and geometry", field="--versus")
    return notes
