"""Ensembles of inversions: how far the picks leave the model open.

Members (``tomo.uncertainty.members``) run as Dask tasks: by default on a local cluster
of worker processes, one thread each (``distributed.LocalCluster``), or on an existing
Dask distributed cluster given by its scheduler's address, the same code either way
(Rocklin 2015, "Dask: parallel computation with blocked algorithms and task
scheduling", Proc. 14th Python in Science Conf.). With one worker and no scheduler the
members run in this process. Each member is a pure function of its task, so the same
seed gives the same ensemble on any number of workers.

Members whose misfit to their own picks stays above ``max_chi2`` (1.5 by default: the
target 1 with a margin; such a member stalled before fitting) are reported and kept out
of the statistics; a member that fails is reported and the rest kept. A member's misfit
to the picks as observed is recorded too: it is above 1 by about the share of the
picks' information the smooth model uses (a member fits its own redrawn picks, not
these; the parametric bootstrap's members scatter around the central model as that
scatters around the truth).
"""

from __future__ import annotations

import time as _time
import uuid
import warnings
from dataclasses import dataclass, field, replace

import numpy as np

from ..core.errors import InputError, SolverError, TomoError
from .members import MemberResult, MemberSpec, MemberTask, member_specs, run_member

__all__ = ["EnsembleSettings", "Ensemble", "run_ensemble", "run_tasks", "velocity_statistics", "dask_client",
           "DEFAULT_MEMBERS", "MAX_CHI2"]

DEFAULT_MEMBERS = 32
#: Members whose chi2 against the observed picks exceeds this are kept out.
MAX_CHI2 = 1.5
#: Seconds to wait for a Dask scheduler given by address.
CONNECT_TIMEOUT_S = 10


@dataclass(frozen=True)
class EnsembleSettings:
    """How an ensemble is drawn (recorded in the ensemble file).

    Attributes
    ----------
    members : int
        Members, the central one included (at least 2).
    seed : int
        Seed of every member's draws.
    max_chi2 : float
        Members fitting their own picks worse than this are kept out.
    layered_share : float
        Chance that a member starts from the layered model (when there is one).
    """

    members: int = DEFAULT_MEMBERS
    seed: int = 0
    max_chi2: float = MAX_CHI2
    layered_share: float = 0.5

    def check(self):
        if int(self.members) < 2:
            raise InputError(f"an ensemble needs at least 2 members, got {self.members}", field="--members")
        if not self.max_chi2 > 1:
            raise InputError(f"max_chi2 must be above 1, got {self.max_chi2}", field="max_chi2")
        if not 0 <= self.layered_share <= 1:
            raise InputError(f"layered_share must be in [0, 1], got {self.layered_share}", field="layered_share")
        return self


@dataclass
class Ensemble:
    """The members of an ensemble and what they say together.

    Attributes
    ----------
    central : RunData
        Member 0's whole run: the picks as observed, the default settings.
    members : list of MemberResult
        Every finished member, by index (models on the central member's cells).
    specs : list of MemberSpec
        What every member draws, finished or not.
    settings : EnsembleSettings
    failed : dict of int -> str
        Members that failed, with the reason.
    """

    central: object
    members: list
    specs: list
    settings: EnsembleSettings
    failed: dict = field(default_factory=dict)

    @property
    def kept(self):
        """The members that fit their picks (chi2 <= max_chi2), by index."""
        return [m for m in self.members if m.chi2_fitted <= self.settings.max_chi2]

    @property
    def rejected(self):
        return [m for m in self.members if m.chi2_fitted > self.settings.max_chi2]

    @property
    def missing(self):
        done = {m.index for m in self.members} | set(self.failed)
        return [s for s in self.specs if s.index not in done]

    def velocities(self):
        """The kept members' models stacked, (n_kept, nz, nx), m/s."""
        return np.stack([m.velocity for m in self.kept])

    def statistics(self):
        """Per-cell median, 5th and 95th percentiles and standard deviation, m/s."""
        return velocity_statistics(self.velocities())


def velocity_statistics(velocities):
    """Per-cell ``median``, ``p05``, ``p95`` and ``std`` (m/s) of stacked models
    (n, nz, nx); NaN in the air. Percentiles by linear interpolation between order
    statistics (numpy's default; Hyndman & Fan 1996, definition 7)."""
    v = np.asarray(velocities, float)
    with np.errstate(all="ignore"), warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)  # all-NaN air cells
        p05, median, p95 = np.nanpercentile(v, [5.0, 50.0, 95.0], axis=0)
        std = np.nanstd(v, axis=0, ddof=1) if v.shape[0] > 1 else np.zeros(v.shape[1:])
    return {"median": median, "p05": p05, "p95": p95, "std": std}


def dask_client(workers=None, scheduler=None):
    """A Dask distributed client: on ``scheduler`` (an address such as
    ``tcp://host:8786``) or on a new local cluster of ``workers`` processes.

    Returns ``(client, cluster)``; ``cluster`` is None for a given scheduler. Raises
    InputError when the scheduler cannot be reached within :data:`CONNECT_TIMEOUT_S`.
    """
    from distributed import Client, LocalCluster

    if scheduler:
        try:
            return Client(scheduler, timeout=f"{CONNECT_TIMEOUT_S}s"), None
        except (OSError, TimeoutError, ValueError) as exc:
            raise InputError(f"could not reach the Dask scheduler at {scheduler} within {CONNECT_TIMEOUT_S} s "
                             f"({type(exc).__name__})", field="--scheduler") from None
    # a free port for the scheduler's HTTP routes, so that clusters side by side do not clash
    cluster = LocalCluster(n_workers=int(workers), threads_per_worker=1, processes=True, dashboard_address=":0")
    return Client(cluster), cluster


def _tasks(specs, picks, mesh, settings, layered, gradient, smoothing, predicted_s=None, points=None):
    return [MemberTask(spec, picks, mesh, predicted_s, settings, layered if spec.start == "layered" else None,
                       gradient, smoothing, points=points) for spec in specs]


def run_tasks(func, tasks, keys, report, workers=1, scheduler=None, client=None):
    """``func(task)`` for every task, in this process (one worker, no scheduler) or as
    Dask tasks (on ``client`` when given, else on a client made for them);
    ``report(key, result, error)`` as each finishes (in any order). A TomoError raised
    by a task is reported by its message, any other by its type."""
    if client is None and workers <= 1 and not scheduler:
        for key, task in zip(keys, tasks):
            try:
                result = func(task)
            except TomoError as exc:
                report(key, None, str(exc))
                continue
            report(key, result, None)
        return
    from distributed import as_completed

    own = client is None
    client, cluster = dask_client(workers, scheduler) if own else (client, None)
    try:
        token = uuid.uuid4().hex[:12]  # keys unique on a shared cluster
        futures = client.map(func, tasks, pure=False, key=[f"tomo-{token}-{k}" for k in keys])
        index = {f.key: k for f, k in zip(futures, keys)}
        for future in as_completed(futures):
            if future.status == "error":
                exc = future.exception()
                report(index[future.key], None, str(exc) if isinstance(exc, TomoError) else
                       f"{type(exc).__name__}: {exc}")
            else:
                report(index[future.key], future.result(), None)
            future.release()
    finally:
        if own:
            client.close()
            if cluster is not None:
                cluster.close()


def run_ensemble(picks, mesh, settings, ensemble_settings, layered=None, gradient=None, smoothing_cells=2.0,
                 workers=1, scheduler=None, done=(), central=None, progress=None, on_member=None, points=None):
    """Run the members of an ensemble that are not ``done`` yet.

    Parameters
    ----------
    picks : Picks
        Observed times (s) and sigmas (s).
    mesh : Mesh
        The central member's grid.
    settings : InversionSettings
        The inversion's settings (every member runs them with its own smoothing ratio
        and target, on one worker; the central member, alone before the others, on all
        the local workers).
    ensemble_settings : EnsembleSettings
    layered : LayeredResult, optional
        The layered interpretation for the layered starts.
    gradient : (float, float)
        v0 (m/s) and k (1/s) of the gradient start.
    smoothing_cells : float
        Gaussian smoothing of the layered starts, model cells.
    workers : int
        Local worker processes (ignored with ``scheduler``).
    scheduler : str, optional
        Address of an existing Dask scheduler.
    done : sequence of MemberResult
        Members already finished (an interrupted ensemble being completed).
    central : RunData, optional
        The central member's run, when it is among ``done``.
    progress : callable, optional
        ``progress(done, total, elapsed_s, left_s)`` after every member.
    on_member : callable, optional
        Called with the :class:`Ensemble` so far after every member (e.g. to rewrite the
        ensemble file, so an interrupted run keeps what it finished).
    points : ContourPoints, optional
        Boreholes every member honours (rows beside the picks, as in
        :func:`tomo.tomography.inversion.invert`), so that the band is conditional on them.

    Returns
    -------
    Ensemble
    """
    ens = ensemble_settings.check()
    specs = member_specs(ens.members, ens.seed, len(picks), layered, ens.layered_share)
    members = {m.index: m for m in done}
    central = central if central is not None else next((m.run for m in done if m.index == 0), None)
    ensemble = Ensemble(central, [members[k] for k in sorted(members)], specs, ens)
    todo = sorted((s for s in specs if s.index not in members), key=lambda s: s.index)
    t0, total, count = _time.perf_counter(), len(specs), [len(members)]

    def report(index, result, error):
        if error is not None:
            ensemble.failed[index] = error
        else:
            members[index] = result
            if index == 0:
                ensemble.central = result.run
        ensemble.members = [members[k] for k in sorted(members)]
        count[0] += 1
        elapsed = _time.perf_counter() - t0
        ran = count[0] - len(done)
        left = elapsed / ran * (total - count[0]) if ran else None
        if on_member is not None and ensemble.central is not None:
            on_member(ensemble)
        if progress is not None:
            progress(count[0], total, elapsed, left)

    # reach the cluster before any work: a wrong address fails at once, with nothing written
    client, cluster = dask_client(workers, scheduler) if (scheduler or workers > 1) and len(todo) > 1 else (None, None)
    try:
        _run_members(todo, picks, mesh, settings, layered, gradient, smoothing_cells, ensemble, report, client,
                     1 if scheduler else max(int(workers), 1), points)
    finally:
        if client is not None:
            client.close()
        if cluster is not None:
            cluster.close()
    if ensemble.central is None:
        raise SolverError("the central member of the ensemble did not finish")
    return ensemble


def _run_members(todo, picks, mesh, settings, layered, gradient, smoothing_cells, ensemble, report, client,
                 shot_workers=1, points=None):
    if todo and todo[0].index == 0:
        # the central member first, here: its run is the file's, its computed times are
        # what the other members' picks are redrawn around, and a line the inversion
        # cannot handle fails once, with its own message, before any member is sent out.
        # Nothing else runs meanwhile, so its shots are solved on all the local cores
        # (the inversion's results do not depend on its worker count)
        first = _tasks(todo[:1], picks, mesh, settings, layered, gradient, smoothing_cells, points=points)[0]
        report(0, run_member(replace(first, shot_workers=shot_workers)), None)
        todo = todo[1:]
    predicted_s = np.asarray(ensemble.central.picks["computed_ms"], float) * 1e-3
    tasks = _tasks(todo, picks, mesh, settings, layered, gradient, smoothing_cells, predicted_s, points)
    run_tasks(run_member, tasks, [t.spec.index for t in tasks], report, client=client)


__all__ += ["MemberResult", "MemberSpec"]
