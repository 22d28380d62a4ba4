"""The layers file: a layered interpretation (``LayeredResult``) as JSON.

``tomo layers --out layers.json`` writes it; ``tomo invert --layers layers.json``
starts the tomography from it instead of interpreting the picks again. The content is
:meth:`LayeredResult.to_dict` (velocities m/s, depths and thicknesses m, times ms, NaN
written as null). A layers file belongs to one pick file: every shot side it holds
names its picks by their index in that file, and :func:`check_layers_match` refuses a
file whose shots and offsets are not those of the picks at hand.
"""

from __future__ import annotations

import json
import os
from pathlib import Path

import numpy as np

from ..core.errors import InputError
from ..core.fileio import atomic_open
from ..layered.result import LayeredResult
from ..survey.picks import Picks

__all__ = ["write_layers", "read_layers", "check_layers_match"]

#: Positions in the layers file and the pick file agree to this (m): far below any
#: station spacing, far above the rounding of a float written as JSON text.
POSITION_TOL_M = 1e-6


def write_layers(path: str | os.PathLike, result: LayeredResult) -> Path:
    """Write ``result`` as JSON atomically (no half-written file on failure)."""
    with atomic_open(path, "w", encoding="utf-8") as out:
        json.dump(result.to_dict(), out, indent=1, allow_nan=False)
        out.write("\n")
    return Path(path)


def read_layers(path: str | os.PathLike) -> LayeredResult:
    """Read a layers file written by :func:`write_layers` (``tomo layers --out``).

    Raises
    ------
    InputError
        If the file does not exist, is not JSON (naming the line), has no layer table,
        or is damaged.
    """
    path = Path(path)
    if not path.is_file():
        raise InputError("file does not exist", path=path)
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
    except UnicodeDecodeError:
        raise InputError("not a layers file (not UTF-8 text)", path=path) from None
    except json.JSONDecodeError as exc:
        raise InputError(f"not a layers file (bad JSON: {exc.msg})", path=path, line=exc.lineno) from None
    if not isinstance(data, dict) or not isinstance(data.get("layers"), list) or not data["layers"]:
        raise InputError("not a layers file (no layer table; write one with 'tomo layers --out')", path=path,
                         field="layers")
    for k, layer in enumerate(data["layers"], start=1):
        v = layer.get("velocity_m_s") if isinstance(layer, dict) else None
        if isinstance(v, bool) or not isinstance(v, (int, float)) or not (np.isfinite(v) and v > 0):
            raise InputError(f"layer {k} has no positive velocity (got {v!r})", path=path, field="velocity_m_s")
    try:
        return LayeredResult.from_dict(data)
    except (KeyError, TypeError, ValueError, AttributeError) as exc:
        raise InputError(f"layers file is incomplete or damaged ({type(exc).__name__}: {exc})", path=path) from None


def check_layers_match(result: LayeredResult, picks: Picks, path: str | os.PathLike | None = None) -> None:
    """Raise InputError unless every shot side of ``result`` refers to ``picks``: its pick
    indices exist, their shot is at the side's shot x and their offsets are the side's."""
    n = len(picks)
    for fit in result.sides:
        index = np.asarray(fit.pick_index, int)
        if index.size == 0:
            continue
        where = f"shot at x = {fit.shot_x:g} m"
        if index.min() < 0 or index.max() >= n:
            raise InputError(f"{where} refers to pick {int(index.max()) + 1}, but the pick file has {n} picks "
                             f"(layers of another line?)", path=path, field="shots")
        same_shot = np.abs(picks.source_x[index] - fit.shot_x) <= POSITION_TOL_M
        offsets = np.asarray(fit.offsets_m, float)
        same_offsets = offsets.size == index.size and np.allclose(
            np.abs(picks.offset[index]), np.abs(offsets), rtol=0.0, atol=POSITION_TOL_M)
        if not (np.all(same_shot) and same_offsets):
            raise InputError(f"{where}: its picks are not those of {picks.path or 'these picks'} "
                             f"(layers of another line, or the picks changed since)", path=path, field="shots")
