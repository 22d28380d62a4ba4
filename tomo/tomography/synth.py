"""Synthetic picks: forward-model a layout through a model file (the ``tomo synth`` job).

The grid is as deep as the model's deepest first-arrival ray needs, with room below it
(:mod:`tomo.tomography.depth`): the rays of the first guess (a third of the longest
offset) are traced on a probe, deepened while they turn too close to its bottom, and
the picks are computed on a grid of that depth. A mesh spec that sets the depth is
kept, with a warning when it is too shallow.
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np

from ..survey.meshspec import MeshSpec, read_mesh_spec
from ..survey.model import read_model
from ..survey.picks import read_picks, write_picks
from ..survey.terrain import read_terrain
from .depth import check_depth
from .forward import travel_times
from .mesh import mesh_for_picks
from .workers import check_workers

__all__ = ["synthesize", "synthetic_times", "deep_enough", "SYNTH_REFINE"]

#: Most solves of the deepening.
MAX_ROUNDS = 4
#: Forward node intervals per model cell of synthetic picks unless the mesh spec sets
#: them: twice the inversion's, since synthetic picks stand for the truth. Against
#: closed forms (tests/test_synth.py; 2 m station spacing, so nodes 1/12 m apart): a
#: two-layer model (500 over 2000 m/s) within 0.07 ms at every placing of the
#: interface between nodes, against 0.13 ms with 3 intervals per cell and 0.09 ms with
#: 5; the error falls about in proportion to the node spacing (the interface is
#: smeared over one node).
SYNTH_REFINE = 6
#: Node intervals per cell and slowness samples per node side of the probes that find
#: the depth (the inversion's grid; a ray's depth is found to within a cell).
PROBE_REFINE, PROBE_SAMPLES = 3, 2


def synthetic_times(model, picks, mesh, samples=8, workers=1, progress=None):
    """Noise-free first-arrival times (s) for ``picks`` through ``model`` on ``mesh``."""
    slowness = model.slowness_nodes(mesh, samples=samples)
    return travel_times(mesh, slowness, picks, workers=workers, progress=progress)


def synthesize(model_path, layout_path, out_path, terrain=None, mesh=None, noise_ms=0.0,
               seed=None, workers=1, progress=None, records_dir=None, record_settings=None):
    """Read a model and layout, compute times, add noise, write a pick file atomically.

    With ``records_dir``, also write one SEG-Y shot record per shot there, made from the
    noise-free times (``tomo.records.synthetic``; ``record_settings`` a RecordSettings).

    Returns the Picks written and a dict of information (mesh description, notices,
    fallbacks, number of shots, record files).
    """
    check_workers(workers, "workers")
    model = read_model(model_path)
    terrain_obj = read_terrain(terrain) if terrain else model.terrain
    layout = read_picks(layout_path, terrain=terrain_obj, layout=True)
    spec = read_mesh_spec(mesh) if mesh else MeshSpec()
    if spec.refine is None:
        spec = replace(spec, refine=SYNTH_REFINE)
    result, grid, spec, depth = deep_enough(model, layout, terrain_obj, spec, workers=workers, progress=progress)
    times = result.time_s
    sigma = None
    if noise_ms > 0:
        rng = np.random.default_rng(seed)
        times = times + rng.normal(0.0, noise_ms * 1e-3, size=times.shape)
        sigma = np.full(times.shape, noise_ms * 1e-3)
        # a noisy time at a very short offset could come out non-positive
        times = np.maximum(times, 1e-5)
    picks = layout.with_times(times, sigma)
    records = []
    if records_dir is not None:
        from ..records.synthetic import write_line_records

        records = write_line_records(records_dir, layout, result.time_s, record_settings, seed)
    write_picks(out_path, picks)
    notices = list(layout.notices) + ([depth] if depth.startswith("warning") else [])
    info = {"mesh": grid.describe(), "depth": depth, "notices": notices, "fallbacks": result.fallbacks,
            "n_shots": len(layout.sources()[0]), "spec": spec.as_dict(), "records": records}
    return picks, info


def deep_enough(model, layout, terrain, spec=None, workers=1, progress=None):
    """Times through ``model`` on a grid deep enough for its rays (module docstring).

    The depth is found on probes: the grid at the inversion's node spacing (3 intervals
    per cell; the rays' depth does not need the final accuracy), its rays traced, made
    deep enough for them; then the times are solved once on the final grid. Returns the
    ForwardResult, the grid, its filled-in spec and the depth chosen and why, in words
    (starting "warning" when a depth set by ``spec`` is too shallow).
    """
    user = spec is not None and spec.depth_m is not None
    grid, spec = mesh_for_picks(layout, terrain, spec)
    first = spec.depth_m
    for _ in range(MAX_ROUNDS):
        probe, _ = mesh_for_picks(layout, terrain, replace(spec, refine=PROBE_REFINE))
        rays = travel_times(probe, model.slowness_nodes(probe, samples=PROBE_SAMPLES), layout, workers=workers,
                            rays=True).matrix
        check = check_depth(probe, rays)
        if user or (not check.reached_bottom and check.needed_m <= spec.depth_m):
            break
        spec = replace(spec, depth_m=check.next_depth(spec.depth_m, grid.cell))
    unsettled = not user and check.reached_bottom  # still on the bottom after MAX_ROUNDS probes
    if not user and not unsettled:
        # as deep as the rays need with room: no deeper (the fields cost in proportion)
        spec = replace(spec, depth_m=max(math.ceil(check.needed_m / grid.cell - 1e-9) * grid.cell, 2 * grid.cell))
    grid, spec = mesh_for_picks(layout, terrain, spec)
    result = travel_times(grid, model.slowness_nodes(grid), layout, workers=workers, progress=progress)
    if unsettled:
        # the deepest grid tried is kept, and the times may still be late: say so
        return result, grid, spec, (f"warning: after {MAX_ROUNDS} probes the rays still reached the grid's bottom; "
                                    f"the times are from a grid {spec.depth_m:g} m deep and may be late where rays "
                                    f"want to go deeper ({check.describe(layout)}); set a deeper depth_m")
    if user and not check.ok:
        return result, grid, spec, (f"warning: the mesh spec's depth {spec.depth_m:g} m may be too shallow: "
                                    f"{check.describe(layout)}")
    source = "as the mesh spec sets" if user else f"first guess {first:.1f} m, a third of the longest offset"
    return result, grid, spec, f"{spec.depth_m:g} m below the lowest ground ({source}): {check.describe(layout)}"
