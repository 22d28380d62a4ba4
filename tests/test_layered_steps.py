"""The steps of the layered interpretation, each alone, against closed forms.

Sources:
- [TGS] Telford, Geldart & Sheriff (1990), Applied Geophysics, 2nd ed., sec. 4.3
  (n-layer head-wave times; dipping refractor, sec. 4.3.3), from memory.
- [ESS] University of Washington ESS 314 course notes on seismic refraction (Denolle,
  2026, public), worked examples as listed in /work/shared/REFERENCES.md.
Tolerances: the branches below are built exactly from the formulas, so the steps must
give the closed-form values to rounding (rel 1e-9) unless a test says otherwise.
"""

import json
import math
from types import SimpleNamespace

import numpy as np
import pytest

from tomo.core.notices import UNCLASSIFIED, Notice
from tomo.layered.codes import HINTS
from tomo.layered.delay import pooled_velocity
from tomo.layered.formulas import hidden_layer_thickness, intercept_times
from tomo.layered.interpret import interpret_line, method_limits, side_notices
from tomo.layered.matching import match_branches
from tomo.layered.result import Layer, LayeredResult
from tomo.layered.sidefit import Branch, SideFit
from tomo.layered.thickness import fill_thicknesses
from tomo.layered.velocities import direct_wave_layer, refractor_velocities, reversed_pairs
from tomo.survey.geometry import station_spacing
from tomo.survey.picks import Picks


def exact_side(shot_x, side, velocities, intercepts, offsets, first=0):
    """A fitted side whose branches are the given lines and whose picks lie on their
    lower envelope; ``first`` offsets the pick indices so sides do not share them."""
    u = np.asarray(offsets, float)
    lines = np.array([a + u / v for v, a in zip(velocities, intercepts)])
    which = np.argmin(lines, axis=0)
    branches = []
    for i, (v, a) in enumerate(zip(velocities, intercepts)):
        mine = u[which == i]
        branches.append(Branch(i + 1, 1.0 / v, a, float(mine.min()), float(mine.max()), int(mine.size), 0.0,
                               1e-6 / v, 1e-4))
    return SideFit(shot_x, 0.0, side, branches=branches, crossovers_m=[],
                   pick_index=np.arange(u.size) + first, branch_of_pick=which + 1, sigma_s=5e-4,
                   offsets_m=u, times_s=lines.min(axis=0))


# --- thicknesses under the shots ------------------------------------------------------

def test_fill_thicknesses_three_layer_worked_example():
    # [ESS]: 350 / 1650 / 4200 m/s, t_i2 = 6.1 ms, t_i3 = 19.4 ms -> h1 = 1.092 m, h2 = 11.82 m
    v = [350.0, 1650.0, 4200.0]
    t = [0.0, 6.1e-3, 19.4e-3]
    offsets = np.arange(1.0, 121.0, 1.0)
    fits = [exact_side(60.0, -1, v, t, offsets), exact_side(60.0, 1, v, t, offsets, first=offsets.size)]
    lob = [[1, 2, 3], [1, 2, 3]]
    layers = [Layer(x) for x in v]
    shot_depths, notes = fill_thicknesses(layers, fits, lob)
    assert notes == []
    assert round(layers[0].thickness_m, 3) == 1.092
    assert round(layers[1].thickness_m, 2) == 11.82
    assert layers[2].thickness_m is None
    # the tops add up the thicknesses above
    assert layers[2].depth_top_m == pytest.approx(layers[0].thickness_m + layers[1].thickness_m, rel=1e-12)
    assert [s.side for s in shot_depths] == ["left", "right"]
    assert shot_depths[0].depths_m[3] == pytest.approx(layers[2].depth_top_m, rel=1e-12)


def test_fill_thicknesses_says_when_no_side_gives_one():
    # the only side sees layer 3 but not layer 2: layer 2's top and base are not both seen
    v = [500.0, 1500.0, 3000.0]
    t = intercept_times(v, [4.0, 10.0])
    offsets = np.arange(2.0, 100.0, 2.0)
    fit = exact_side(0.0, 1, [v[0], v[2]], [0.0, t[1]], offsets)
    layers = [Layer(x) for x in v]
    _, notes = fill_thicknesses(layers, [fit], [[1, 3]])
    assert [n.code for n in notes] == ["thickness-missing", "thickness-missing"]
    assert [n.layer for n in notes] == [1, 2]
    assert layers[0].thickness_m is None and layers[1].thickness_m is None


# --- refractor velocities from reversed pairs ---------------------------------------

def dipping_line(v1=500.0, v2=1500.0, dip_deg=6.0, h_left=5.0, length=100.0):
    """Two shots at the ends of a line over a plane refractor deepening to larger x
    ([TGS] sec. 4.3.3): the left shot shoots down-dip, the right one up-dip."""
    theta, dip = math.asin(v1 / v2), math.radians(dip_deg)
    h_right = h_left + length * math.sin(dip)  # perpendicular depth grows down-dip
    a_down, a_up = v1 / math.sin(theta + dip), v1 / math.sin(theta - dip)
    t_left, t_right = 2 * h_left * math.cos(theta) / v1, 2 * h_right * math.cos(theta) / v1
    offsets = np.arange(2.0, length + 1e-9, 2.0)
    fits = [exact_side(0.0, 1, [v1, a_down], [0.0, t_left], offsets),
            exact_side(length, -1, [v1, a_up], [0.0, t_right], offsets, first=offsets.size)]
    return fits, [[1, 2], [1, 2]], h_left, h_right


def test_reversed_pair_gives_true_velocity_dip_and_depths():
    fits, lob, h_left, h_right = dipping_line()
    pairs, seen = reversed_pairs(fits, lob, 2, 500.0)
    assert len(pairs) == 1 and len(seen) == 2
    (p,) = pairs
    assert p.velocity_m_s == pytest.approx(1500.0, rel=1e-9)
    assert p.dip_deg == pytest.approx(6.0, rel=1e-9)  # positive: deepening toward larger x
    assert p.perpendicular_depth_left_m == pytest.approx(h_left, rel=1e-9)
    assert p.perpendicular_depth_right_m == pytest.approx(h_right, rel=1e-9)
    assert p.vertical_depth_left_m == pytest.approx(h_left / math.cos(math.radians(6.0)), rel=1e-9)


def test_refractor_velocities_on_a_plane_dipping_refractor():
    # one side per direction: the mean slownesses are the branch slopes and the
    # dipping-layer formula gives V2 exactly; the apparent velocities (about 1210 and
    # 2020 m/s) differ by far more than 10 %, which is reported for layer 2
    fits, lob, _, _ = dipping_line()
    sigma_s = np.full(200, 5e-4)
    found = refractor_velocities(fits, lob, [500.0, 1500.0], sigma_s, 10.0)
    assert [lay.velocity_m_s for lay in found.layers] == pytest.approx([500.0, 1500.0], rel=1e-9)
    assert found.layers[1].reversed is True and found.layers[1].n_sides == 2
    assert [(n.code, n.layer) for n in found.notices] == [("apparent-velocities-differ", 2)]
    assert found.lateral == set()


def test_refractor_seen_one_way_is_not_reversed():
    fits, lob, _, _ = dipping_line()
    found = refractor_velocities(fits[:1], lob[:1], [500.0, 1500.0], np.full(200, 5e-4), 10.0)
    assert found.layers[1].reversed is False
    # the apparent (down-dip) velocity stands: V1 / sin(theta_c + dip) [TGS]
    theta = math.asin(500.0 / 1500.0)
    assert found.layers[1].velocity_m_s == pytest.approx(500.0 / math.sin(theta + math.radians(6.0)), rel=1e-9)
    assert [n.code for n in found.notices] == ["layer-not-reversed"]


def test_direct_wave_layer_mean_and_standard_error():
    offsets = np.arange(2.0, 40.0, 2.0)
    fits = [exact_side(0.0, 1, [480.0, 2000.0], [0.0, 0.01], offsets),
            exact_side(40.0, -1, [520.0, 2000.0], [0.0, 0.01], offsets)]
    layer = direct_wave_layer(fits, [[1, 2], [1, 2]])
    assert layer.velocity_m_s == pytest.approx(500.0, rel=1e-12)
    # standard error of the mean of two values: population sd / sqrt(n) = 20 / sqrt(2)
    assert layer.velocity_sigma_m_s == pytest.approx(20.0 / math.sqrt(2.0), rel=1e-12)
    assert layer.n_sides == 2 and layer.reversed is None


# --- the line's layers ------------------------------------------------------------------

def test_match_branches_on_horizontal_layers():
    # four shots over 500 / 1500 / 3000 m/s with 4 m and 10 m: every side has three
    # branches with the [TGS] intercepts; all match their layers in order
    v = [500.0, 1500.0, 3000.0]
    t = [0.0, *intercept_times(v, [4.0, 10.0])]
    offsets = np.arange(2.0, 120.0, 2.0)
    fits = [exact_side(x, s, v, t, offsets, first=i * offsets.size)
            for i, (x, s) in enumerate([(0.0, 1), (60.0, -1), (60.0, 1), (120.0, -1)])]
    matched = match_branches(fits, spacing=2.0)
    assert matched.template == pytest.approx(v, rel=1e-9)
    assert matched.layer_of_branch == [[1, 2, 3]] * 4
    assert matched.notices == [] and matched.lateral == set()


# --- the method's limits and the sides' notices ---------------------------------------

def test_method_limits_state_the_hidden_layer_rule():
    notes = method_limits([500.0, 1500.0, 3000.0], 2.5)
    assert [(n.code, n.layer) for n in notes] == [("hidden-layer-limit", 2), ("hidden-layer-limit", 3)]
    # spacing / sqrt((Vn - V1)/(Vn + V1)) (common practice), printed to 0.1 m
    assert f"{hidden_layer_thickness(2.5, 500.0, 3000.0):.1f} m" in notes[1].message
    assert [n.code for n in method_limits([500.0], 2.5)] == ["one-layer-only"]


def test_sides_bending_the_wrong_way_share_one_notice():
    from tomo.layered.codes import notice

    offsets = np.arange(2.0, 40.0, 2.0)
    fits = [exact_side(x, s, [500.0, 2000.0], [0.0, 0.01], offsets) for x, s in [(0.0, 1), (40.0, -1), (20.0, 1)]]
    for f in fits[:2]:
        f.messages.append(notice("times-bend-wrong-way", f"{f.label}: bends", fit=f))
    fits[2].messages.append(notice("branch-few-picks", f"{fits[2].label}: few", branch=1, fit=fits[2]))
    notes = side_notices(fits)
    assert [n.code for n in notes.warnings] == ["branch-few-picks", "times-bend-wrong-way"]
    assert "0 m right, 40 m left" in notes.warnings[1].message
    assert notes.messages == []


# --- the delay-time velocity ------------------------------------------------------------

def test_pooled_velocity_is_the_inverse_variance_mean():
    common = np.arange(10.0, 40.0, 2.5)  # 12 reversed geophones: enough to stand alone
    pairs = [SimpleNamespace(v_pm=1500.0, dv_pm=30.0, common=common),
             SimpleNamespace(v_pm=1560.0, dv_pm=60.0, common=common)]
    v, dv, note = pooled_velocity(pairs, 500.0, 1400.0, 2)
    w = np.array([1 / 30.0**2, 1 / 60.0**2])
    assert v == pytest.approx((1500.0 * w[0] + 1560.0 * w[1]) / w.sum(), rel=1e-12)
    assert dv == pytest.approx(1 / math.sqrt(w.sum()), rel=1e-12)
    assert note is None
    # a few geophones and a velocity far from the line's: the line velocity is kept
    few = [SimpleNamespace(v_pm=3000.0, dv_pm=30.0, common=common[:3])]
    v, dv, note = pooled_velocity(few, 500.0, 1400.0, 2)
    assert v == 1400.0 and math.isnan(dv)
    assert (note.code, note.layer) == ("minus-time-velocity-rejected", 2)


# --- records ----------------------------------------------------------------------------

def test_every_code_has_a_hint_entry_and_notices_round_trip():
    assert all(isinstance(h, str) for h in HINTS.values())
    n = Notice("layer-not-reversed", "layer 2 ...", layer=2, shot_x=-1.0, side="right", hint="add shots")
    assert Notice.from_dict(json.loads(json.dumps(n.to_dict()))) == n
    assert str(n) == n.message


def test_layers_json_keeps_codes_and_reads_files_without_them():
    gx = np.arange(48) * 2.0
    shots = [-1.0, 95.0]
    sx = np.repeat(shots, gx.size)
    rx = np.tile(gx, len(shots))
    u = np.abs(rx - sx)
    t = np.minimum(u / 500.0, u / 2000.0 + 2 * 5.0 * math.sqrt(2000.0**2 - 500.0**2) / (500.0 * 2000.0))
    picks = Picks(sx, np.zeros(sx.size), rx, np.zeros(sx.size), t, np.full(sx.size, 2e-4))
    result = interpret_line(picks)
    d = json.loads(json.dumps(result.to_dict(), allow_nan=False))
    back = LayeredResult.from_dict(d)
    assert [w.code for w in back.warnings] == [w.code for w in result.warnings]
    assert [m.code for m in back.messages] == [m.code for m in result.messages]
    assert d["warnings"] == [w.message for w in result.warnings]  # readable text stays
    # a file written before the records: same texts, codes unknown
    del d["notices"]
    old = LayeredResult.from_dict(d)
    assert [w.message for w in old.warnings] == d["warnings"]
    assert {w.code for w in old.warnings} == {UNCLASSIFIED}
    np.testing.assert_array_equal(old.velocities, result.velocities)
    line = back.refractor(1)
    assert line.x.size > 0 and np.all(np.diff(line.x) > 0) and line.method == "plus-minus"
    np.testing.assert_allclose(line.elevation_m, line.surface_z - line.depth_m)


def test_station_spacing_receivers_only():
    # two geophones recording shots every 1 m: the stations are the shots unless the
    # geophones alone are asked for
    sx = np.arange(0.0, 10.0, 1.0)
    picks = Picks(np.repeat(sx, 2), np.zeros(20), np.tile([20.0, 26.0], 10), np.zeros(20))
    assert station_spacing(picks) == 1.0
    assert station_spacing(picks, receivers_only=True) == 6.0
    one = Picks(sx, np.zeros(10), np.full(10, 20.0), np.zeros(10))
    assert math.isnan(station_spacing(one, receivers_only=True, default=float("nan")))
