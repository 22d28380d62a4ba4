"""Pick QC.

Sources:
- Reciprocity of travel times in an isotropic medium: t(A->B) = t(B->A)
  (Telford, Geldart & Sheriff 1990, Applied Geophysics, sec. 4.3, from memory).
- Tolerance: "reciprocal times should agree within about 1-2 ms or a few per cent"
  (common practice, from memory).
- Head-wave closed form t = min(x/V1, x/V2 + t_i) (Telford et al. 1990, sec. 4.3).
"""

import math

import numpy as np
import pytest
from helpers import pairs

from tomo.layered.qc import check_line
from tomo.survey.picks import Picks


def two_layer(x):
    # 500 over 2000 m/s, 5 m: t_i = 2 h sqrt(V2^2 - V1^2)/(V1 V2)
    ti = 2 * 5.0 * math.sqrt(2000.0**2 - 500.0**2) / (500.0 * 2000.0)
    x = np.abs(x)
    return np.minimum(x / 500.0, x / 2000.0 + ti)


def line(shots, gx, noise=2e-4, seed=0):
    sx, rx = pairs(shots, gx)
    t = two_layer(rx - sx) + np.random.default_rng(seed).normal(0, noise, sx.size)
    return Picks(sx, np.zeros(sx.size), rx, np.zeros(sx.size), t, np.full(sx.size, noise), line=np.arange(sx.size) + 2)


def test_counts_spacing_and_clean_line():
    gx = np.arange(0.0, 96.0, 2.0)
    picks = line([0.0, 48.0, 94.0], gx)
    report = check_line(picks)
    assert (report.n_shots, report.n_geophones, report.n_picks) == (3, 48, 3 * 48 - 3)
    assert report.spacing_m == pytest.approx(2.0)
    # shots on geophones: every pair of shots has reciprocal picks
    assert len(report.reciprocal_pairs) == 3
    for p in report.reciprocal_pairs:
        # reciprocity: the difference is pick noise only (0.2 ms sigma; 2 sqrt 2 sigma < 0.6 ms)
        assert abs(p["difference_ms"]) < 0.6 * 2
        assert not p["flagged"]
    assert report.outliers == []
    assert report.unreversed_shots == []
    text = "\n".join(report.summary_lines())
    assert "3 shots, 48 geophones, 141 picks" in text
    assert "geophone spacing 2 m" in text


def test_reciprocal_flag_follows_the_tolerance():
    gx = np.arange(0.0, 96.0, 2.0)
    picks = line([0.0, 94.0], gx, noise=0.0)
    k = np.flatnonzero((picks.source_x == 0.0) & (picks.receiver_x == 94.0))[0]
    t_ba = picks.time_s[(picks.source_x == 94.0) & (picks.receiver_x == 0.0)][0]
    # the pair's time is ~66 ms: 3 % of it (2.0 ms) and 2 ms nearly tie; 1.5 ms is inside both
    picks.time_s[k] = t_ba + 1.5e-3
    (p,) = check_line(picks).reciprocal_pairs
    assert p["difference_ms"] == pytest.approx(1.5, abs=1e-9)
    assert not p["flagged"]
    picks.time_s[k] = t_ba + 3.0e-3
    (p,) = check_line(picks).reciprocal_pairs
    assert p["flagged"]
    # a looser tolerance (option) lets it pass
    (p,) = check_line(picks, reciprocal_tol_ms=4.0).reciprocal_pairs
    assert not p["flagged"]
    # per-cent rule: 10 % of ~66 ms is 6.6 ms
    (p,) = check_line(picks, reciprocal_tol_pct=10.0).reciprocal_pairs
    assert not p["flagged"] and p["tolerance_ms"] == pytest.approx(0.1 * 0.5 * (p["time_ab_ms"] + p["time_ba_ms"]))


def test_outlier_found_with_its_line():
    gx = np.arange(0.0, 96.0, 2.0)
    picks = line([0.0, 94.0], gx, seed=2)
    k = np.flatnonzero((picks.source_x == 0.0) & (picks.receiver_x == 60.0))[0]
    picks.time_s[k] += 4e-3  # a mispick 20 sigmas late
    report = check_line(picks)
    assert [o["pick_index"] for o in report.outliers] == [k]
    assert report.outliers[0]["line"] == picks.line[k]
    assert report.outliers[0]["residual_ms"] == pytest.approx(4.0, abs=0.6)
    assert report.outlier_mask[k] and report.outlier_mask.sum() == 1


def test_unreversed_shot_and_decreasing_times():
    gx = np.arange(0.0, 48.0, 2.0)
    picks = line([0.0], gx)
    report = check_line(picks)
    assert report.unreversed_shots == [0.0]
    assert "shots with no reversed partner: 0 m" in "\n".join(report.summary_lines())
    # a clean drop of 3 ms between neighbours is reported
    picks2 = line([0.0, 46.0], gx, noise=1e-4)
    k = np.flatnonzero((picks2.source_x == 0.0) & (picks2.receiver_x == 20.0))[0]
    picks2.time_s[k + 1:k + 3] -= 3e-3  # two picks early: a step, not one outlier
    report2 = check_line(picks2)
    assert report2.decreasing or report2.outliers


def test_reciprocal_pair_between_geophones():
    # shots half-way between geophones: the time at the other shot is interpolated
    # between the two geophones around it; over a straight branch that is exact, so
    # reciprocity holds to the pick noise (0 here) plus the 1 mm-order curvature at a
    # crossover (not reached: the shots are 44 m apart, beyond the 12.9 m crossover)
    gx = np.arange(0.0, 96.0, 2.0)
    picks = line([1.0, 45.0], gx, noise=0.0)
    (p,) = check_line(picks).reciprocal_pairs
    assert (p["shot_a_x"], p["shot_b_x"]) == (1.0, 45.0)
    assert abs(p["difference_ms"]) < 1e-6
    assert p["time_ab_ms"] == pytest.approx(two_layer(44.0) * 1e3, abs=1e-6)
