"""The run file's optional ``/resolution`` group: a resolution test of the run
(``tomo resolve``; :mod:`tomo.uncertainty.resolution`).

Layout (absent from run files without a test, which read as before; a new test
replaces the old one)::

    /resolution              attrs: kind ("checker" or "target"), size_m, amplitude_pct
                                    (NaN for a target), window_m, threshold, seed,
                                    chi2_start, chi2, iterations, converged,
                                    stop_reason, target_file ("" for none), notes (JSON)
    /resolution/true         (nz, nx)  true perturbation of ln(velocity), NaN in the air
    /resolution/recovered    (nz, nx)  recovered perturbation of ln(velocity)
    /resolution/semblance    (nz, nx)  per-cell semblance, NaN where not scored
    /resolution/correlation  (nz, nx)  per-cell correlation, NaN where not scored
"""

from __future__ import annotations

import json

import numpy as np

from ..uncertainty.resolution import ResolutionRecord

__all__ = ["write_resolution_group", "read_resolution_group"]

_GZIP = {"compression": "gzip", "compression_opts": 4}
_ARRAYS = ("true", "recovered", "semblance", "correlation")


def write_resolution_group(f, run):
    """Write ``run.resolution`` (when set) into the open h5py file ``f``."""
    record = getattr(run, "resolution", None)
    if record is None:
        return
    g = f.create_group("resolution")
    for name, value in record.attributes().items():
        if name == "notes":
            g.attrs[name] = json.dumps(list(value))
        elif name == "target_file":
            g.attrs[name] = "" if value is None else str(value)
        elif isinstance(value, str):
            g.attrs[name] = value
        else:
            g.attrs[name] = value.item() if isinstance(value, np.generic) else value
    for name in _ARRAYS:
        g.create_dataset(name, data=np.asarray(getattr(record, name), float), **_GZIP)


def read_resolution_group(f):
    """``{"resolution": ResolutionRecord or None}`` from an open run file."""
    if "resolution" not in f:
        return {"resolution": None}
    g = f["resolution"]
    a = g.attrs
    record = ResolutionRecord(
        kind=str(a["kind"]), size_m=float(a["size_m"]), amplitude_pct=float(a["amplitude_pct"]),
        window_m=float(a["window_m"]), threshold=float(a["threshold"]), seed=int(a["seed"]),
        **{name: np.asarray(g[name][()], float) for name in _ARRAYS},
        chi2_start=float(a["chi2_start"]), chi2=float(a["chi2"]), iterations=int(a["iterations"]),
        converged=bool(a["converged"]), stop_reason=str(a["stop_reason"]),
        target_file=str(a["target_file"]) or None, notes=json.loads(a.get("notes", "[]")))
    return {"resolution": record}
