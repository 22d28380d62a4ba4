"""Pick quality control: what a person checks in the first ten seconds.

- counts of shots, geophones and picks, and the geophone spacing found;
- reciprocal pairs: the time from shot A to a geophone at B against the time from B to
  a geophone at A; in an isotropic ground they are equal (reciprocity), so their
  difference measures the picking error. Flagged beyond a tolerance, by default
  2 ms or 3 % of the time, whichever is larger: "reciprocal times should agree within
  about 1-2 ms or a few per cent" (common practice, from memory);
- outliers: picks that break from their shot side's branches (the concave
  piecewise-linear fit of :mod:`tomo.layered.branches`) by more than ``outlier_sigma`` times the
  larger of the pick sigma and the side's robust residual scatter (1.4826 times the
  median absolute residual, the normal-consistent MAD, Hampel 1974, JASA 69);
- times that fall with offset between neighbouring picks by more than three pick sigmas;
- shots with no reversed partner: no other shot that records the ground between the
  two from the opposite direction.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..survey.geometry import station_positions, station_spacing
from .branches import DEFAULT_SIGMA_MS, OUTLIER_SIGMA, fit_side_robust, shot_sides

__all__ = ["QCReport", "check_line", "RECIPROCAL_TOL_MS", "RECIPROCAL_TOL_PCT", "OUTLIER_SIGMA"]

#: Reciprocal-time tolerance, ms (common practice, from memory: "about 1-2 ms").
RECIPROCAL_TOL_MS = 2.0
#: Reciprocal-time tolerance, per cent of the mean time (common practice: "a few per cent").
RECIPROCAL_TOL_PCT = 3.0


@dataclass
class QCReport:
    """Result of :func:`check_line`; ``summary_lines()`` gives the text a person reads.

    Attributes
    ----------
    n_shots, n_geophones, n_picks : int
    spacing_m : float
        Median geophone spacing, m.
    spacing_range_m : (float, float)
        Smallest and largest gap between neighbouring geophones, m.
    shots : list of dict
        Per shot: ``x``, ``n_left``, ``n_right`` (picks each side).
    reciprocal_pairs : list of dict
        ``shot_a_x``, ``shot_b_x``, ``time_ab_ms``, ``time_ba_ms``, ``difference_ms``,
        ``tolerance_ms``, ``flagged``.
    outliers : list of dict
        ``pick_index``, ``line``, ``shot_x``, ``receiver_x``, ``time_ms``, ``residual_ms``.
    decreasing : list of dict
        Neighbouring picks whose time falls with offset beyond three sigmas.
    unreversed_shots : list of float
        Shot positions (m) with no reversed partner.
    side_messages : list of Notice
        Sides that could not be fitted, and why (:class:`tomo.core.notices.Notice`).
    settings : dict
    """

    n_shots: int
    n_geophones: int
    n_picks: int
    spacing_m: float
    spacing_range_m: tuple
    shots: list
    reciprocal_pairs: list = field(default_factory=list)
    outliers: list = field(default_factory=list)
    decreasing: list = field(default_factory=list)
    unreversed_shots: list = field(default_factory=list)
    side_messages: list = field(default_factory=list)
    settings: dict = field(default_factory=dict)
    outlier_mask: np.ndarray = field(default_factory=lambda: np.zeros(0, bool))

    @property
    def n_flagged_reciprocals(self):
        return sum(1 for p in self.reciprocal_pairs if p["flagged"])

    @property
    def n_warnings(self):
        return (self.n_flagged_reciprocals + len(self.outliers) + len(self.decreasing)
                + len(self.unreversed_shots) + len(self.side_messages))

    def summary_lines(self):
        """The QC summary as lines of text (times in ms, distances in m)."""
        lo, hi = self.spacing_range_m
        out = [f"{self.n_shots} shots, {self.n_geophones} geophones, {self.n_picks} picks",
               f"geophone spacing {self.spacing_m:g} m"
               + ("" if abs(hi - lo) < 1e-6 else f" (gaps {lo:g} to {hi:g} m)")]
        shots = ", ".join(f"{s['x']:g} ({s['n_left']}L/{s['n_right']}R)" for s in self.shots)
        out.append(f"shots at x (picks left/right): {shots}")
        tol = self.settings
        if self.reciprocal_pairs:
            # a summary line, then only the pairs a person must look at: the flagged ones,
            # or the worst three when none is flagged (the full list is in to_dict())
            diffs = np.abs([p["difference_ms"] for p in self.reciprocal_pairs])
            flagged = [p for p in self.reciprocal_pairs if p["flagged"]]
            out.append(f"reciprocal pairs: {len(diffs)}, |difference| median {np.median(diffs):.2f} ms, "
                       f"max {diffs.max():.2f} ms; {len(flagged)} beyond {tol['reciprocal_tol_ms']:g} ms "
                       f"or {tol['reciprocal_tol_pct']:g} % (whichever is larger)")
            shown = flagged or sorted(self.reciprocal_pairs, key=lambda p: -abs(p["difference_ms"]))[:3]
            if not flagged:
                out.append("  largest differences:")
            for p in shown:
                flag = "  FLAG" if p["flagged"] else ""
                out.append(f"  shots {p['shot_a_x']:g} <-> {p['shot_b_x']:g} m: {p['time_ab_ms']:.2f} vs "
                           f"{p['time_ba_ms']:.2f} ms, difference {p['difference_ms']:+.2f} ms{flag}")
        else:
            out.append("reciprocal pairs: none (no shot has a geophone at another shot's position)")
        if self.outliers:
            out.append(f"outliers ({len(self.outliers)}; more than {tol['outlier_sigma']:g} sigma from their branch):")
            for o in self.outliers:
                where = f"line {o['line']}: " if o["line"] is not None else ""
                out.append(f"  {where}shot {o['shot_x']:g} m, geophone {o['receiver_x']:g} m: {o['time_ms']:.2f} ms, "
                           f"{o['residual_ms']:+.2f} ms from the branch")
        else:
            out.append("outliers: none")
        for d in self.decreasing:
            out.append(f"time falls with offset: shot {d['shot_x']:g} m, geophones {d['x_from']:g} -> {d['x_to']:g} m "
                       f"({d['time_from_ms']:.2f} -> {d['time_to_ms']:.2f} ms)")
        if self.unreversed_shots:
            out.append("shots with no reversed partner: " + ", ".join(f"{x:g} m" for x in self.unreversed_shots))
        else:
            out.append("every shot has a reversed partner")
        out.extend(m.message for m in self.side_messages)
        return out

    def to_dict(self):
        return {"n_shots": self.n_shots, "n_geophones": self.n_geophones, "n_picks": self.n_picks,
                "spacing_m": self.spacing_m, "spacing_range_m": list(self.spacing_range_m),
                "shots": self.shots, "reciprocal_pairs": self.reciprocal_pairs, "outliers": self.outliers,
                "decreasing": self.decreasing, "unreversed_shots": self.unreversed_shots,
                "side_messages": [m.message for m in self.side_messages],
                "side_notices": [m.to_dict() for m in self.side_messages], "settings": self.settings}


def _time_at(xs, ts, x, spacing):
    """Time at x (m) from one shot side's picks: an exact geophone, else linear between
    geophones at most one spacing apart around x; NaN otherwise."""
    order = np.argsort(xs)
    xs, ts = xs[order], ts[order]
    hit = np.abs(xs - x) <= 0.05 * spacing
    if np.any(hit):
        return float(ts[hit][0])
    k = np.searchsorted(xs, x)
    if 0 < k < xs.size and xs[k] - xs[k - 1] <= 1.01 * spacing:
        return float(np.interp(x, xs[k - 1:k + 1], ts[k - 1:k + 1]))
    return float("nan")


def check_line(picks, reciprocal_tol_ms=RECIPROCAL_TOL_MS, reciprocal_tol_pct=RECIPROCAL_TOL_PCT,
               outlier_sigma=OUTLIER_SIGMA, sigma_ms=DEFAULT_SIGMA_MS):
    """Quality-control a line of picks.

    Parameters
    ----------
    picks : Picks
    reciprocal_tol_ms, reciprocal_tol_pct : float
        A reciprocal pair is flagged when its difference exceeds both (module docstring).
    outlier_sigma : float
        Threshold in robust sigmas for outliers.
    sigma_ms : float
        Pick sigma (ms) when the picks carry none.

    Returns
    -------
    QCReport
    """
    src, src_index = picks.sources()
    gx = station_positions(picks, receivers_only=True)
    gaps = np.diff(gx)
    spacing = station_spacing(picks, receivers_only=True, default=float("nan"))
    spacing_range = (float(gaps.min()), float(gaps.max())) if gaps.size else (float("nan"), float("nan"))
    shots = []
    for k, (sx, _) in enumerate(src):
        off = picks.offset[src_index == k]
        shots.append({"x": float(sx), "n_left": int((off < 0).sum()), "n_right": int((off > 0).sum())})
    report = QCReport(len(src), int(gx.size), len(picks), spacing, spacing_range, shots,
                      settings={"reciprocal_tol_ms": reciprocal_tol_ms, "reciprocal_tol_pct": reciprocal_tol_pct,
                                "outlier_sigma": outlier_sigma, "sigma_ms": sigma_ms,
                                "pick_sigma_from_file": picks.sigma_s is not None})

    # reciprocal pairs
    sp = spacing if np.isfinite(spacing) else 1.0
    for a in range(len(src)):
        for b in range(a + 1, len(src)):
            xa, xb = src[a, 0], src[b, 0]
            if abs(xb - xa) < 1e-6:
                continue
            sel_a, sel_b = src_index == a, src_index == b
            t_ab = _time_at(picks.receiver_x[sel_a], picks.time_s[sel_a], xb, sp)
            t_ba = _time_at(picks.receiver_x[sel_b], picks.time_s[sel_b], xa, sp)
            if not (np.isfinite(t_ab) and np.isfinite(t_ba)):
                continue
            diff = t_ab - t_ba
            tol = max(reciprocal_tol_ms * 1e-3, reciprocal_tol_pct / 100 * 0.5 * (t_ab + t_ba))
            report.reciprocal_pairs.append({
                "shot_a_x": float(xa), "shot_b_x": float(xb), "time_ab_ms": t_ab * 1e3, "time_ba_ms": t_ba * 1e3,
                "difference_ms": diff * 1e3, "tolerance_ms": tol * 1e3, "flagged": bool(abs(diff) > tol)})

    # outliers from the branches, with one refit without them
    mask = np.zeros(len(picks), bool)
    for problem in shot_sides(picks, sigma_ms=sigma_ms):
        fit, flagged, resid = fit_side_robust(problem, outlier_sigma=outlier_sigma)
        if not fit.ok:
            report.side_messages.extend(fit.messages)
            continue
        for i in np.flatnonzero(flagged):
            k = int(problem.pick_index[i])
            mask[k] = True
            report.outliers.append({
                "pick_index": k, "line": None if picks.line is None else int(picks.line[k]),
                "shot_x": problem.shot_x, "receiver_x": float(picks.receiver_x[k]),
                "time_ms": float(picks.time_s[k]) * 1e3, "residual_ms": float(resid[i]) * 1e3})
        # times falling with offset between neighbours (beyond three sigmas)
        t, u = problem.time_s, problem.offset_m
        drop = t[:-1] - t[1:]
        bad = np.flatnonzero(drop > 3 * np.sqrt(problem.sigma_s[:-1] ** 2 + problem.sigma_s[1:] ** 2))
        for i in bad:
            if flagged[i] or flagged[i + 1]:
                continue
            report.decreasing.append({"shot_x": problem.shot_x,
                                      "x_from": problem.shot_x + problem.side * float(u[i]),
                                      "x_to": problem.shot_x + problem.side * float(u[i + 1]),
                                      "time_from_ms": float(t[i]) * 1e3, "time_to_ms": float(t[i + 1]) * 1e3})
    report.outlier_mask = mask
    report.unreversed_shots = _unreversed(picks, src, src_index)
    return report


def _unreversed(picks, src, src_index):
    """Shots with no partner recording the ground between them from the other side."""
    geo = [set(np.round(picks.receiver_x[src_index == k], 3)) for k in range(len(src))]
    out = []
    for a in range(len(src)):
        partnered = False
        for b in range(len(src)):
            if a == b:
                continue
            lo, hi = sorted((src[a, 0], src[b, 0]))
            between = {x for x in geo[a] & geo[b] if lo < x < hi}
            if len(between) >= 2:
                partnered = True
                break
        if not partnered:
            out.append(float(src[a, 0]))
    return out
