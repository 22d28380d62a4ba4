"""Synthetic picks: forward-model a layout through a model file (the ``tomo synth`` job)."""

from __future__ import annotations

import numpy as np

from ..survey.meshspec import read_mesh_spec
from ..survey.model import read_model
from ..survey.picks import read_picks, write_picks
from ..survey.terrain import read_terrain
from .forward import travel_times
from .mesh import mesh_for_picks

__all__ = ["synthesize", "synthetic_times"]


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
    model = read_model(model_path)
    terrain_obj = read_terrain(terrain) if terrain else model.terrain
    layout = read_picks(layout_path, terrain=terrain_obj, layout=True)
    spec = read_mesh_spec(mesh) if mesh else None
    grid, spec = mesh_for_picks(layout, terrain_obj, spec)
    result = synthetic_times(model, layout, grid, workers=workers, progress=progress)
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
    info = {"mesh": grid.describe(), "notices": layout.notices, "fallbacks": result.fallbacks,
            "n_shots": len(layout.sources()[0]), "spec": spec.as_dict(), "records": records}
    return picks, info
