"""Tomographic inversion: recovery of synthetic lines, stopping rules, bad input.

Synthetic picks are forward-modelled on a forward grid 2.7 times finer (h = 0.125 m)
than the inversion's (cells of 1 m, h = 0.333 m), so the inversion never sees its own
discretisation, and Gaussian noise of 0.5 ms (seeded) is added. 24 geophones at 2 m,
9 shots (both ends, off both ends, interior): a small line that keeps these tests fast.
"""

import numpy as np
import pytest
from helpers import line_picks

from tomo.core.errors import InputError
from tomo.results.runfile import RunWriter, read_run
from tomo.survey.model import Layer, Model
from tomo.survey.terrain import Terrain, flat_terrain
from tomo.tomography.forward import travel_times
from tomo.tomography.inversion import InversionInterrupted, InversionSettings, invert, smoothness_operator
from tomo.tomography.mesh import build_mesh
from tomo.tomography.starting import fit_gradient, gradient_start, gradient_time
from tomo.tomography.synth import synthetic_times

TERRAIN = flat_terrain(-30.0, 80.0)
GEOPHONES = np.arange(24) * 2.0
SHOTS = [-4.0, 0.0, 6.0, 12.0, 23.0, 34.0, 40.0, 46.0, 50.0]
SIGMA_S = 0.5e-3
DEPTH_M = 20.0


def inversion_mesh(cell=1.0):
    return build_mesh(-4.0, 50.0, TERRAIN, cell, DEPTH_M, refine=3, padding=2.0)


def synthetic(model, seed=1, sigma_s=SIGMA_S):
    layout = line_picks(TERRAIN, GEOPHONES, SHOTS)
    fine = build_mesh(-8.0, 54.0, TERRAIN, 0.25, DEPTH_M + 2.0, refine=2, padding=2.0)
    t = synthetic_times(model, layout, fine).time_s
    rng = np.random.default_rng(seed)
    return layout.with_times(t + rng.normal(0.0, sigma_s, t.size), np.full(t.size, sigma_s))


def iso_depth(mesh, velocity, value):
    """Depth (m) of the first crossing of ``value`` down each column (linear in between)."""
    out = np.full(mesh.nx, np.nan)
    for j in range(mesh.nx):
        col, d = velocity[:, j], mesh.depth[:, j]
        ok = np.isfinite(col)
        col, d = col[ok], d[ok]
        above = np.flatnonzero(col >= value)
        if above.size and above[0] > 0:
            k = above[0]
            out[j] = np.interp(value, [col[k - 1], col[k]], [d[k - 1], d[k]])
    return out


def reversed_head_waves(x, depth, v1, v2, shots=SHOTS, geophones=GEOPHONES):
    """Fewer of the left-to-right and right-to-left head-wave paths (shot-geophone
    pairs beyond the crossover distance) that pass along the refractor under each x."""
    S, G = (a.ravel() for a in np.meshgrid(np.asarray(shots, float), geophones, indexing="ij"))
    out = np.zeros(len(x), int)
    for j, (xj, h, va) in enumerate(zip(x, np.broadcast_to(depth, len(x)), np.broadcast_to(v1, len(x)))):
        x_c = 2.0 * h * np.sqrt((v2 + va) / (v2 - va))
        a = h * np.tan(np.arcsin(va / v2))
        head = np.abs(G - S) > x_c
        n_right = np.sum(head & (G > S) & (S + a <= xj) & (xj <= G - a))
        n_left = np.sum(head & (G < S) & (G + a <= xj) & (xj <= S - a))
        out[j] = min(n_right, n_left)
    return out


def check_recovery(run, mesh, true_depth, v1, v2, settings, v1_above=None):
    v = run.velocity
    # no NaN in the ground, all velocities within the bounds actually used
    assert np.all(np.isfinite(v[mesh.ground])) and np.all(np.isnan(v[~mesh.ground]))
    lo, hi = run.settings["v_min_m_s_used"], run.settings["v_max_m_s_used"]
    assert v[mesh.ground].min() >= lo * (1 - 1e-9) and v[mesh.ground].max() <= hi * (1 + 1e-9)
    # discrepancy principle: chi2 = mean((r/sigma)^2) close to 1 (Constable, Parker &
    # Constable 1987, Geophysics 52); issue 4 asks for 0.8 to 1.3
    assert 0.8 <= run.chi2 <= 1.3, run.chi2
    assert run.converged and run.stop_reason == "chi2 at target"
    # Iso-velocity surface at the geometric mean of the two velocities: the parameter is
    # log-velocity, and smoothing spreads a step symmetrically in log v (common
    # practice for reading a refractor from a tomogram; calibrate against boreholes).
    depth = iso_depth(mesh, v, np.sqrt(v1 * v2))
    v1_above = v1 if v1_above is None else v1_above
    # good coverage: refractor points that first-arrival head waves sample in both
    # directions (reversed coverage), at least 5 shot-geophone pairs each way, from the
    # survey geometry and the true model (independent of the tomogram, whose own
    # refractor the rays follow). A head wave is the first arrival beyond the crossover
    # distance x_c = 2H sqrt((V2+V1)/(V2-V1)) and runs along the refractor from
    # H tan(theta_c) past the shot to H tan(theta_c) before the geophone,
    # theta_c = asin(V1/V2) (Telford, Geldart & Sheriff 1990, Applied Geophysics, 2nd
    # ed., sec. 4.3; flat-layer formulas applied with the local depth H, and V1 the
    # overburden velocity just above the refractor).
    good = reversed_head_waves(mesh.x, true_depth, v1_above, v2) >= 5
    assert good.sum() >= 30, good.sum()  # most of the 46 columns under the spread
    err = np.abs(depth[good] - true_depth[good]) / true_depth[good]
    # Issue 4 asks for within 10 % where coverage is good. Measured with noise seeds 1-6
    # on both lines, from both starting models (default settings: the smoothest model
    # at chi2 1 +- 0.1, smooth_x 0.5, smooth_z 0.2, bilinear ray booking; good columns
    # x = 2.5-43.5 m on the trough line, 1.5-40.5 m on the weathered one): median error
    # 4.0-6.9 % (trough, gradient start), 4.7-6.4 % (trough, layered start), 6.3-7.8 %
    # and 5.3-7.1 % (weathered zone); worst column 8.9-12.5 % (trough) and 7.5-10.3 %
    # (weathered zone), about a cell of 1 m: at the bottom of the trough and on the flat
    # shoulders toward the line ends, where smoothing rounds the surface; the weathered
    # zone's contour sits shallow along much of the line, since its overburden velocity
    # grows to 450-530 m/s at the interface while the contour uses the top 350 m/s.
    # Before the objective penalised the roughness of the model itself (it penalised
    # that of its departure from the start), the layered start kept contours up to 18 %
    # (trough) and 19 % (weathered zone) off, 30 % and 27 % from the sharp layers.
    # Asserted so that it holds for any of those seeds and both starts: median within
    # 9 %, no column beyond 13 % (the measured worst plus under 1 %; was 10 % and 15 %).
    assert np.median(err) <= 0.09, np.round(err, 3)
    assert err.max() <= 0.13, np.round(err, 3)


def test_recovers_a_refractor_with_a_trough():
    base = np.array([[0.0, 8.0], [12.0, 8.0], [23.0, 12.0], [34.0, 8.0], [46.0, 8.0]])
    v1, v2 = 500.0, 2000.0
    picks = synthetic(Model((Layer(v1, 0.0, base), Layer(v2)), terrain=TERRAIN))
    mesh = inversion_mesh()
    settings = InversionSettings(workers=1)
    run = invert(picks, mesh, gradient_start(picks, mesh), settings)
    check_recovery(run, mesh, np.interp(mesh.x, base[:, 0], base[:, 1]), v1, v2, settings)
    assert run.iterations >= 1 and len(run.iteration_models) == run.iterations
    assert run.history["chi2"][0] > run.chi2


def test_recovers_a_low_velocity_weathered_zone():
    # a slow weathered layer (350 m/s at the top, +20 m/s per m) thickening from 5 to
    # 9 m along the line over 1800 m/s bedrock
    base = np.array([[0.0, 5.0], [46.0, 9.0]])
    v1, v2 = 350.0, 1800.0
    picks = synthetic(Model((Layer(v1, 20.0, base), Layer(v2)), terrain=TERRAIN), seed=2)
    mesh = inversion_mesh()
    settings = InversionSettings(workers=1)
    run = invert(picks, mesh, gradient_start(picks, mesh), settings)
    true_depth = np.interp(mesh.x, base[:, 0], base[:, 1])
    check_recovery(run, mesh, true_depth, v1, v2, settings, v1_above=v1 + 20.0 * true_depth)


def test_layered_start_recovers_the_refractor_as_the_gradient_start_does():
    # The objective holds nothing of the start (module docstring of
    # tomo.tomography.inversion), so from the layered interpretation, whose refractor is
    # 5-14 % fast on this line (2.1-2.3 km/s against 2 km/s, noise seeds 1-6, measured),
    # the run must reach the same recovery as from the gradient start (check_recovery).
    from tomo.tomography.starting import layered_start

    base = np.array([[0.0, 8.0], [12.0, 8.0], [23.0, 12.0], [34.0, 8.0], [46.0, 8.0]])
    v1, v2 = 500.0, 2000.0
    picks = synthetic(Model((Layer(v1, 0.0, base), Layer(v2)), terrain=TERRAIN))
    mesh = inversion_mesh()
    start, layered = layered_start(picks, mesh, TERRAIN)
    assert isinstance(layered, dict)
    settings = InversionSettings(workers=1)
    run = invert(picks, mesh, start, settings, layered=layered)
    check_recovery(run, mesh, np.interp(mesh.x, base[:, 0], base[:, 1]), v1, v2, settings)
    assert np.all(np.isfinite(run.velocity[mesh.ground]))


def test_start_smoothing_keeps_constant_and_linear_models():
    # Closed form: a normalised Gaussian is symmetric with unit sum, so it returns a
    # constant unchanged everywhere and, where its whole (truncated) support lies in the
    # ground, a linear function too (its first moment is zero), exactly up to rounding.
    from tomo.tomography.starting import smooth_start

    terrain = Terrain(np.array([-30.0, 80.0]), np.array([100.0, 104.0]))  # uneven ground
    mesh = build_mesh(-4.0, 50.0, terrain, 1.0, DEPTH_M, refine=2, padding=2.0)
    const = np.where(mesh.ground, 800.0, np.nan)
    out = smooth_start(const, mesh, 2.0)
    assert np.all(np.isnan(out[~mesh.ground]))
    np.testing.assert_allclose(out[mesh.ground], 800.0, rtol=1e-12)
    xx = np.broadcast_to(mesh.x[None, :], mesh.shape)
    zz = np.broadcast_to(mesh.z[:, None], mesh.shape)
    linear = np.where(mesh.ground, np.exp(6.0 + 0.01 * xx - 0.05 * zz), np.nan)
    out = smooth_start(linear, mesh, 1.5)
    # cells whose 4-sigma neighbourhood (6 cells) is all ground and inside the grid
    from scipy.ndimage import binary_erosion
    inner = binary_erosion(mesh.ground, np.ones((13, 13)), border_value=0)
    assert inner.sum() > 50
    np.testing.assert_allclose(out[inner], linear[inner], rtol=1e-9)
    np.testing.assert_array_equal(smooth_start(linear, mesh, 0.0)[mesh.ground], linear[mesh.ground])
    with pytest.raises(InputError, match="0 or more model cells"):
        smooth_start(linear, mesh, -1.0)


def test_gradient_start_fits_the_closed_form():
    # picks computed with the closed form t = (2/k) asinh(k x / (2 v0)) (Slotnick 1959)
    # are fitted back to their v0 and k (to 0.1 %: the fit is a smooth 2-parameter
    # least-squares problem on exact data)
    layout = line_picks(TERRAIN, GEOPHONES, SHOTS)
    x = np.abs(layout.offset)
    picks = layout.with_times(gradient_time(x, 500.0, 10.0), np.full(x.size, SIGMA_S))
    fit = fit_gradient(picks)
    assert fit["v0_m_s"] == pytest.approx(500.0, rel=1e-3)
    assert fit["k_per_s"] == pytest.approx(10.0, rel=1e-3)
    # REFERENCES.md check value: x = 50 m -> 96.242 ms
    assert gradient_time(50.0, 500.0, 10.0) == pytest.approx(96.242e-3, abs=1e-6)
    mesh = inversion_mesh()
    v = gradient_start(picks, mesh)
    assert np.allclose(v[mesh.ground], (500.0 + 10.0 * mesh.depth)[mesh.ground], rtol=1e-3)
    assert np.all(np.isnan(v[~mesh.ground]))


def test_noise_free_picks_of_the_start_model_stop_at_once(tmp_path):
    mesh = inversion_mesh()
    layout = line_picks(TERRAIN, GEOPHONES, SHOTS)
    start = np.where(mesh.ground, 600.0 + 40.0 * mesh.depth, np.nan)
    t = travel_times(mesh, mesh.cells_to_nodes(np.where(mesh.ground, 1.0 / start, 0.0)), layout,
                     reciprocity=False).time_s
    picks = layout.with_times(t)  # no sigma: the default sigma is used and noted
    out = tmp_path / "run.h5"
    run = invert(picks, mesh, start, InversionSettings(workers=1), checkpoint=RunWriter(out))
    assert run.iterations == 0 and run.stop_reason == "chi2 at target" and run.converged
    assert run.chi2 < 1e-6
    assert any("sigma = 1 ms assumed" in n for n in run.notes)
    back = read_run(out)
    assert back.iterations == 0 and back.stop_reason == "chi2 at target"
    assert np.allclose(back.velocity, start, equal_nan=True)


def test_smoothness_operator_against_a_dense_construction():
    # independent construction: loop over neighbouring ground cell pairs
    mesh = build_mesh(0.0, 6.0, TERRAIN, 1.0, 3.0, refine=1)
    R = smoothness_operator(mesh, 2.0, 0.5).toarray()
    index = -np.ones(mesh.shape, int)
    index[mesh.ground] = np.arange(mesh.ground.sum())
    rows = []
    for (di, dj, w) in ((0, 1, 2.0), (1, 0, 0.5)):
        for i in range(mesh.nz - di):
            for j in range(mesh.nx - dj):
                a, b = index[i, j], index[i + di, j + dj]
                if a >= 0 and b >= 0:
                    r = np.zeros(mesh.ground.sum())
                    r[a], r[b] = -w, w
                    rows.append(r)
    assert np.array_equal(R, np.array(rows))


# --- bad input ----------------------------------------------------------------------

@pytest.fixture(scope="module")
def small_case():
    base = np.array([[0.0, 8.0], [46.0, 8.0]])
    picks = synthetic(Model((Layer(500.0, 0.0, base), Layer(2000.0)), terrain=TERRAIN))
    mesh = inversion_mesh()
    return picks, mesh, gradient_start(picks, mesh)


def test_too_few_picks(small_case):
    picks, mesh, start = small_case
    few = picks.subset(np.arange(len(picks)) < 12)
    with pytest.raises(InputError, match="too few picks for a tomogram: 12 picks"):
        invert(few, mesh, start)


def test_too_few_picks_for_the_mesh(small_case):
    picks, _, _ = small_case
    fine = inversion_mesh(cell=0.1)
    with pytest.raises(InputError, match="too few picks for the mesh: .* use larger cells"):
        invert(picks, fine, np.full(fine.shape, 1000.0))


def test_mesh_that_does_not_cover_the_stations(small_case):
    picks, _, _ = small_case
    short = build_mesh(0.0, 30.0, TERRAIN, 1.0, 10.0, refine=2)
    with pytest.raises(InputError, match="mesh does not cover the .* at x = "):
        invert(picks, short, np.full(short.shape, 1000.0))


def test_bounds_that_exclude_the_start(small_case):
    picks, mesh, start = small_case
    with pytest.raises(InputError, match="exclude the starting model"):
        invert(picks, mesh, start, InversionSettings(v_min_m_s=1000.0, workers=1))


def test_bad_setting_is_named():
    with pytest.raises(InputError, match="trust_reduction"):
        InversionSettings(trust_reduction=1.5).check()


def test_interrupted_run_keeps_the_last_finished_iteration(small_case, tmp_path):
    picks, mesh, start = small_case
    out = tmp_path / "run.h5"

    def progress(info):
        if info.iteration == 1:
            raise KeyboardInterrupt  # Ctrl-C while iteration 2 would start

    with pytest.raises(InversionInterrupted, match="holds the last finished iteration") as caught:
        invert(picks, mesh, start, InversionSettings(workers=1), progress=progress, checkpoint=RunWriter(out))
    assert isinstance(caught.value, KeyboardInterrupt)
    back = read_run(out)
    assert back.iterations == 1 and back.stop_reason == "interrupted"
    assert len(back.iteration_models) == 1 and back.history["chi2"].size == 2
    assert np.all(np.isfinite(back.velocity[mesh.ground]))
    # no temporary file left beside it
    assert sorted(p.name for p in tmp_path.iterdir()) == ["run.h5"]


def test_fields_from_the_geophones_give_the_same_rays():
    # Fewer geophones than shots: fields are solved from the geophones and rays traced
    # to the shots (reciprocity: the time from A to B equals that from B to A in an
    # isotropic medium; Aki & Richards 2002, Quantitative Seismology, sec. 2.5). Times
    # agree to the solver's accuracy target (0.5 % or 0.2 ms, issue 2) and the ray
    # matrices predict the same time change for a smooth perturbation (2 %: two
    # independent discretisations of the same paths).
    from tomo.tomography.passes import forward_pass

    mesh = inversion_mesh()
    layout = line_picks(TERRAIN, [0.0, 14.0, 30.0, 46.0], np.arange(-4.0, 51.0, 3.0))
    s = np.where(mesh.ground, np.where(mesh.depth > 6.0, 1.0 / 1800.0, 1.0 / 600.0), 0.0)
    a = forward_pass(mesh, s, layout, InversionSettings(workers=1, reciprocity=True))
    b = forward_pass(mesh, s, layout, InversionSettings(workers=1, reciprocity=False))
    assert np.all(np.abs(a.time_s - b.time_s) <= np.maximum(5e-3 * b.time_s, 2e-4))
    ds = 0.01 * s[mesh.ground] * (1.0 + 0.5 * np.sin(mesh.x / 9.0)[None, :].repeat(mesh.nz, 0)[mesh.ground])
    pa, pb = a.matrix @ ds, b.matrix @ ds
    assert np.linalg.norm(pa - pb) <= 0.02 * np.linalg.norm(pb)


def test_rays_traced_later_are_the_rays_traced_at_once():
    # The line search times trial models without rays and traces only the one it keeps
    # (forward_pass(rays=False), then trace_pass): same times and the same matrix as
    # one pass with rays, in this process and through the workers' shared fields. An
    # internal consistency check of that split; the matrix itself is checked against
    # finite differences of the forward solver in tests/test_rays.py.
    from tomo.tomography.passes import forward_pass, trace_pass
    from tomo.tomography.workers import Workers

    mesh = inversion_mesh()
    layout = line_picks(TERRAIN, GEOPHONES, SHOTS)
    s = np.where(mesh.ground, np.where(mesh.depth > 6.0, 1.0 / 1800.0, 1.0 / 600.0), 0.0)
    at_once = forward_pass(mesh, s, layout, InversionSettings(workers=1))
    for workers in (1, 2):
        pool = Workers(workers)
        later = forward_pass(mesh, s, layout, InversionSettings(workers=workers), pool, rays=False)
        assert later.matrix is None and later.rays_s == 0.0
        np.testing.assert_array_equal(later.time_s, at_once.time_s)
        trace_pass(mesh, later, InversionSettings(workers=workers), pool)
        pool.close()
        assert later.pending is None and later.rays_s > 0.0
        assert abs(later.matrix - at_once.matrix).max() <= 1e-12
        assert trace_pass(mesh, later) == (0.0, 0.0)  # nothing left to trace


def test_two_inversions_at_once_in_one_process_match_sequential_runs(small_case):
    # Each inversion owns its spawned worker pool and shares no module state, so two
    # running at once in threads of one process give exactly the results of the same
    # runs one after the other (an internal consistency check of the parallel layout;
    # the numbers themselves are checked by the recovery tests above).
    from concurrent.futures import ThreadPoolExecutor

    picks, mesh, start = small_case
    layered_like = np.where(mesh.ground, np.where(mesh.depth > 7.0, 1900.0, 520.0), np.nan)
    cases = [(start, InversionSettings(workers=2, max_iterations=3)),
             (layered_like, InversionSettings(workers=2, max_iterations=3, smooth_x=1.0))]
    sequential = [invert(picks, mesh, v, s) for v, s in cases]
    with ThreadPoolExecutor(max_workers=2) as pool:
        together = list(pool.map(lambda case: invert(picks, mesh, *case), cases))
    for a, b in zip(sequential, together):
        np.testing.assert_array_equal(a.velocity, b.velocity)
        np.testing.assert_array_equal(a.history["chi2"], b.history["chi2"])
    assert not np.array_equal(sequential[0].velocity, sequential[1].velocity, equal_nan=True)
