"""Progress of ``tomo invert`` on the screen: a bar per iteration on a terminal, lines.

The library reports (a :class:`tomo.api.PassProgress` as fields and rays get done, an
:class:`tomo.api.IterationInfo` after each iteration); the command draws. On a terminal
each iteration gets a bar (tqdm: shots done, rate, time left) that gives way to the
iteration's one-line summary; elsewhere (a log file, a pipe) there is no bar, only the
summaries, one line per iteration.
"""

from __future__ import annotations

import sys


class IterationBars:
    """The ``pass_progress`` callback of :func:`tomo.api.invert` (:meth:`passes`); close
    the bar before printing an iteration's line."""

    def __init__(self, stream=None, enabled=None):
        self.stream = stream or sys.stderr
        self.enabled = self.stream.isatty() if enabled is None else bool(enabled)
        self.bar = None
        self.iteration = None

    def passes(self, progress):
        """Move the bar of ``progress.iteration`` (a new bar for a new iteration)."""
        if not self.enabled:
            return
        if progress.iteration != self.iteration:
            self.close()
            from tqdm import tqdm

            label = "start" if progress.iteration == 0 else f"iteration {progress.iteration}"
            self.bar = tqdm(total=progress.total, desc=label, unit=progress.unit, file=self.stream, leave=False,
                            dynamic_ncols=True, mininterval=0.5)
            self.iteration = progress.iteration
        self.bar.total = progress.total
        self.bar.set_postfix_str(progress.stage, refresh=False)
        self.bar.update(progress.done - self.bar.n)

    def close(self):
        if self.bar is not None:
            self.bar.close()
            self.bar = None
            self.iteration = None
