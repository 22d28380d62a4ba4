"""Progress within an iteration: field solves and ray traces done, for a progress bar.

An iteration times one trial model or more (a forward pass each, without rays) and
traces the rays of the one it keeps; the first pass of a run does both at once. The
:class:`Meter` counts their work in origins (one field solve, or the rays of one
origin's field) and reports a :class:`PassProgress` after each finished chunk, with
the work expected so far: one trial pass and one ray trace, more when the line search
tries another step. The library only reports; drawing is the caller's (the CLI).
"""

from __future__ import annotations

import time as _time
from dataclasses import dataclass

__all__ = ["PassProgress", "Meter"]


@dataclass(frozen=True)
class PassProgress:
    """How far an iteration's passes are (the ``pass_progress`` callback of an inversion).

    Attributes
    ----------
    iteration : int
        0 for the starting model, then 1, 2, ...
    stage : str
        "fields" (travel-time fields solved) or "rays" (rays traced).
    done, total : int
        Work done and expected so far in this iteration, in origins (a field solve or
        the rays of one field each); ``total`` grows when the line search needs
        another trial.
    elapsed_s : float
        Seconds since the iteration began.
    unit : str
        What an origin is: "shot", or "geophone" when fields are solved from the
        geophones (reciprocity, fewer geophones than shots).
    """

    iteration: int
    stage: str
    done: int
    total: int
    elapsed_s: float
    unit: str = "shot"


class Meter:
    """Counts an iteration's work for a ``callback(PassProgress)`` (None: counts nothing)."""

    def __init__(self, callback=None, unit="shot"):
        self.report, self.unit = callback, unit
        self.iteration, self.base, self.total, self.t0 = 0, 0, 0, _time.perf_counter()

    def begin(self, iteration):
        """A new iteration (0: the starting model's pass, rays included)."""
        self.iteration, self.base, self.total, self.t0 = iteration, 0, 0, _time.perf_counter()

    def callback(self, stage):
        """The ``progress(done, total)`` of one pass of ``stage`` ("fields" or "rays")."""
        if self.report is None:
            return None
        # after a trial's fields, the kept model's rays are still to come
        follow = stage == "fields" and self.iteration > 0

        def progress(done, total):
            self.total = max(self.total, self.base + total * (2 if follow else 1))
            self.report(PassProgress(self.iteration, stage, self.base + done, self.total,
                                     _time.perf_counter() - self.t0, self.unit))
            if done >= total:
                self.base += total

        return progress
