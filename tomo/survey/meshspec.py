"""Mesh spec files: how fine and how deep a model grid should be.

Mesh spec (TOML), every key optional; unset keys are chosen from the survey
(:func:`auto_mesh_spec`)::

    cell_m = 0.5       # model cell size, m
    depth_m = 30.0     # depth of the grid below the lowest ground, m
    padding_m = 5.0    # grid extension beyond the outermost stations, m
    refine = 2         # forward node intervals per model cell (integer >= 1)
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

from ..core.errors import InputError
from ..core.fileio import read_toml

__all__ = ["MeshSpec", "read_mesh_spec", "auto_mesh_spec", "inversion_mesh_spec", "nice_step"]


@dataclass(frozen=True)
class MeshSpec:
    """How to build a mesh; ``None`` fields are chosen from the survey."""

    cell_m: float | None = None
    depth_m: float | None = None
    padding_m: float | None = None
    refine: int | None = None

    def as_dict(self):
        return {"cell_m": self.cell_m, "depth_m": self.depth_m, "padding_m": self.padding_m, "refine": self.refine}


_SPEC_KEYS = {"cell_m": float, "depth_m": float, "padding_m": float, "refine": int}


def read_mesh_spec(path):
    """Read a mesh spec TOML file; unknown keys and bad values are an InputError."""
    data = read_toml(path)
    values = {}
    for key, value in data.items():
        if key not in _SPEC_KEYS:
            raise InputError(f"unknown key (expected one of {', '.join(_SPEC_KEYS)})", path=path, field=key)
        kind = _SPEC_KEYS[key]
        wrong_kind = kind is int and not isinstance(value, int)
        if isinstance(value, bool) or not isinstance(value, (int, float)) or wrong_kind:
            expected = "an integer" if kind is int else "a number"
            raise InputError(f"expected {expected}, got {value!r}", path=path, field=key)
        if not math.isfinite(value) or value <= 0:
            raise InputError(f"must be positive, got {value!r}", path=path, field=key)
        values[key] = kind(value)
    if values.get("refine", 1) > 16:
        raise InputError(f"refine {values['refine']} is excessive (at most 16)", path=path, field="refine")
    return MeshSpec(**values)


def nice_step(value):
    """Round down to 1, 2 or 5 times a power of ten (for cell sizes people can read)."""
    exponent = math.floor(math.log10(value))
    for mantissa in (5, 2, 1):
        candidate = mantissa * 10.0**exponent
        if candidate <= value * (1 + 1e-9):
            return candidate
    return 10.0**exponent


def auto_mesh_spec(spacing, max_offset, spec=None):
    """Fill the unset fields of ``spec`` from the survey's station ``spacing`` (m; see
    :func:`station_spacing`) and longest offset (m).

    Defaults (common practice, rules of thumb):

    - cell = a quarter of the station spacing, rounded down to 1-2-5;
    - depth = a third of the longest offset below the lowest ground (a refraction
      survey rarely sees deeper than a quarter to a third of its longest offset);
    - padding = two station spacings beyond the outermost stations;
    - refine = 3 forward node intervals per model cell (measured: at a quarter of
      the spacing per cell, refine 2 misses the 1 % target for head waves, 3 meets it;
      see tests/test_forward.py and benchmarks/forward.py).
    """
    spec = spec or MeshSpec()
    if not spacing > 0:
        spacing = 1.0
    cell = spec.cell_m or nice_step(spacing / 4.0)
    depth = spec.depth_m or max(max_offset / 3.0, 10 * cell)
    padding = spec.padding_m if spec.padding_m is not None else 2.0 * spacing
    refine = spec.refine or 3
    return MeshSpec(cell_m=cell, depth_m=depth, padding_m=padding, refine=refine)


def inversion_mesh_spec(spacing, spec=None):
    """Mesh spec for an inversion: model cells of half the station ``spacing`` (m; rounded down
    to 1-2-5) unless ``spec`` sets ``cell_m``; the rest is left to
    ``tomo.mesh.auto_mesh_spec``.

    A tomogram cannot resolve much below the station spacing (common practice), so
    cells of half of it keep the unknowns few while the forward grid (``refine`` node
    intervals per cell) keeps the travel times accurate.
    """
    spec = spec or MeshSpec()
    if spec.cell_m is None:
        spec = replace(spec, cell_m=nice_step(max(spacing, 1e-3) / 2.0))
    return spec
