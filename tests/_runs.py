"""Small run files for the figure, export and report tests (not a test module).

The "inversion result" is the true model rasterised with tomo.model on a small mesh,
its computed times come from tomo.forward.travel_times, the observed times add seeded
Gaussian noise, and the coverage is a made-up pattern (rays to 7 m below the ground
under the spread, none elsewhere), so the tests know exactly which cells are covered.
"""

from __future__ import annotations

import numpy as np

from tomo.results.runfile import write_run
from tomo.survey.model import Layer, Model
from tomo.survey.picks import Picks
from tomo.survey.terrain import Terrain
from tomo.tomography.forward import travel_times
from tomo.tomography.mesh import build_mesh
from tomo.tomography.run import RunData

#: Depth below ground (m) to which the fake coverage reaches.
COVER_DEPTH_M = 7.0
SIGMA_MS = 0.3


def _base_depth(x):
    return np.interp(x, [0.0, 40.0], [3.0, 5.0])


def make_run(layered=True, seed=1, base_shift_m=0.0):
    """A run of the small line; ``base_shift_m`` moves the refractor down (m)."""
    terrain = Terrain(np.array([-6.0, 20.0, 46.0]), np.array([50.0, 51.5, 53.0]))
    layers = (Layer(500.0, 0.0, np.array([[0.0, 3.0], [40.0, 5.0]]) + [0.0, base_shift_m]), Layer(1500.0, 0.0, None))
    model = Model(layers, (), terrain)
    mesh = build_mesh(-2.0, 35.0, terrain, cell=1.0, depth=12.0, refine=2, padding=2.0)
    geophones = np.arange(12) * 3.0
    shots = np.array([-2.0, 16.5, 35.0])
    sx, rx = np.meshgrid(shots, geophones, indexing="ij")
    sx, rx = sx.ravel(), rx.ravel()
    picks = Picks(sx, terrain.elevation(sx), rx, terrain.elevation(rx))
    computed = travel_times(mesh, model.slowness_nodes(mesh), picks).time_s * 1e3
    rng = np.random.default_rng(seed)
    observed = computed + rng.normal(0.0, SIGMA_MS, computed.size)
    velocity = model.velocity_cells(mesh)
    xx = np.broadcast_to(mesh.x[None, :], mesh.shape)
    coverage = np.where(mesh.ground & (mesh.depth <= COVER_DEPTH_M) & (xx >= -1.0) & (xx <= 34.0),
                        COVER_DEPTH_M + 1.0 - mesh.depth, 0.0)
    start = np.where(mesh.ground, 500.0 + 80.0 * np.maximum(mesh.depth, 0.0), np.nan)
    resid = observed - computed
    chi2_final = float(np.mean((resid / SIGMA_MS) ** 2))
    rms_final = float(np.sqrt(np.mean(resid**2)))
    history = {"chi2": np.array([40.0, 6.0, 1.6, chi2_final]),
               "rms_ms": np.array([1.9, 0.74, 0.38, rms_final]),
               "lambda": np.array([100.0, 30.0, 10.0, 3.0]),
               "step": np.array([np.nan, 1.0, 1.0, 0.5])}
    layered_dict = None
    if layered:
        depth = _base_depth(geophones)
        surface = terrain.elevation(geophones)
        # the layers.json layout (a short one: older files carry no per-layer sigmas,
        # no depth uncertainty and warnings as text only)
        n = geophones.size
        layered_dict = {
            "layers": [{"velocity_m_s": 510.0, "thickness_m": 3.9}, {"velocity_m_s": 1480.0, "thickness_m": None}],
            "delay_time_profile": {"columns": {
                "refractor": [1] * n, "x": [float(x) for x in geophones], "surface_z": [float(s) for s in surface],
                "depth_m": [float(d) + 0.2 for d in depth],
                "elevation_m": [float(s - d - 0.2) for s, d in zip(surface, depth)],
                "uncertainty_m": [None] * n, "velocity_m_s": [1480.0] * n, "method": ["plus-minus"] * n}},
            "warnings": ["made-up warning for the report test"],
        }
    return RunData(
        x=mesh.x, z=mesh.z, velocity=velocity, coverage=coverage, start_velocity=start,
        terrain_x=terrain.x, terrain_z=terrain.z,
        picks={"source_x": sx, "source_z": picks.source_z, "receiver_x": rx, "receiver_z": picks.receiver_z,
               "observed_ms": observed, "computed_ms": computed, "sigma_ms": np.full(sx.size, SIGMA_MS)},
        history=history, iteration_models=[velocity * 0.9, velocity * 0.97, velocity],
        chi2=chi2_final, rms_ms=rms_final, iterations=3, converged=True,
        stop_reason="chi-squared reached its target", settings={"start": "layered", "max_iterations": 10},
        mesh=mesh.as_dict(), layered=layered_dict, notes=["test run"],
    ), mesh, model


def write_test_run(path, layered=True):
    run, mesh, model = make_run(layered=layered)
    write_run(path, run)
    return run, mesh, model


def second_run(run, base_shift_m):
    """Another run of ``run``'s picks (the same times and sigmas; they are what makes
    two runs comparable) whose model has the refractor ``base_shift_m`` deeper."""
    from dataclasses import replace

    other = make_run(layered=False, base_shift_m=base_shift_m)[0]
    return replace(other, picks=dict(other.picks, observed_ms=run.picks["observed_ms"],
                                     sigma_ms=run.picks["sigma_ms"]))
