"""How an inversion honoured its boreholes: each one's contour depth without and with the
borehole rows, and whether the picks resist it.

A run with boreholes (:func:`tomo.api.invert` with ``boreholes``) is made twice: once
without them (the contour depth the picks alone give) and once with their rows
(:mod:`tomo.tomography.constraints`). Both fit the picks to chi2 about 1, so a borehole
the picks accept moves the surface at no cost in fit. A borehole the picks resist
shows in one of three ways, and is flagged ("check the borehole and the picks"):

- the surface does not reach it: the contour with the borehole rows lies more than
  :data:`REACH_SIGMAS` of the borehole's sigmas from the logged depth;
- the picks near it fit worse: the picks whose shot and geophone lie on either side of
  the borehole (their first arrivals pass under it) see their sum of squared
  residuals over sigma^2 rise by more than :data:`RESIST_CHI2`. One borehole is one
  more constraint; honouring a true one raises that sum by about chi-squared with one
  degree of freedom (the likelihood-ratio statistic of nested models, Wilks 1938, Ann.
  Math. Statist. 9), so a rise beyond its 99 % point says the picks object (a flag asks
  for work: one true borehole in a hundred flagged, not one in twenty);
- the picks as a whole fit worse: the constrained run ends more than the run's chi2
  tolerance above the unconstrained one (then every borehole is named: which one is
  to blame the picks cannot say).

What the picks cannot see they cannot object to. First arrivals go round a narrow slow
pocket, so a borehole logged too deep can be honoured by a pit a few cells wide at
little cost in fit: measured on the synthetic channel of the tests (noise seeds 1-6), a
borehole logged 5 m too deep on the channel's shoulder was met within 0.2 m by a pit
about 4 m wide while the picks under it fit worse by 14-74 in the sum (flagged by the
second rule every time); the true boreholes were met the same way with the sum changing
by -25 to +4 (never flagged). A borehole logged 5 m too deep at the channel's axis (22
m, below the depth of investigation there, 18-20 m) was honoured unflagged every time:
there the contour is the borehole's, not the picks' (the report marks the depth of
investigation).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, fields

import numpy as np

from ..core.errors import InputError
from .surface import contour_surface

__all__ = ["ContourTie", "BoreholeFit", "fit_boreholes", "REACH_SIGMAS", "RESIST_CHI2", "CHECK_MESSAGE"]

#: A surface farther than this many sigmas from a borehole did not reach it (about 95 %
#: of a normal error lies within two sigmas; common practice).
REACH_SIGMAS = 2.0
#: Largest rise of the near picks' sum of squared residuals over sigma^2 a borehole may
#: cause unflagged: the 99 % point of chi-squared with one degree of freedom, 6.63
#: (module docstring; Abramowitz & Stegun 1964, Handbook of Mathematical Functions,
#: table 26.8, from memory; scipy.stats.chi2.ppf(0.99, 1) = 6.635).
RESIST_CHI2 = 6.63
#: What a flagged borehole asks of the user.
CHECK_MESSAGE = "check the borehole and the picks"


@dataclass
class ContourTie:
    """One borehole in a constrained run (depths m below the ground, velocities m/s).

    ``depth_before_m``: the contour at the borehole without the borehole rows;
    ``depth_after_m``: with them; NaN where the column never reaches the contour.
    ``picks_near``: picks with shot and geophone on either side of the borehole;
    ``chi2_near_before``, ``chi2_near_after``: their chi2 in the two runs.
    ``reasons``: why it is flagged (empty: honoured).
    """

    label: str
    x: float
    depth_m: float
    sigma_m: float
    contour_m_s: float
    depth_before_m: float
    depth_after_m: float
    picks_near: int
    chi2_near_before: float
    chi2_near_after: float
    reasons: list = field(default_factory=list)

    @property
    def flagged(self):
        return bool(self.reasons)

    @property
    def error_before_m(self):
        """Contour minus logged depth without the borehole rows (positive: deeper)."""
        return self.depth_before_m - self.depth_m

    @property
    def error_after_m(self):
        """Contour minus logged depth with the borehole rows."""
        return self.depth_after_m - self.depth_m

    def to_dict(self):
        return {f.name: getattr(self, f.name) for f in fields(self)}

    @classmethod
    def from_dict(cls, d):
        names = {f.name for f in fields(cls)}
        values = {k: (float("nan") if v is None else v) for k, v in d.items() if k in names}
        values["reasons"] = list(d.get("reasons") or [])
        return cls(**values)


@dataclass
class BoreholeFit:
    """The boreholes of a constrained run against its unconstrained twin.

    Attributes
    ----------
    chi2_before, chi2_after : float
        The picks' chi2 without and with the borehole rows.
    iterations_before : int
        Iterations of the run without them.
    chi2_tolerance : float
        The runs' chi2 tolerance: a constrained run ending more than this above the
        unconstrained one flags every borehole.
    ties : list of ContourTie
    """

    chi2_before: float
    chi2_after: float
    iterations_before: int
    chi2_tolerance: float
    ties: list = field(default_factory=list)

    @property
    def flagged(self):
        return [t for t in self.ties if t.flagged]

    def to_dict(self):
        d = {f.name: getattr(self, f.name) for f in fields(self) if f.name != "ties"}
        d["ties"] = [t.to_dict() for t in self.ties]
        return d

    @classmethod
    def from_dict(cls, d):
        return cls(float(d["chi2_before"]), float(d["chi2_after"]), int(d["iterations_before"]),
                   float(d.get("chi2_tolerance", float("nan"))), [ContourTie.from_dict(t) for t in d.get("ties", [])])

    def lines(self):
        """Text lines for a person: a header, one line per borehole, the flags."""
        out = [f"boreholes: the picks' chi2 {self.chi2_before:.3f} without them, {self.chi2_after:.3f} with them",
               "borehole      x (m)  logged (m)  contour (m/s)  without (m)  with (m)  picks under it: chi2 "
               "without -> with"]
        for t in self.ties:
            before, after = _depth(t.depth_before_m, t.error_before_m), _depth(t.depth_after_m, t.error_after_m)
            out.append(f"{t.label:<10} {t.x:8.1f}  {t.depth_m:5.1f} ± {t.sigma_m:3.1f}  {t.contour_m_s:13.0f}  "
                       f"{before:>11}  {after:>8}  {t.picks_near:4d}: {t.chi2_near_before:.2f} -> "
                       f"{t.chi2_near_after:.2f}")
        for t in self.flagged:
            out.append(f"warning: borehole {t.label}: {'; '.join(t.reasons)}: {CHECK_MESSAGE}")
        return out


def _depth(value, error):
    return "-" if not math.isfinite(value) else f"{value:.1f} ({error:+.1f})"


def _contour_depth(run, velocity_m_s, x):
    """The run's ``velocity_m_s`` surface at x (m): depth, m (NaN where not reached)."""
    try:
        surface = contour_surface(run, velocity_m_s)
    except InputError:  # the model never reaches the velocity
        return float("nan")
    good = np.isfinite(surface.depth_m)
    if good.sum() < 2:
        return float("nan")
    return float(np.interp(x, surface.x[good], surface.depth_m[good]))


def _near_chi2(run, x):
    """Count and chi2 of the picks with shot and geophone on either side of x (m)."""
    p = run.picks
    s, g = np.asarray(p["source_x"], float), np.asarray(p["receiver_x"], float)
    near = (np.minimum(s, g) < x) & (np.maximum(s, g) > x)
    r = (np.asarray(p["observed_ms"]) - np.asarray(p["computed_ms"])) / np.asarray(p["sigma_ms"])
    return int(near.sum()), (float(np.mean(r[near] ** 2)) if near.any() else float("nan"))


def fit_boreholes(free, tied, points, chi2_tolerance):
    """The :class:`BoreholeFit` of a run ``tied`` to ``points``
    (:class:`tomo.tomography.constraints.ContourPoints`) and its twin ``free`` without them.

    Depths are read from :func:`tomo.analysis.surface.contour_surface` of each run,
    linear between model columns, as the report's borehole table reads them.
    """
    worse = float(tied.chi2) - float(free.chi2) > float(chi2_tolerance)
    ties = []
    for k in range(len(points)):
        x, v = float(points.x[k]), float(points.velocity_m_s[k])
        ground = float(np.interp(x, tied.terrain_x, tied.terrain_z))
        n, before_near = _near_chi2(free, x)
        _, after_near = _near_chi2(tied, x)
        t = ContourTie(points.label[k], x, ground - float(points.z[k]), float(points.sigma_m[k]), v,
                       _contour_depth(free, v, x), _contour_depth(tied, v, x), n, before_near, after_near)
        if not math.isfinite(t.depth_after_m):
            t.reasons.append(f"the model does not reach {v:.0f} m/s there")
        elif abs(t.error_after_m) > REACH_SIGMAS * t.sigma_m:
            t.reasons.append(f"the {v:.0f} m/s surface stays {t.error_after_m:+.1f} m from it (more than "
                             f"{REACH_SIGMAS:g} sigma)")
        if n * (after_near - before_near) > RESIST_CHI2:
            t.reasons.append(f"the {n} picks passing under it fit worse (chi2 {before_near:.2f} -> "
                             f"{after_near:.2f}: their sum of squared residuals / sigma^2 rises by "
                             f"{n * (after_near - before_near):.1f}, more than {RESIST_CHI2:g})")
        if worse:
            t.reasons.append(f"with the boreholes the picks fit worse (chi2 {free.chi2:.2f} -> {tied.chi2:.2f})")
        ties.append(t)
    return BoreholeFit(float(free.chi2), float(tied.chi2), int(free.iterations), float(chi2_tolerance), ties)
