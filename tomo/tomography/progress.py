"""What an inversion tells its caller while it runs: one :class:`IterationInfo` per
iteration (``str()`` is the progress line), and :class:`InversionInterrupted` when it is
stopped by Ctrl-C.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

__all__ = ["IterationInfo", "InversionInterrupted", "solver_summary", "interrupted"]


@dataclass
class IterationInfo:
    """Progress of one iteration (entry 0 is the starting model); ``str()`` is the line."""

    iteration: int
    max_iterations: int
    chi2: float
    rms_ms: float
    lam: float
    step: float
    elapsed_s: float
    left_s: float | None
    timing: dict = field(default_factory=dict)
    solves: list = field(default_factory=list)
    stage: str = ""  # which of several runs this is, e.g. "without boreholes"

    def __str__(self):
        lam = "-" if not math.isfinite(self.lam) else f"{self.lam:.3g}"
        left = "" if self.left_s is None else f", about {_duration(self.left_s)} left at most"
        head = "start" if self.iteration == 0 else f"iteration {self.iteration}/{self.max_iterations}"
        head = f"{self.stage}, {head}" if self.stage else head
        return (f"{head}: chi2 {self.chi2:.3f}, RMS {self.rms_ms:.3f} ms, lambda {lam}, "
                f"step {self.step:.2f}{solver_summary(self.solves)}, {_duration(self.elapsed_s)} elapsed{left}")


def solver_summary(solves):
    """``, LSMR 4 solves of 80-140 iterations`` and a warning for any stopped at its limit."""
    if not solves:
        return ""
    its = [s.iterations for s in solves]
    span = f"{min(its)}" if min(its) == max(its) else f"{min(its)}-{max(its)}"
    text = f", {len(solves)} solve{'s' if len(solves) > 1 else ''} of {span} solver iterations"
    limited = sum(s.at_limit for s in solves)
    if limited:
        text += f" ({limited} stopped at the iteration limit)"
    return text


def _duration(seconds):
    seconds = max(float(seconds), 0.0)
    return f"{seconds:.0f} s" if seconds < 90 else f"{seconds / 60:.1f} min"


class InversionInterrupted(KeyboardInterrupt):
    """Raised when an inversion is interrupted (Ctrl-C); ``run`` is the last finished
    iteration (also given to the checkpoint when there is one), ``message`` says so."""

    def __init__(self, message, run=None, checkpoint=None):
        super().__init__(message)
        self.message = message
        self.run = run
        self.checkpoint = checkpoint


def interrupted(last, checkpoint, settings):
    """The :class:`InversionInterrupted` of a run stopped by Ctrl-C, its last finished
    iteration (``last``, a RunData or None) given once more to ``checkpoint``."""
    n_done = 0 if last is None else last.iterations
    if last is not None:
        last.stop_reason = "interrupted"
        if checkpoint is not None:
            try:
                checkpoint(last)  # a run file is written atomically: a second Ctrl-C keeps the previous one
            except KeyboardInterrupt:
                pass
    if checkpoint is not None and last is not None:
        message = (f"interrupted; {checkpoint} holds the last finished iteration "
                   f"({n_done} of {settings.max_iterations})")
    else:
        message = f"interrupted after {n_done} finished iteration(s); nothing was written"
    return InversionInterrupted(message, last, checkpoint)
