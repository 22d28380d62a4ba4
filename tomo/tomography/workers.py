"""Worker processes for the forward solves and ray tracing, portable to every platform.

Processes are started with the ``spawn`` method, the only one available everywhere
(Windows and macOS default to it; ``fork`` is unsafe with threads). Spawned workers
share nothing with the parent: every task carries its own inputs (grids are small to
pickle: a mesh pickles as its few defining numbers), and nothing is kept in module-level
state, so two inversions can run at once in one Python process, each with its own pool.
A pool is started once per inversion and reused by all its passes, since starting a
spawned worker costs the import of numpy, scipy and scikit-fmm (about a second). As for
any spawned process, a script that uses more than one worker must start its work
under ``if __name__ == "__main__":`` (workers re-import the script's module).
"""

from __future__ import annotations

import multiprocessing as mp
import os
from concurrent.futures import ProcessPoolExecutor
from concurrent.futures.process import BrokenProcessPool

from ..core.errors import InputError, SolverError

__all__ = ["Workers", "usable_workers", "check_workers"]


def usable_workers(requested, n_tasks=None):
    """Processes worth starting: at most the cores and the tasks, at least 1."""
    n = max(1, min(int(requested or 1), os.cpu_count() or 1))
    return n if n_tasks is None else max(1, min(n, int(n_tasks)))


class Workers:
    """A pool of ``n`` spawned processes, or this process alone when ``n`` is 1.

    Use as a context manager (the pool is shut down on exit); :meth:`map` returns the
    results in task order, so results do not depend on the number of workers.
    """

    def __init__(self, n=1):
        self.n = usable_workers(n)
        self._pool = None

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.close()

    def _executor(self):
        if self._pool is None:
            self._pool = ProcessPoolExecutor(max_workers=self.n, mp_context=mp.get_context("spawn"))
        return self._pool

    def map(self, func, tasks):
        """``[func(t) for t in tasks]``, spread over the pool when it has more than one process."""
        tasks = list(tasks)
        if self.n <= 1 or len(tasks) <= 1:
            return [func(t) for t in tasks]
        return list(self.imap(func, tasks))

    def imap(self, func, tasks):
        """Like :meth:`map`, but yields each result as soon as it and those before it are done."""
        tasks = list(tasks)
        if self.n <= 1 or len(tasks) <= 1:
            for t in tasks:
                yield func(t)
            return
        try:
            yield from self._executor().map(func, tasks)
        except BrokenProcessPool:
            raise SolverError(
                "a worker process stopped before finishing its task; in a script, call tomo "
                "under `if __name__ == \"__main__\":` when using more than one worker (Python "
                "starts workers by re-importing the script), or use workers=1") from None

    def close(self):
        if self._pool is not None:
            self._pool.shutdown(wait=True, cancel_futures=True)
            self._pool = None


def check_workers(n, field="workers"):
    """Refuse a worker count below 1 or above this machine's cores (InputError naming
    ``field``); returns it as an int."""
    cores = os.cpu_count() or 1
    try:
        value = int(n)
    except (TypeError, ValueError):
        raise InputError(f"{field} must be a whole number of processes, got {n!r}", field=field) from None
    if isinstance(n, bool) or value != n:
        raise InputError(f"{field} must be a whole number of processes, got {n!r}", field=field)
    if value < 1:
        raise InputError(f"{field} = {n!r}: at least 1 worker process is needed", field=field)
    if value > cores:
        raise InputError(f"{field} = {value}: this machine has {cores} core(s); use 1 to {cores} "
                         "(more processes than cores only compete for them)", field=field)
    return value
