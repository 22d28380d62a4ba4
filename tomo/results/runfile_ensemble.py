"""The run file's optional ``/ensemble`` group: an ensemble file is the run file of its
central member plus every member (``tomo ensemble``).

Layout (velocities m/s; absent from plain run files, which read as before)::

    /ensemble              attrs: settings (JSON), specs (JSON list, one per member
                                  drawn), failed (JSON {member: reason}), bounds (JSON
                                  list of extremal bounds), n_members, n_kept
    /ensemble/index        (n)          finished members (0: the central one)
    /ensemble/velocity     (n, nz, nx)  their models on the central member's cells
    /ensemble/chi2, chi2_fitted, wall_s   (n)
    /ensemble/iterations   (n)  int
    /ensemble/converged    (n)  bool
    /ensemble/stop_reason  (n)  UTF-8 strings
    /ensemble/median, p05, p95, std   (nz, nx)  per-cell statistics of the kept members
"""

from __future__ import annotations

import json

import numpy as np

from ..uncertainty.ensemble import EnsembleSettings
from ..uncertainty.members import MemberSpec
from ..uncertainty.record import EnsembleRecord

__all__ = ["write_ensemble_group", "read_ensemble_group"]

_GZIP = {"compression": "gzip", "compression_opts": 4}


def write_ensemble_group(f, run):
    """Write ``run.ensemble`` (when set) into the open h5py file ``f``."""
    import h5py

    record = run.ensemble
    if record is None:
        return
    g = f.create_group("ensemble")
    g.attrs["settings"] = json.dumps(vars(record.settings))
    g.attrs["specs"] = json.dumps([s.to_dict() for s in record.specs])
    g.attrs["failed"] = json.dumps({str(k): v for k, v in record.failed.items()})
    g.attrs["bounds"] = json.dumps(record.bounds)
    g.attrs["n_members"] = int(len(record.index))
    g.attrs["n_kept"] = record.n_kept
    g["index"] = np.asarray(record.index, int)
    g.create_dataset("velocity", data=np.asarray(record.velocity, float), **_GZIP)
    for name in ("chi2", "chi2_fitted", "wall_s"):
        g[name] = np.asarray(getattr(record, name), float)
    g["iterations"] = np.asarray(record.iterations, int)
    g["converged"] = np.asarray(record.converged, bool)
    g.create_dataset("stop_reason", data=list(record.stop_reason), dtype=h5py.string_dtype("utf-8"))
    if record.n_kept:
        for name, values in record.statistics().items():
            g.create_dataset(name, data=values, **_GZIP)


def read_ensemble_group(f):
    """``{"ensemble": EnsembleRecord or None}`` from an open run file."""
    if "ensemble" not in f:
        return {"ensemble": None}
    g = f["ensemble"]
    record = EnsembleRecord(
        index=np.asarray(g["index"][()], int), velocity=np.asarray(g["velocity"][()], float),
        chi2=np.asarray(g["chi2"][()], float), chi2_fitted=np.asarray(g["chi2_fitted"][()], float),
        iterations=np.asarray(g["iterations"][()], int), converged=np.asarray(g["converged"][()], bool),
        stop_reason=[s.decode() if isinstance(s, bytes) else str(s) for s in g["stop_reason"][()]],
        wall_s=np.asarray(g["wall_s"][()], float),
        specs=[MemberSpec.from_dict(d) for d in json.loads(g.attrs["specs"])],
        settings=EnsembleSettings(**json.loads(g.attrs["settings"])),
        failed={int(k): v for k, v in json.loads(g.attrs.get("failed", "{}")).items()},
        bounds=json.loads(g.attrs.get("bounds", "[]")))
    return {"ensemble": record}
