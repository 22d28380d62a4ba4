"""Branch fitting of travel-time curves.

Sources:
- [TGS] Telford, Geldart & Sheriff (1990), Applied Geophysics, sec. 4.3 (from memory):
  first arrivals over layers with velocity increasing downward are the lower envelope
  of straight lines, t = x/V_n + t_n.
- numpy.polyfit as an independent least-squares line fitter.
"""

import math

import numpy as np
import pytest

from tomo.layered.branches import SideProblem, fit_shots, fit_side, shot_sides
from tomo.survey.picks import Picks


def envelope(u, velocities, intercepts):
    """[TGS]: first arrivals are the least of the branch lines."""
    return np.min([u / v + t for v, t in zip(velocities, intercepts)], axis=0)


def side(u, t, sigma=2e-4, shot_x=0.0, sign=1):
    u = np.asarray(u, float)
    return SideProblem(shot_x, 0.0, sign, np.arange(u.size), u, np.asarray(t, float), np.full(u.size, sigma))


V3 = [500.0, 1500.0, 3000.0]
# intercepts of 4 m over 10 m, from [TGS]'s n-layer formula
T3 = [0.0,
      2 * 4 * math.sqrt(1500**2 - 500**2) / (500 * 1500),
      2 * 4 * math.sqrt(3000**2 - 500**2) / (500 * 3000) + 2 * 10 * math.sqrt(3000**2 - 1500**2) / (1500 * 3000)]


def test_three_branches_found_with_noise():
    # 48 geophones at 2 m, 0.2 ms noise: the criterion picks three branches, their
    # velocities within 2 % (the slope of a 13-pick branch has a 0.5 % standard error at
    # this noise) and intercepts within 0.5 ms (about 3 intercept sigmas).
    u = np.arange(1, 49) * 2.0
    t = envelope(u, V3, T3) + np.random.default_rng(3).normal(0, 2e-4, u.size)
    fit = fit_side(side(u, t))
    assert fit.chosen_by == "criterion"
    assert len(fit.branches) == 3
    for b, v, ti in zip(fit.branches, V3, T3):
        assert b.velocity_m_s == pytest.approx(v, rel=0.02)
        assert b.intercept_s == pytest.approx(ti, abs=5e-4)
    # concave: slowness decreases from each branch to the next
    s = [b.slowness_s_m for b in fit.branches]
    assert all(a > b for a, b in zip(s[:-1], s[1:]))
    # membership: each pick on the branch that is truly first, except within one
    # spacing of a true crossover where noise may swap it
    true = np.argmin([u / v + ti for v, ti in zip(V3, T3)], axis=0) + 1
    cross = [(T3[k + 1] - T3[k]) / (1 / V3[k] - 1 / V3[k + 1]) for k in range(2)]
    far = np.all([np.abs(u - c) > 2.0 for c in cross], axis=0)
    assert np.array_equal(fit.branch_of_pick[far], true[far])
    assert [round(c, 0) for c in fit.crossovers_m] == [round(c, 0) for c in cross]


def test_one_straight_line_stays_one_branch():
    # pure noise around one line: no break passes the criterion
    u = np.arange(1, 49) * 2.5
    for seed in range(10):
        t = u / 800.0 + np.random.default_rng(seed).normal(0, 5e-4, u.size)
        assert len(fit_side(side(u, t, 5e-4)).branches) == 1


def test_split_search_is_the_exact_least_squares_optimum():
    # The dynamic programme must find the least chi-squared two-branch split; check it
    # against brute force over every break with numpy.polyfit (an independent fitter),
    # with the joint refit turned off so the split fit itself is compared.
    u = np.arange(1, 21) * 3.0
    t = envelope(u, [600.0, 2400.0], [0.0, 0.02]) + np.random.default_rng(5).normal(0, 3e-4, u.size)
    fit = fit_side(side(u, t, 3e-4), n_branches=2, through_origin=False, refine=False)
    best = np.inf
    for k in range(2, u.size - 1):
        sse = 0.0
        for part in (slice(0, k), slice(k, None)):
            coef = np.polyfit(u[part], t[part], 1)
            sse += float(np.sum((np.polyval(coef, u[part]) - t[part]) ** 2))
        slopes = [np.polyfit(u[p], t[p], 1)[0] for p in (slice(0, k), slice(k, None))]
        if slopes[0] * 0.98 > slopes[1]:
            best = min(best, sse)
    got = sum(float(np.sum((b.time(u[fit.branch_of_pick == b.index]) - t[fit.branch_of_pick == b.index]) ** 2))
              for b in fit.branches)
    assert got == pytest.approx(best, rel=1e-9)


def test_branch_count_and_breaks_overridable():
    u = np.arange(1, 49) * 2.0
    t = envelope(u, V3, T3) + np.random.default_rng(4).normal(0, 2e-4, u.size)
    assert len(fit_side(side(u, t), n_branches=2).branches) == 2
    fit = fit_side(side(u, t), breaks_m=[11.0, 37.0])
    assert fit.chosen_by == "breaks"
    expected = [int((u <= 11).sum()), int(((u > 11) & (u <= 37)).sum()), int((u > 37).sum())]
    assert [b.n_picks for b in fit.branches] == expected


def test_too_many_branches_requested():
    u = np.array([2.0, 4.0, 6.0, 8.0, 10.0, 12.0])
    t = envelope(u, [500.0, 1500.0], [0.0, 0.008])
    fit = fit_side(side(u, t), n_branches=5)
    assert fit.ok and len(fit.branches) <= 3
    assert any(m.code == "branch-count-reduced" for m in fit.messages)


def test_too_few_picks_and_decreasing_times():
    fit = fit_side(side([2.0, 4.0], [0.004, 0.008]))
    assert not fit.ok and fit.messages[0].code == "side-too-few-picks"
    fit = fit_side(side([2.0, 4.0, 6.0, 8.0], [0.02, 0.015, 0.01, 0.005]))
    assert not fit.ok and fit.messages[0].code == "side-times-decrease"


def test_two_picks_branch_warned():
    # a first branch resting on two picks is allowed but warned (too few picks)
    u = np.arange(1, 25) * 3.0
    t = envelope(u, [300.0, 2000.0], [0.0, 0.012])
    fit = fit_side(side(u, t), breaks_m=[6.0])
    assert fit.branches[0].n_picks == 2
    assert any(m.code == "branch-few-picks" and m.branch == 1 for m in fit.messages)


def test_shot_sides_and_per_side_options():
    gx = np.arange(0.0, 48.0, 2.0)
    sx = np.full(gx.size, 23.0)
    u = np.abs(gx - sx)
    t = envelope(u, [500.0, 2000.0], [0.0, 0.015])
    picks = Picks(sx, np.zeros(sx.size), gx, np.zeros(sx.size), t, None)
    sides = shot_sides(picks)
    assert [s.side for s in sides] == [-1, 1]
    assert np.all(np.diff(sides[0].offset_m) > 0)
    fits = fit_shots(picks, n_branches={(23.0, "left"): 1})
    assert [len(f.branches) for f in fits] == [1, 2]


def test_curve_bending_the_wrong_way_is_warned():
    # a faster branch followed by a slower one is not a layered ground with velocity
    # increasing downward ([TGS]); the concave fit cannot follow it and says so
    u = np.arange(1, 41) * 2.0
    t = np.where(u < 30, u / 1500, 30 / 1500 + (u - 30) / 800) + np.random.default_rng(0).normal(0, 2e-4, u.size)
    fit = fit_side(side(u, t))
    assert any(m.code == "times-bend-wrong-way" for m in fit.messages)
    # a normal concave curve does not trigger it
    t3 = envelope(u, V3, T3) + np.random.default_rng(1).normal(0, 2e-4, u.size)
    assert not any(m.code == "times-bend-wrong-way" for m in fit_side(side(u, t3)).messages)
