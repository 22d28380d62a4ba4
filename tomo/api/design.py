"""The public API's survey design: candidate layouts tried on a model of the site."""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from pathlib import Path
from typing import Any

from ..core.defaults import DEFAULT_SIGMA_MS
from ..core.errors import InputError, TomoError
from ..uncertainty.design import DEFAULT_TOLERANCE_M, DESIGN_MEMBERS, DesignResult
from .workflow import PathLike

__all__ = ["design", "write_design", "design_table_lines", "DEFAULT_TOLERANCE_M", "DESIGN_MEMBERS", "DEFAULT_NOISE_MS"]

#: Pick noise of the synthetic picks, ms (the pick sigma tomo assumes where a pick file
#: gives none).
DEFAULT_NOISE_MS = DEFAULT_SIGMA_MS


def _check(noise_ms: float, tolerance_m: float, members: int, layouts: Sequence[PathLike]) -> None:
    if not layouts:
        raise InputError("give at least one layout file", field="--layout")
    if not (math.isfinite(noise_ms) and noise_ms > 0):
        raise InputError(f"noise {noise_ms:g} ms must be positive (the inversion fits the picks to it)",
                         field="--noise-ms")
    if not (math.isfinite(tolerance_m) and tolerance_m > 0):
        raise InputError(f"tolerance {tolerance_m:g} m must be positive", field="--tolerance-m")
    if int(members) < 2:
        raise InputError(f"an ensemble needs at least 2 members, got {members}", field="--members")


def _check_target(site: Any, velocity: float, region: tuple[float, float], contour_m_s: float | None) -> None:
    """Refuse a target the model never reaches under the layouts (a --contour above its
    velocities, or deeper than the region is long)."""
    import numpy as np

    from ..uncertainty.design import model_surface

    depth_m = max(region[1] - region[0], 10.0)
    depth = model_surface(site, np.linspace(region[0], region[1], 25), velocity, depth_m)
    if not np.isfinite(depth).any():
        raise InputError(f"the model never reaches {velocity:.0f} m/s within {depth_m:.0f} m of the ground "
                         f"between x = {region[0]:g} and {region[1]:g} m: no target to resolve",
                         path=site.path, field="--contour" if contour_m_s is not None else "layer")


def _names(layouts: Sequence[PathLike]) -> list[str]:
    """Each layout's name: its file stem, or its path where stems repeat."""
    stems = [Path(p).stem for p in layouts]
    return [s if stems.count(s) == 1 else str(p) for s, p in zip(stems, layouts)]


def design(model: PathLike, layouts: Sequence[PathLike], noise_ms: float = DEFAULT_NOISE_MS,
           contour_m_s: float | None = None, tolerance_m: float = DEFAULT_TOLERANCE_M,
           members: int = DESIGN_MEMBERS, seed: int = 0, workers: int | None = None, out: PathLike | None = None,
           progress: Callable[[str, int, int], object] | None = None, **settings: Any) -> DesignResult:
    """Try candidate layouts on a model of the site before going to the field.

    For each layout: synthetic picks through the model (on a grid twice as fine as the
    inversion's) with ``noise_ms`` of Gaussian noise, an ensemble of ``members``
    inversions, and the target (the model's deepest interface, or its ``contour_m_s``
    surface) compared with what they recover; see :mod:`tomo.uncertainty.design`.

    Parameters
    ----------
    model : path
        Model file (TOML, :mod:`tomo.survey.model`); its ``[terrain]`` is the ground.
    layouts : sequence of path
        Layout files: pick files without times (shot and geophone positions).
    noise_ms : float
        Pick noise, ms (one sigma).
    contour_m_s : float, optional
        Velocity of the target surface, m/s (default: the middle of the step at the
        model's deepest interface).
    tolerance_m : float
        Depth tolerance on the target, m.
    members : int
        Members of each layout's ensemble.
    seed : int
        Seed of the picks' noise (the same for every layout) and of the ensembles.
    workers : int, optional
        Local worker processes of the ensembles (default: the cores).
    out : path, optional
        Folder for each layout's ensemble file (``<layout>.h5``).
    progress : callable, optional
        ``progress(layout_name, members_done, members_total)``.
    **settings
        Inversion settings (:class:`InversionSettings` fields).

    Returns
    -------
    DesignResult
        ``layouts`` (one :class:`LayoutResult` each, in the order given), ``choice``
        (the cheapest layout that resolves the target, or None) and ``summary()``.

    Notes
    -----
    A design is only as good as the model it is tried on: real ground has hidden
    layers, velocity inversions and lateral changes a model may lack. The result ranks
    layouts; it does not promise what the survey will see.
    """
    from ..survey.model import read_model
    from ..survey.picks import read_picks
    from ..survey.survey import read_survey
    from ..survey.terrain import flat_terrain
    from ..uncertainty.design import assess_layout, cheapest, design_picks, target_region, target_velocity
    from .uncertainty import ensemble
    from .workflow import prepare_folder

    _check(noise_ms, tolerance_m, members, layouts)
    site = read_model(model)
    velocity, target = target_velocity(site, contour_m_s)
    read = [read_picks(p, terrain=site.terrain, layout=True) for p in layouts]
    folder = None if out is None else prepare_folder(out)
    region = target_region(read)
    _check_target(site, velocity, region, contour_m_s)
    results = []
    for name, layout in zip(_names(layouts), read):
        terrain = site.terrain
        if terrain is None:
            xs = [float(layout.source_x.min()), float(layout.source_x.max()), region[0], region[1]]
            terrain = flat_terrain(min(xs) - 100.0, max(xs) + 100.0, 0.0)
        picks = design_picks(site, layout, terrain, noise_ms, seed)
        survey = read_survey(picks, terrain=terrain)
        report = None if progress is None else (lambda done, total, *_, n=name: progress(n, done, total))
        # the members' band alone: extremal bounds (tomo ensemble's default) would add a
        # dozen inversions per layout, and a design ranks layouts, it certifies none
        run = ensemble(survey, members=members, seed=seed, workers=workers, progress=report, bounds=False,
                       out=None if folder is None else folder / f"{Path(str(name)).stem}.h5", **settings)
        surface: Any = None
        band: Any = None
        try:
            surface, band = run.surface(velocity), run.band(velocity)
        except TomoError:
            surface = band = None  # the inversion never reaches the target's velocity
        results.append(assess_layout(name, layout, run, surface, band, site, velocity, region, tolerance_m))
    return DesignResult(results, velocity, target, float(tolerance_m), float(noise_ms), region, int(members),
                        cheapest(results))


def design_table_lines(result: DesignResult) -> list[str]:
    """The design's table as aligned text lines, then why each failing layout fails."""
    from ..results.design_table import design_table_lines as lines

    return lines(result)


def write_design(result: DesignResult, folder: PathLike) -> list[Path]:
    """Write the design's table (``design.csv``) and figure (``design.png``) into
    ``folder`` (created if needed), each atomically. Returns the files."""
    from ..figures import style
    from ..figures.design import design_figure
    from ..results.design_table import write_design_table
    from .workflow import prepare_folder

    where = Path(prepare_folder(folder))
    table = write_design_table(where / "design.csv", result)
    figure = style.save(design_figure(result), where / "design.png")
    return [table, figure]
