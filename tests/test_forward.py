"""Forward solver against closed forms and an independent shortest-path solver.

Accuracy targets (issue 2), on a 48-geophone line at 2.5 m spacing with the default
mesh, from two cells of offset to the end of the line:
smooth models within 0.5 % of the time or 0.2 ms, whichever is larger; a sharp
interface within 1 % or 0.3 ms.
"""

import numpy as np
import pytest
import scipy.sparse as sp
import skfmm
from helpers import head_wave_times, line_picks
from scipy.sparse.csgraph import dijkstra

from tomo.survey.meshspec import MeshSpec
from tomo.survey.model import Body, Layer, Model
from tomo.survey.picks import Picks
from tomo.survey.terrain import Terrain, flat_terrain
from tomo.tomography.forward import sample_field, solve_field, travel_times
from tomo.tomography.mesh import build_mesh, mesh_for_picks

SPACING = 2.5
RECEIVERS = np.arange(48) * SPACING
SHOTS = [0.0, 58.75, RECEIVERS[-1]]


def within(computed, exact, rel, floor_s, offset, min_offset):
    """Boolean: |computed - exact| <= max(rel * exact, floor) for offsets >= min_offset."""
    use = offset >= min_offset
    err = np.abs(computed - exact)[use]
    tol = np.maximum(rel * exact[use], floor_s)
    return err <= tol, err, tol


def default_line(terrain):
    picks = line_picks(terrain, RECEIVERS, SHOTS)
    mesh, _ = mesh_for_picks(picks, terrain)
    return picks, mesh


def distance(p):
    return np.hypot(p.receiver_x - p.source_x, p.receiver_z - p.source_z)


def test_skfmm_documented_values():
    # scikit-fmm documentation example (README of scikit-fmm): 3x3 grid, phi = -1 at the
    # centre, speed 3 -> corner 0.40236893, edge 0.16666667, centre 0.11785113.
    phi = np.ones((3, 3))
    phi[1, 1] = -1
    t = skfmm.travel_time(phi, np.full((3, 3), 3.0), dx=1.0)
    assert t[0, 0] == pytest.approx(0.40236893, abs=1e-8)
    assert t[0, 1] == pytest.approx(0.16666667, abs=1e-8)
    assert t[1, 1] == pytest.approx(0.11785113, abs=1e-8)


@pytest.mark.parametrize("terrain", [
    flat_terrain(-20.0, 150.0, 0.0),
    # sloping ground, 8 % grade, not aligned with the grid
    Terrain(np.array([-20.0, 150.0]), np.array([110.0, 96.4])),
], ids=["flat", "sloping"])
def test_homogeneous_straight_line_time(terrain):
    # Homogeneous medium: t = r / v with r the straight distance (definition of a
    # uniform velocity; any textbook, e.g. Telford et al. 1990 sec. 4.3).
    picks, mesh = default_line(terrain)
    v = 1500.0
    result = travel_times(mesh, np.full(mesh.node_shape, 1.0 / v), picks)
    exact = distance(picks) / v
    ok, err, tol = within(result.time_s, exact, 0.005, 0.2e-3, distance(picks), 2 * mesh.cell)
    assert ok.all(), f"worst error {err.max() * 1e3:.3f} ms"


def test_linear_gradient_closed_form():
    # v = v0 + k z: t = arccosh(1 + k^2 r^2 / (2 v_s v_r)) / k (Slotnick 1959, Lessons in
    # Seismic Computing; Fomel, Luo & Zhao 2009, J. Comput. Phys. 228, eq. for the
    # constant-gradient medium). Check values for v0 = 500 m/s, k = 10 1/s at the surface
    # (REFERENCES.md, computed from the same formula): 10 m -> 19.967 ms,
    # 50 m -> 96.242 ms, 100 m -> 176.275 ms.
    v0, k = 500.0, 10.0
    for x, expected_ms in [(10.0, 19.967), (50.0, 96.242), (100.0, 176.275)]:
        assert 1e3 * np.arccosh(1 + k**2 * x**2 / (2 * v0 * v0)) / k == pytest.approx(expected_ms, abs=1e-3)
    terrain = flat_terrain(-20.0, 150.0, 0.0)
    picks, mesh = default_line(terrain)
    # add a shot 6.3 m down a borehole at x = 30.2 m, to every geophone
    deep = Picks(np.full(RECEIVERS.size, 30.2), np.full(RECEIVERS.size, -6.3), RECEIVERS, np.zeros(RECEIVERS.size))
    both = Picks(np.r_[picks.source_x, deep.source_x], np.r_[picks.source_z, deep.source_z],
                 np.r_[picks.receiver_x, deep.receiver_x], np.r_[picks.receiver_z, deep.receiver_z])
    model = Model((Layer(v0, k),))
    result = travel_times(mesh, model.slowness_nodes(mesh), both)
    vs = v0 + k * (-both.source_z)
    vr = v0 + k * (-both.receiver_z)
    r = distance(both)
    exact = np.arccosh(1 + k**2 * r**2 / (2 * vs * vr)) / k
    ok, err, tol = within(result.time_s, exact, 0.005, 0.2e-3, r, 2 * mesh.cell)
    assert ok.all(), f"worst error {err.max() * 1e3:.3f} ms"


@pytest.mark.parametrize("velocities,thicknesses", [
    ((400.0, 2000.0), (5.0,)),    # interface on a node row
    ((400.0, 2000.0), (5.13,)),   # between nodes
    ((400.0, 2000.0), (5.37,)),   # between nodes, other side
    ((350.0, 1200.0, 3000.0), (3.3, 7.7)),
])
def test_horizontal_layers_head_wave(velocities, thicknesses):
    terrain = flat_terrain(-20.0, 150.0, 0.0)
    picks, mesh = default_line(terrain)
    depth = np.cumsum(thicknesses)
    layers = [Layer(v, 0.0, np.array([[0.0, d]])) for v, d in zip(velocities[:-1], depth)] + [Layer(velocities[-1])]
    result = travel_times(mesh, Model(tuple(layers)).slowness_nodes(mesh), picks)
    exact = head_wave_times(picks.offset, velocities, thicknesses)
    # sharp interface target: 1 % or 0.3 ms
    ok, err, tol = within(result.time_s, exact, 0.01, 0.3e-3, distance(picks), 2 * mesh.cell)
    assert ok.all(), f"worst error {err.max() * 1e3:.3f} ms ({(err / tol).max():.2f} of the tolerance)"


def dijkstra_times(model, terrain, x0, x1, z_bottom, h, radius, sources):
    """Shortest-path travel times on a dense node graph (Moser 1991, Geophysics 56,
    "Shortest path calculation of seismic rays"): nodes at spacing h in the ground, each
    joined to every node within ``radius`` spacings along a direction not repeated by a
    shorter edge; edge time = length x mean slowness sampled along the edge from the
    model's own definition (not tomo's rasterisation)."""
    xs = np.arange(x0, x1 + h / 2, h)
    top = terrain.elevation(xs, extrapolate=True).max()
    zs = np.arange(top, z_bottom - h / 2, -h)
    X, Z = np.meshgrid(xs, zs)
    ground = Z <= terrain.elevation(X, extrapolate=True) + 1e-9
    index = -np.ones(X.shape, dtype=int)
    index[ground] = np.arange(ground.sum())
    offsets = [(di, dj) for di in range(-radius, radius + 1) for dj in range(-radius, radius + 1)
               if (di, dj) != (0, 0) and np.gcd(abs(di), abs(dj)) == 1]
    rows, cols, weights = [], [], []
    ny, nx = X.shape
    samples = (np.arange(8) + 0.5) / 8
    for di, dj in offsets:
        i0, i1 = max(0, -di), min(ny, ny - di)
        j0, j1 = max(0, -dj), min(nx, nx - dj)
        a = index[i0:i1, j0:j1]
        b = index[i0 + di:i1 + di, j0 + dj:j1 + dj]
        ok = (a >= 0) & (b >= 0)
        xa, za = X[i0:i1, j0:j1][ok], Z[i0:i1, j0:j1][ok]
        xb, zb = X[i0 + di:i1 + di, j0 + dj:j1 + dj][ok], Z[i0 + di:i1 + di, j0 + dj:j1 + dj][ok]
        px = xa[:, None] + (xb - xa)[:, None] * samples
        pz = za[:, None] + (zb - za)[:, None] * samples
        depth = terrain.elevation(px, extrapolate=True) - pz
        slow = (1.0 / model.velocity_at(px, depth)).mean(axis=1)
        rows.append(a[ok])
        cols.append(b[ok])
        weights.append(np.hypot(xb - xa, zb - za) * slow)
    n = int(ground.sum())
    graph = sp.csr_matrix((np.concatenate(weights), (np.concatenate(rows), np.concatenate(cols))), shape=(n, n))
    src = [int(index[np.argmin(np.abs(zs - z)), np.argmin(np.abs(xs - x))]) for x, z in sources]
    dist = dijkstra(graph, indices=src)
    return xs, zs, index, dist, offsets


def test_heterogeneous_model_against_shortest_path():
    # An undulating refractor under a velocity gradient, with a fast body, on sloping
    # ground. Stations on node positions of both solvers.
    terrain = Terrain(np.array([-10.0, 40.0, 110.0]), np.array([50.0, 53.0, 47.0]))
    base = np.array([[0.0, 4.0], [30.0, 7.5], [55.0, 5.0], [100.0, 9.0]])
    model = Model((Layer(500.0, 30.0, base), Layer(2200.0, 5.0)),
                  bodies=(Body(1400.0, np.array([[60.0, 1.5], [70.0, 1.5], [66.0, 4.0]])),))
    h = 0.5
    receivers = np.arange(0.0, 100.1, 2.5)  # the default mesh then has 0.5 m cells
    shots = [0.0, 50.0, 100.0]
    # stations half a metre below the ground, on the shortest-path grid's node columns
    xs_grid, zs_grid, index, dist, offsets = dijkstra_times(
        model, terrain, -5.0, 105.0, 47.0 - 25.0, h, 5,
        [(x, np.floor(terrain.elevation(x) / h) * h - h) for x in shots])
    rz = np.floor(terrain.elevation(receivers) / h) * h - h
    sz = np.floor(terrain.elevation(np.array(shots)) / h) * h - h
    picks = line_picks(terrain, receivers, shots)
    picks.source_z = np.interp(picks.source_x, shots, sz)
    picks.receiver_z = np.interp(picks.receiver_x, receivers, rz)
    mesh, _ = mesh_for_picks(picks, terrain)
    ours = travel_times(mesh, model.slowness_nodes(mesh), picks).time_s
    ref = np.empty(len(picks))
    for k in range(len(picks)):
        s = shots.index(picks.source_x[k])
        i = int(np.argmin(np.abs(zs_grid - picks.receiver_z[k])))
        j = int(np.argmin(np.abs(xs_grid - picks.receiver_x[k])))
        ref[k] = dist[s, index[i, j]]
    # Known error of the shortest-path method (Moser 1991, sec. "Accuracy"): paths are
    # restricted to the stencil's directions, so times are too long by up to
    # 1/cos(dphi/2) - 1, dphi the largest angle between neighbouring stencil directions,
    # plus the discretisation of the model: each solver resolves an interface or a body
    # corner only to within its node spacing (0.5 m for the graph, less for ours), worth
    # at most one spacing x the slowness contrast along a path that grazes it.
    angles = np.sort(np.arctan2([o[0] for o in offsets], [o[1] for o in offsets]))
    dphi = np.max(np.diff(np.r_[angles, angles[0] + 2 * np.pi]))
    angular = 1 / np.cos(dphi / 2) - 1
    assert angular < 0.01
    diff = ours - ref
    contrast = 1 / 500.0 - 1 / 2200.0
    bound = angular * ref + h * contrast
    assert np.all(np.abs(diff) <= bound), f"worst {np.abs(diff).max() * 1e3:.3f} ms"
    # and the graph times, being restricted paths, are not systematically faster
    assert np.median(diff) <= 0.1e-3
    assert np.median(np.abs(diff)) <= 0.2e-3


def test_air_is_masked_in_a_valley():
    # A V-shaped valley in a uniform medium: the first arrival from one flank to the other
    # cannot cross the air, so it follows the straight legs to the valley floor
    # (shortest path around an obstacle; elementary geometry).
    terrain = Terrain(np.array([0.0, 30.0, 60.0]), np.array([20.0, 5.0, 20.0]))
    v = 1000.0
    picks = Picks([10.0], [terrain.elevation(10.0)], [50.0], [terrain.elevation(50.0)])
    mesh, _ = mesh_for_picks(picks, terrain, MeshSpec(cell_m=0.5))
    t = travel_times(mesh, np.full(mesh.node_shape, 1.0 / v), picks).time_s[0]
    legs = np.hypot(20.0, terrain.elevation(10.0) - 5.0) * 2 / v
    straight = 40.0 / v
    assert t > straight * 1.1  # 44.7 ms around the floor against 40 ms through the air
    assert t == pytest.approx(legs, rel=0.01)


def test_reciprocity_gives_the_same_times():
    terrain = Terrain(np.array([-20.0, 150.0]), np.array([10.0, 0.0]))
    model = Model((Layer(450.0, 0.0, np.array([[0.0, 3.0], [120.0, 6.0]])), Layer(1800.0)))
    # many shots, two geophones: solved from the geophones
    picks = line_picks(terrain, [20.0, 90.0], np.arange(0.0, 117.6, 5.0))
    mesh, _ = mesh_for_picks(picks, terrain, MeshSpec(cell_m=0.5))
    s = model.slowness_nodes(mesh)
    recip = travel_times(mesh, s, picks)
    direct = travel_times(mesh, s, picks, reciprocity=False)
    assert recip.reciprocal and not direct.reciprocal
    assert recip.n_fields == 2 and direct.n_fields == 24
    # both are approximations of one exact time; they agree within the sharp-interface
    # accuracy target (1 % or 0.3 ms)
    assert np.all(np.abs(recip.time_s - direct.time_s) <= np.maximum(0.01 * direct.time_s, 0.3e-3))


def test_second_order_failure_falls_back_to_first_order(monkeypatch):
    real = skfmm.travel_time

    def flaky(phi, speed, dx, order=2):
        if order == 2:
            raise ValueError("Negative discriminant in time marcher quadratic.")
        return real(phi, speed, dx=dx, order=order)

    monkeypatch.setattr(skfmm, "travel_time", flaky)
    terrain = flat_terrain(-10, 60, 0)
    picks = line_picks(terrain, np.arange(0, 50.1, 5.0), [0.0, 50.0])
    mesh, _ = mesh_for_picks(picks, terrain)
    result = travel_times(mesh, np.full(mesh.node_shape, 1e-3), picks)
    assert len(result.fallbacks) == 2
    exact = distance(picks) / 1000.0
    # first order still meets the smooth-model target in a uniform medium
    assert np.all(np.abs(result.time_s - exact) <= np.maximum(0.005 * exact, 0.2e-3))


def test_point_start_is_worse_than_exact_start():
    # Rickett & Fomel (1999) and Sethian & Popovici (1999): the point source dominates the
    # fast-marching error unless its neighbourhood is timed exactly. Measure both on a
    # diagonal line of receivers in a uniform medium.
    terrain = flat_terrain(-10, 100, 0)
    mesh = build_mesh(0, 90, terrain, 0.5, 40, refine=3)
    rx = np.linspace(5, 85, 17)
    rz = -0.4 * rx
    v = 1000.0
    errs = {}
    for radius in (0.0, 6.0):
        f = solve_field(mesh, np.full(mesh.node_shape, 1 / v), 0.1, -0.05, source_radius=radius)
        t = sample_field(mesh, f, rx, rz)
        errs[radius] = np.max(np.abs(t - np.hypot(rx - 0.1, rz + 0.05) / v))
    assert errs[6.0] < 0.5 * errs[0.0]
