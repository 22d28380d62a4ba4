"""``EnsembleRecord``: what an ensemble file holds beside its central run.

Plain arrays and values, so that figures, reports and exports read an ensemble without
its workers: every finished member's model on the central member's cells and its fit,
what each member drew (:class:`~tomo.uncertainty.members.MemberSpec`), the failures,
the per-cell statistics of the kept members and any extremal bounds.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from .ensemble import EnsembleSettings, velocity_statistics
from .members import MemberSpec

__all__ = ["EnsembleRecord", "record_of"]


@dataclass
class EnsembleRecord:
    """The members of an ensemble, as stored in its file.

    Attributes
    ----------
    index : ndarray of int (n,)
        Member numbers (0 is the central member, the file's run).
    velocity : ndarray (n, nz, nx)
        Every finished member's model on the central member's cells, m/s (NaN in air).
    chi2, chi2_fitted : ndarray (n,)
        Misfit to the picks as observed, and to the member's own redrawn picks.
    iterations : ndarray of int (n,)
    converged : ndarray of bool (n,)
    stop_reason : list of str
    wall_s : ndarray (n,)
        Seconds each member took.
    specs : list of MemberSpec
        Every member's draws, finished or not.
    settings : EnsembleSettings
    failed : dict of int -> str
    bounds : list of dict
        Extremal bounds on the depth of a surface (``tomo.uncertainty.bounds``).
    """

    index: np.ndarray
    velocity: np.ndarray
    chi2: np.ndarray
    chi2_fitted: np.ndarray
    iterations: np.ndarray
    converged: np.ndarray
    stop_reason: list
    wall_s: np.ndarray
    specs: list
    settings: EnsembleSettings
    failed: dict = field(default_factory=dict)
    bounds: list = field(default_factory=list)

    @property
    def kept(self):
        """Boolean (n,): members that fit their own picks (chi2_fitted <= max_chi2)."""
        return np.asarray(self.chi2_fitted) <= self.settings.max_chi2

    @property
    def n_kept(self):
        return int(np.sum(self.kept))

    @property
    def missing(self):
        """Specs of the members neither finished nor failed (an interrupted ensemble)."""
        done = set(int(i) for i in self.index) | set(self.failed)
        return [s for s in self.specs if s.index not in done]

    def statistics(self):
        """Per-cell median, p05, p95 and std of the kept members' velocities, m/s."""
        return velocity_statistics(self.velocity[self.kept])

    def spec(self, index):
        return next(s for s in self.specs if s.index == index)


def record_of(ensemble):
    """The :class:`EnsembleRecord` of a finished (or interrupted) ensemble."""
    members = ensemble.members
    return EnsembleRecord(
        index=np.array([m.index for m in members], int),
        velocity=np.stack([m.velocity for m in members]).astype(float),
        chi2=np.array([m.chi2 for m in members], float),
        chi2_fitted=np.array([m.chi2_fitted for m in members], float),
        iterations=np.array([m.iterations for m in members], int),
        converged=np.array([m.converged for m in members], bool),
        stop_reason=[m.stop_reason for m in members],
        wall_s=np.array([m.wall_s for m in members], float),
        specs=list(ensemble.specs), settings=ensemble.settings, failed=dict(ensemble.failed))


def member_results(record):
    """The finished members of a record as ``MemberResult``s (to complete an ensemble)."""
    from .members import MemberResult

    return [MemberResult(int(i), v, np.zeros(0), float(c), float(cf), int(it), bool(ok), str(sr), float(w))
            for i, v, c, cf, it, ok, sr, w in zip(record.index, record.velocity, record.chi2, record.chi2_fitted,
                                                   record.iterations, record.converged, record.stop_reason,
                                                   record.wall_s)]


__all__ += ["member_results", "MemberSpec"]
