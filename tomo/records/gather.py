"""The ``Gather`` type: the traces of one shot, their geometry and timing, SI inside."""

from __future__ import annotations

from dataclasses import dataclass, field, replace

import numpy as np

__all__ = ["Gather"]


@dataclass
class Gather:
    """One shot record: a trace per channel, with the positions and timing of each.

    Attributes
    ----------
    data : ndarray, shape (n_traces, n_samples)
        Samples, float64, in the record's units (amplitudes are only ever compared within
        a trace, so the units do not matter).
    dt_s : float
        Sample interval, s.
    delay_s : float
        Time of the first sample relative to the shot, s (negative: the record starts
        before the shot). The time of sample k is ``delay_s + k * dt_s``.
    source_x, source_z : float
        Shot position along the line and elevation, m (``source_z`` NaN: on the ground).
    receiver_x, receiver_z : ndarray, shape (n_traces,)
        Geophone positions and elevations, m (NaN elevations: on the ground).
    channel : ndarray of int, shape (n_traces,)
        Channel numbers as the recorder counted them (1-based).
    dead : ndarray of bool, shape (n_traces,)
        Channels the header or the layout marks as dead.
    polarity : ndarray, shape (n_traces,)
        +1, or -1 for a channel the layout says is wired reversed (drawn flipped; the
        picker does not depend on polarity).
    stack : int
        Number of shots summed into the record (headers, plus records stacked here).
    path : str
        The record file (for several stacked files, the first).
    paths : list of str
        Every file that went into the gather.
    notes : list of str
        What the reader did that the user should know.
    """

    data: np.ndarray
    dt_s: float
    delay_s: float
    source_x: float
    source_z: float
    receiver_x: np.ndarray
    receiver_z: np.ndarray
    channel: np.ndarray
    dead: np.ndarray
    polarity: np.ndarray
    stack: int = 1
    path: str = ""
    paths: list = field(default_factory=list)
    notes: list = field(default_factory=list)

    @property
    def n_traces(self):
        return int(self.data.shape[0])

    @property
    def n_samples(self):
        return int(self.data.shape[1])

    @property
    def time_s(self):
        """Time of every sample relative to the shot, s."""
        return self.delay_s + np.arange(self.n_samples) * self.dt_s

    @property
    def offset(self):
        """Signed offset receiver_x - source_x of every trace, m."""
        return self.receiver_x - self.source_x

    def with_data(self, data):
        """A copy holding other samples (same geometry)."""
        return replace(self, data=np.asarray(data, dtype=float), notes=list(self.notes), paths=list(self.paths))
