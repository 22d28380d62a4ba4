"""The run file: one HDF5 file holding an inversion's inputs, settings and results.

Layout (all lengths m, velocities m/s, times ms as named)::

    /                      attrs: format = "tomo-run", format_version, tomo_version,
                                  chi2, rms_ms, iterations, converged, stop_reason,
                                  created (ISO 8601 UTC), settings (JSON), mesh (JSON),
                                  layered (JSON, optional), notes (JSON list)
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

The file is always written whole to a temporary name and renamed, so an interrupted
run leaves the previous complete file (the last finished iteration), never a torn one.
"""

from __future__ import annotations

import datetime as _dt
import json
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from . import __version__
from .errors import InputError
from .fileio import atomic_path

__all__ = ["RunData", "write_run", "read_run", "FORMAT", "FORMAT_VERSION"]

FORMAT = "tomo-run"
FORMAT_VERSION = 1

_PICK_FIELDS = ("source_x", "source_z", "receiver_x", "receiver_z", "observed_ms", "computed_ms", "sigma_ms")
_HISTORY_FIELDS = ("chi2", "rms_ms", "lambda", "step")


@dataclass
class RunData:
    """Everything in a run file, as numpy arrays and plain Python values.

    Attributes
    ----------
    x, z : ndarray
        Cell-centre distance (nx) and elevation (nz), m.
    velocity, coverage, start_velocity : ndarray (nz, nx)
        Final model (m/s, NaN in air), ray length per cell (m), starting model (m/s).
    terrain_x, terrain_z : ndarray
        Ground elevation points, m.
    picks : dict of str -> ndarray
        ``source_x, source_z, receiver_x, receiver_z`` (m) and ``observed_ms,
        computed_ms, sigma_ms`` (ms), one value per pick.
    history : dict of str -> ndarray
        ``chi2, rms_ms, lambda, step`` per iteration, entry 0 for the starting model.
    iteration_models : list of ndarray (nz, nx)
        Model after each finished iteration, m/s.
    chi2, rms_ms : float
        Final weighted misfit (mean of (residual / sigma)^2) and RMS residual, ms.
    iterations : int
    converged : bool
    stop_reason : str
    settings, mesh : dict
        Every setting of the run and the mesh definition, so it can be repeated.
    layered : dict or None
        The layered interpretation used or made alongside (layers.json content).
    notes : list of str
    tomo_version, created : str
    """

    x: np.ndarray
    z: np.ndarray
    velocity: np.ndarray
    coverage: np.ndarray
    start_velocity: np.ndarray
    terrain_x: np.ndarray
    terrain_z: np.ndarray
    picks: dict
    history: dict
    iteration_models: list = field(default_factory=list)
    chi2: float = float("nan")
    rms_ms: float = float("nan")
    iterations: int = 0
    converged: bool = False
    stop_reason: str = ""
    settings: dict = field(default_factory=dict)
    mesh: dict = field(default_factory=dict)
    layered: dict | None = None
    notes: list = field(default_factory=list)
    tomo_version: str = __version__
    created: str = ""

    @property
    def residual_ms(self):
        """Observed minus computed time per pick, ms."""
        return self.picks["observed_ms"] - self.picks["computed_ms"]


def write_run(path, run):
    """Write a RunData to ``path`` atomically (temporary name, then rename)."""
    import h5py

    created = run.created or _dt.datetime.now(_dt.timezone.utc).replace(microsecond=0).isoformat()
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
            if run.layered is not None:
                f.attrs["layered"] = json.dumps(run.layered, default=_jsonable)
            g = f.create_group("model")
            g["x"] = np.asarray(run.x, float)
            g["z"] = np.asarray(run.z, float)
            for name in ("velocity", "coverage", "start_velocity"):
                g.create_dataset(name, data=np.asarray(getattr(run, name), float), compression="gzip", compression_opts=4)
            g = f.create_group("terrain")
            g["x"] = np.asarray(run.terrain_x, float)
            g["z"] = np.asarray(run.terrain_z, float)
            g = f.create_group("picks")
            for name in _PICK_FIELDS:
                g[name] = np.asarray(run.picks[name], float)
            g = f.create_group("history")
            for name in _HISTORY_FIELDS:
                g[name] = np.asarray(run.history.get(name, []), float)
            g = f.create_group("iterations")
            for k, model in enumerate(run.iteration_models, start=1):
                d = g.create_dataset(f"{k:03d}/velocity", data=np.asarray(model, float), compression="gzip", compression_opts=4)
                for name in ("chi2", "rms_ms", "lambda"):
                    values = run.history.get(name, [])
                    if len(values) > k:
                        d.parent.attrs[name] = float(values[k])


def _jsonable(value):
    if isinstance(value, np.ndarray):
        return value.tolist()
    if isinstance(value, (np.floating, np.integer, np.bool_)):
        return value.item()
    if isinstance(value, Path):
        return str(value)
    raise TypeError(f"not JSON serialisable: {type(value).__name__}")


def read_run(path):
    """Read a run file into a :class:`RunData`.

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
            run = RunData(
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
            )
        except (KeyError, OSError, ValueError) as exc:
            raise InputError(f"run file is incomplete or damaged ({exc})", path=path) from None
    nz, nx = run.z.size, run.x.size
    if run.velocity.shape != (nz, nx) or run.coverage.shape != (nz, nx):
        raise InputError(f"run file model has shape {run.velocity.shape}, expected ({nz}, {nx})", path=path)
    return run
