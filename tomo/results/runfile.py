"""The run file: one HDF5 file holding an inversion's inputs, settings and results.

Layout (all lengths m, velocities m/s, times ms as named)::

    /                      attrs: format = "tomo-run", format_version, tomo_version,
                                  chi2, rms_ms, iterations, converged, stop_reason,
                                  created (ISO 8601 UTC), settings (JSON), mesh (JSON),
                                  layered (JSON, optional), notes (JSON list),
                                  picks_digest (SHA-256 of the picks; files
                                  before it lack it and still read),
                                  borehole_fit (JSON, optional: a run constrained by
                                  boreholes, tomo.analysis.borehole_fit)
    /model/x               (nx)      cell-centre distance
    /model/z               (nz)      cell-centre elevation
    /model/velocity        (nz, nx)  final model, NaN in the air
    /model/coverage        (nz, nx)  ray length per cell, 0 where no ray passes
    /model/start_velocity  (nz, nx)  starting model
    /terrain/x, /terrain/z           ground elevation points
    /picks/source_x, source_z, receiver_x, receiver_z, observed_ms, computed_ms, sigma_ms
    /history/chi2, rms_ms, lambda, step   (n_iter + 1) values, entry 0 = starting model
    /iterations/NNN/velocity  (nz, nx) each finished iteration's model (NNN from 001),
                              attrs chi2, rms_ms, lambda
    /stations, /boreholes     optional: the line on the map and its boreholes
                              (:mod:`tomo.results.runfile_map`)
    /ensemble                 optional: every member of an ensemble whose central run
                              this is (:mod:`tomo.results.runfile_ensemble`)
    /resolution               optional: a resolution test of the run
                              (:mod:`tomo.results.runfile_resolution`)

The file is always written whole to a temporary name and renamed, so an interrupted
run leaves the previous complete file (the last finished iteration), never a torn one.
"""

from __future__ import annotations

import datetime as _dt
import json
from pathlib import Path

import numpy as np

from ..analysis.borehole_fit import BoreholeFit
from ..analysis.digest import DIGEST_ATTR, picks_digest
from ..core.errors import InputError
from ..core.fileio import atomic_path
from ..core.version import __version__
from ..layered.result import json_safe
from ..tomography.run import RunData
from .runfile_ensemble import read_ensemble_group, write_ensemble_group
from .runfile_map import read_map_groups, write_map_groups
from .runfile_resolution import read_resolution_group, write_resolution_group

__all__ = ["write_run", "read_run", "RunWriter", "FORMAT", "FORMAT_VERSION"]

FORMAT = "tomo-run"
FORMAT_VERSION = 1

_PICK_FIELDS = ("source_x", "source_z", "receiver_x", "receiver_z", "observed_ms", "computed_ms", "sigma_ms")
_HISTORY_FIELDS = ("chi2", "rms_ms", "lambda", "step")
#: Model arrays are stored compressed (gzip level 4: most of the gain, little of the time).
_GZIP = {"compression": "gzip", "compression_opts": 4}


def write_run(path, run):
    """Write a RunData to ``path`` atomically (temporary name, then rename)."""
    import h5py

    created = run.created or _dt.datetime.now(_dt.UTC).replace(microsecond=0).isoformat()
    with atomic_path(path) as tmp:
        with h5py.File(tmp, "w") as f:
            f.attrs["format"] = FORMAT
            f.attrs["format_version"] = FORMAT_VERSION
            f.attrs["tomo_version"] = __version__
            f.attrs["created"] = created
            f.attrs["chi2"] = float(run.chi2)
            f.attrs["rms_ms"] = float(run.rms_ms)
            f.attrs["iterations"] = int(run.iterations)
            f.attrs["converged"] = bool(run.converged)
            f.attrs["stop_reason"] = str(run.stop_reason)
            f.attrs["settings"] = json.dumps(run.settings, default=_jsonable)
            f.attrs["mesh"] = json.dumps(run.mesh, default=_jsonable)
            f.attrs["notes"] = json.dumps(list(run.notes))
            f.attrs[DIGEST_ATTR] = picks_digest(run.picks)
            if run.layered is not None:
                f.attrs["layered"] = json.dumps(run.layered, default=_jsonable)
            if run.borehole_fit is not None:
                f.attrs["borehole_fit"] = json.dumps(json_safe(run.borehole_fit.to_dict()))
            g = f.create_group("model")
            g["x"] = np.asarray(run.x, float)
            g["z"] = np.asarray(run.z, float)
            for name in ("velocity", "coverage", "start_velocity"):
                g.create_dataset(name, data=np.asarray(getattr(run, name), float), **_GZIP)
            g = f.create_group("terrain")
            g["x"] = np.asarray(run.terrain_x, float)
            g["z"] = np.asarray(run.terrain_z, float)
            g = f.create_group("picks")
            for name in _PICK_FIELDS:
                g[name] = np.asarray(run.picks[name], float)
            g = f.create_group("history")
            for name in _HISTORY_FIELDS:
                g[name] = np.asarray(run.history.get(name, []), float)
            write_map_groups(f, run)
            write_ensemble_group(f, run)
            write_resolution_group(f, run)
            g = f.create_group("iterations")
            for k, model in enumerate(run.iteration_models, start=1):
                d = g.create_dataset(f"{k:03d}/velocity", data=np.asarray(model, float), **_GZIP)
                for name in ("chi2", "rms_ms", "lambda"):
                    values = run.history.get(name, [])
                    if len(values) > k:
                        d.parent.attrs[name] = float(values[k])


def _text(value):
    if value is None:
        return None
    return value.decode() if isinstance(value, bytes) else str(value)


def _jsonable(value):
    if isinstance(value, np.ndarray):
        return value.tolist()
    if isinstance(value, (np.floating, np.integer, np.bool_)):
        return value.item()
    if isinstance(value, Path):
        return str(value)
    raise TypeError(f"not JSON serialisable: {type(value).__name__}")


def read_run(path, cls=RunData):
    """Read a run file into a :class:`RunData` (or its subclass ``cls``, e.g.
    :class:`tomo.results.run.Run`).

    Raises
    ------
    InputError
        If the file does not exist, is not HDF5, is not a tomo run file, comes from a
        newer format version, or is truncated (a required dataset is missing).
    """
    import h5py

    path = Path(path)
    if not path.exists():
        raise InputError("file does not exist", path=path)
    try:
        f = h5py.File(path, "r")
    except OSError:
        raise InputError("not a readable HDF5 file (truncated or not a run file)", path=path) from None
    with f:
        if f.attrs.get("format") != FORMAT:
            raise InputError("not a tomo run file (no format = 'tomo-run' attribute)", path=path)
        version = int(f.attrs.get("format_version", 0))
        if version > FORMAT_VERSION:
            raise InputError(
                f"run file format version {version} is newer than this tomo reads "
                f"({FORMAT_VERSION}); it was written by tomo {f.attrs.get('tomo_version', '?')}",
                path=path,
            )
        try:
            def read(name):
                return np.asarray(f[name][()])
            picks = {name: read(f"picks/{name}") for name in _PICK_FIELDS}
            history = {name: read(f"history/{name}") for name in _HISTORY_FIELDS}
            models = []
            if "iterations" in f:
                for key in sorted(f["iterations"].keys()):
                    models.append(read(f"iterations/{key}/velocity"))
            layered = f.attrs.get("layered")
            fit = f.attrs.get("borehole_fit")
            run = cls(
                x=read("model/x"), z=read("model/z"), velocity=read("model/velocity"),
                coverage=read("model/coverage"), start_velocity=read("model/start_velocity"),
                terrain_x=read("terrain/x"), terrain_z=read("terrain/z"),
                picks=picks, history=history, iteration_models=models,
                chi2=float(f.attrs["chi2"]), rms_ms=float(f.attrs["rms_ms"]),
                iterations=int(f.attrs["iterations"]), converged=bool(f.attrs["converged"]),
                stop_reason=str(f.attrs["stop_reason"]),
                settings=json.loads(f.attrs["settings"]), mesh=json.loads(f.attrs["mesh"]),
                layered=json.loads(layered) if layered is not None else None,
                notes=json.loads(f.attrs.get("notes", "[]")),
                tomo_version=str(f.attrs["tomo_version"]), created=str(f.attrs["created"]),
                borehole_fit=None if fit is None else BoreholeFit.from_dict(json.loads(fit)),
                # "" marks a file written before the digest (None: a run made in memory)
                picks_digest=_text(f.attrs.get(DIGEST_ATTR)) or "",
                **read_map_groups(f), **read_ensemble_group(f), **read_resolution_group(f),
            )
        except (KeyError, OSError, ValueError, TypeError) as exc:
            raise InputError(f"run file is incomplete or damaged ({exc})", path=path) from None
    nz, nx = run.z.size, run.x.size
    if run.velocity.shape != (nz, nx) or run.coverage.shape != (nz, nx):
        raise InputError(f"run file model has shape {run.velocity.shape}, expected ({nz}, {nx})", path=path)
    return run


class RunWriter:
    """A checkpoint for :func:`tomo.tomography.inversion.invert`: writes each run it is
    given to ``path`` (atomically, so an interrupted run keeps the last whole file).
    ``fields`` are RunData fields set on every run before it is written (e.g. the
    ``stations`` of a line in map coordinates, which the inversion does not use)."""

    def __init__(self, path, **fields):
        self.path = Path(path)
        self.fields = fields

    def __call__(self, run):
        for name, value in self.fields.items():
            setattr(run, name, value)
        write_run(self.path, run)

    def __str__(self):
        return str(self.path)
