"""The plan of an inversion, made before it runs: the grid's depth, the starting model on
that grid, and the estimate of memory and time (refused when it cannot fit).

Used by :func:`tomo.api.invert`; the depth rule is :mod:`tomo.tomography.depth`'s, the
estimate :mod:`tomo.tomography.budget`'s.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np

from ..core.errors import InputError
from ..survey.meshspec import MeshSpec
from ..tomography.budget import RunEstimate, estimate_run, suggest_cell
from ..tomography.depth import DepthCheck, check_depth
from ..tomography.inversion import InversionSettings, build_problem
from ..tomography.mesh import Mesh, mesh_for_picks
from ..tomography.passes import forward_pass
from ..tomography.workers import Workers

__all__ = ["RunPlan", "plan_grid", "plan_run", "check_estimate"]

#: Most probes of the depth (each one forward pass with rays of the starting model).
MAX_PROBES = 4

#: ``start_for(mesh)``: the starting model on a grid (velocity m/s, layered dict or
#: None, the start used, its notes).
StartFor = Callable[[Mesh], tuple[Any, Any, str, list[str]]]


@dataclass
class RunPlan:
    """What a run will be, told before it starts (``on_plan`` of :func:`tomo.api.invert`).

    Attributes
    ----------
    mesh : str
        The grid, in words.
    depth : str
        The grid's depth and why it was chosen.
    estimate : RunEstimate
        Memory and time (``estimate.describe()`` is one line).
    start_pass : PassResult or None
        The starting model's pass with rays on this grid, when the depth probe made it
        (the inversion takes it as its first pass instead of solving it again).
    """

    mesh: str
    depth: str
    estimate: RunEstimate
    start_pass: Any = field(default=None, repr=False)

    def lines(self) -> list[str]:
        return [f"mesh: {self.mesh}", f"depth: {self.depth}", self.estimate.describe()]


def check_estimate(estimate: RunEstimate, grid: Mesh, picks_path: str | None) -> None:
    """Refuse a run whose estimated peak does not fit the memory available now, naming
    the estimate and a way out (a coarser cell, when one fits)."""
    if estimate.fits:
        return
    assert estimate.available_bytes is not None
    bigger = suggest_cell(estimate, grid.cell)
    way = (f"use larger model cells (a mesh spec with cell_m = {bigger:g}; now {grid.cell:g} m)" if bigger
           else "split the line into parts")
    raise InputError(f"this run would need about {estimate.memory_bytes / 1e9:.1f} GB of memory, "
                     f"{estimate.available_bytes / 1e9:.1f} GB is available ({estimate.picks:,} picks, "
                     f"{estimate.cells:,} cells of {grid.cell:g} m, about {estimate.matrix_entries / 1e6:.0f} "
                     f"million ray-matrix entries): {way}, or fewer workers", path=picks_path, field="cell_m")


def _probe(grid: Mesh, velocity: Any, picks: Any, settings: InversionSettings) -> tuple[DepthCheck, Any]:
    """The depth check of the starting model's rays and its pass: one forward pass with
    rays of the model exactly as the inversion starts from it (so that the inversion can
    take the pass as its first)."""
    problem = build_problem(picks, grid, velocity, settings)
    v = problem.velocity_grid(problem.m_start)
    with Workers(settings.workers) as pool:
        res = forward_pass(grid, np.where(grid.ground, 1.0 / v, 0.0), picks, settings, pool, rays=True)
    return check_depth(grid, res.matrix), res


def _deeper(spec: MeshSpec, check: DepthCheck, cell: float) -> float:
    """The depth (m) the next grid should have after ``check``."""
    return check.next_depth(float(spec.depth_m or 0.0), cell)


def plan_grid(picks: Any, terrain: Any, spec: MeshSpec, user_depth: bool, start_for: StartFor,
              settings: InversionSettings, least_depth_m: float | None = None
              ) -> tuple[Mesh, MeshSpec, tuple[Any, Any, str, list[str]], str, Any]:
    """The grid of an inversion and its starting model: as deep as the spec says when the
    user set the depth, else the first guess (a third of the longest offset) made deeper
    where the starting model's rays need it (:mod:`tomo.tomography.depth`: below the
    deepest ray with room), and never shallower than ``least_depth_m`` (m below the
    lowest ground: boreholes).

    Returns the grid, its spec, ``start_for(grid)``, the depth in words and the starting
    model's pass with rays on the grid (None unless the last probe was on it).
    """
    grid, spec = mesh_for_picks(picks, terrain, spec)
    built = start_for(grid)
    if user_depth:
        return grid, spec, built, f"{spec.depth_m:g} m below the lowest ground, as the mesh spec sets", None
    first = float(spec.depth_m or 0.0)
    least = 0.0 if least_depth_m is None else math.ceil(least_depth_m / grid.cell - 1e-9) * grid.cell
    check, probe = None, None
    for _ in range(MAX_PROBES):
        check, probe = _probe(grid, built[0], picks, settings)
        current = float(spec.depth_m or 0.0)
        depth = max(_deeper(spec, check, grid.cell), least)
        if not check.reached_bottom and depth <= current:
            # room enough: a grid deeper than the rays need is kept (the model changes as
            # the run goes on, and the first guess is what runs before this rule had)
            break
        spec, probe = replace(spec, depth_m=max(depth, current)), None
        grid, spec = mesh_for_picks(picks, terrain, spec)
        built = start_for(grid)
        if not check.reached_bottom:
            break  # the rays stayed above the old bottom: the new grid holds them too
    assert check is not None
    depth_m = float(spec.depth_m or 0.0)
    if depth_m > first + 1e-9:
        why = (f"{round(depth_m, 1):g} m below the lowest ground, deeper than the first guess of {first:.1f} m "
               f"(a third of the longest offset): in the starting model {check.describe(picks)}")
    else:
        why = (f"{round(depth_m, 1):g} m below the lowest ground (a third of the longest offset), deep enough: in the "
               f"starting model {check.describe(picks)}")
    if least and depth_m <= least + 1e-9:
        why += f"; {least:g} m holds the deepest borehole with two cells below it"
    return grid, spec, built, why, probe


def plan_run(picks: Any, picks_path: str | None, terrain: Any, spec: MeshSpec, user_depth: bool,
             start_for: StartFor, settings: InversionSettings,
             boreholes: Any = None) -> tuple[Mesh, MeshSpec, tuple[Any, Any, str, list[str]], RunPlan]:
    """The grid and starting model of an inversion (:func:`plan_grid`), every grid's
    start checked (the inversion's input checks, then the estimate of memory: refused
    when it cannot fit) before any pass runs on it, and never shallower than the
    deepest of ``boreholes`` (placed on the line) with two cells below it.

    Returns the grid, its spec, ``start_for(grid)`` and the :class:`RunPlan`.
    """
    estimates: list[RunEstimate] = []

    def checked(grid: Mesh) -> tuple[Any, Any, str, list[str]]:
        built = start_for(grid)
        build_problem(picks, grid, built[0], settings)
        estimates.append(estimate_run(grid, picks, built[0], settings))
        check_estimate(estimates[-1], grid, picks_path)
        return built

    least = None
    if boreholes is not None and len(boreholes.x):
        # each logged depth as a depth below the grid's lowest ground (the spec's datum)
        first, _ = mesh_for_picks(picks, terrain, spec)
        ground = first.terrain.elevation(boreholes.x, extrapolate=True)
        below = boreholes.depth_m - (ground - float(first.ground_surface.min()))
        least = float(np.max(below)) + 2.0 * first.cell
    grid, spec, built, why, probe = plan_grid(picks, terrain, spec, user_depth, checked, settings, least)
    return grid, spec, built, RunPlan(grid.describe(), why, estimates[-1], probe)  # the last grid's estimate
