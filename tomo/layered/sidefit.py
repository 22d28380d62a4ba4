"""The branch fit of a shot side as values: ``Branch``, ``SideFit`` and ``SideProblem``.

A branch is one straight line ``t = a + s |x|`` of a travel-time curve (the direct wave
or the head wave of one refractor; Telford, Geldart & Sheriff 1990, Applied Geophysics,
sec. 4.3); a side fit is the set of branches of the picks on one side of one shot
(:func:`tomo.layered.branches.fit_side`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from ..core.notices import notices_from_values

__all__ = ["Branch", "SideFit", "SideProblem", "finite_or_none", "nan_if_none"]


@dataclass
class Branch:
    """One straight branch ``t = intercept_s + slowness_s_m * |offset|``.

    Attributes
    ----------
    index : int
        1 for the branch nearest the shot.
    slowness_s_m : float
        Slope, s/m; ``velocity_m_s`` is its inverse (an apparent velocity where the
        refractor dips).
    intercept_s : float
        Time at zero offset, s.
    offset_min_m, offset_max_m : float
        |offset| range of its picks, m.
    n_picks : int
    rms_s : float
        Root-mean-square residual of its picks, s.
    slowness_sigma_s_m, intercept_sigma_s : float
        One-sigma uncertainties from the least-squares covariance with the pick sigma.
    """

    index: int
    slowness_s_m: float
    intercept_s: float
    offset_min_m: float
    offset_max_m: float
    n_picks: int
    rms_s: float
    slowness_sigma_s_m: float = float("nan")
    intercept_sigma_s: float = float("nan")

    @property
    def velocity_m_s(self):
        return 1.0 / self.slowness_s_m

    def time(self, offset_m):
        """Time (s) of the branch line at |offset| ``offset_m`` (m)."""
        return self.intercept_s + self.slowness_s_m * np.abs(np.asarray(offset_m, float))

    def to_dict(self):
        return {
            "index": self.index, "velocity_m_s": self.velocity_m_s,
            "slowness_s_m": self.slowness_s_m, "intercept_ms": self.intercept_s * 1e3,
            "slowness_sigma_s_m": finite_or_none(self.slowness_sigma_s_m),
            "intercept_sigma_ms": finite_or_none(self.intercept_sigma_s * 1e3),
            "offset_min_m": self.offset_min_m, "offset_max_m": self.offset_max_m,
            "n_picks": self.n_picks, "rms_ms": self.rms_s * 1e3,
        }

    @classmethod
    def from_dict(cls, d):
        return cls(index=int(d["index"]), slowness_s_m=float(d["slowness_s_m"]),
                   intercept_s=float(d["intercept_ms"]) * 1e-3,
                   offset_min_m=float(d["offset_min_m"]), offset_max_m=float(d["offset_max_m"]),
                   n_picks=int(d["n_picks"]), rms_s=float(d["rms_ms"]) * 1e-3,
                   slowness_sigma_s_m=nan_if_none(d.get("slowness_sigma_s_m")),
                   intercept_sigma_s=nan_if_none(d.get("intercept_sigma_ms")) * 1e-3)


def finite_or_none(v):
    """``float(v)``, or None for None, NaN and infinities (JSON has none of them)."""
    return float(v) if v is not None and math.isfinite(v) else None


def nan_if_none(v):
    """``float(v)``, NaN for None (the inverse of :func:`finite_or_none`)."""
    return float("nan") if v is None else float(v)


@dataclass
class SideFit:
    """The branch fit of one side of one shot.

    Attributes
    ----------
    shot_x, shot_z : float
        Shot position, m.
    side : int
        +1 for geophones at larger x than the shot ("right"), -1 for smaller x ("left").
    branches : list of Branch
        Nearest the shot first; empty when the side could not be fitted.
    crossovers_m : list of float
        |offset| where consecutive branch lines cross, m.
    pick_index : ndarray of int
        Indices (into the Picks given to :func:`fit_shots`) of the side's picks, sorted
        by |offset|.
    branch_of_pick : ndarray of int
        Branch index (1-based) of each of those picks; 0 when the side was not fitted.
    chosen_by : str
        "criterion", "count" or "breaks".
    bic : dict
        Branch count -> BIC for the counts tried.
    sigma_s : float
        Pick sigma used (median over the side), s.
    messages : list of Notice
        What went wrong or was changed on this side, one record each
        (:class:`tomo.core.notices.Notice`).
    """

    shot_x: float
    shot_z: float
    side: int
    branches: list = field(default_factory=list)
    crossovers_m: list = field(default_factory=list)
    pick_index: np.ndarray = field(default_factory=lambda: np.zeros(0, int))
    branch_of_pick: np.ndarray = field(default_factory=lambda: np.zeros(0, int))
    chosen_by: str = "criterion"
    bic: dict = field(default_factory=dict)
    sigma_s: float = float("nan")
    offsets_m: np.ndarray = field(default_factory=lambda: np.zeros(0))
    times_s: np.ndarray = field(default_factory=lambda: np.zeros(0))
    messages: list = field(default_factory=list)

    @property
    def side_name(self):
        """The side as a word: "right" or "left"."""
        return "right" if self.side > 0 else "left"

    @property
    def label(self):
        return f"shot at x = {self.shot_x:g} m, {self.side_name} side"

    @property
    def ok(self):
        return bool(self.branches)

    def residuals_s(self):
        """Pick time minus its branch line, s (NaN when not fitted)."""
        out = np.full(self.times_s.shape, np.nan)
        for b in self.branches:
            sel = self.branch_of_pick == b.index
            out[sel] = self.times_s[sel] - b.time(self.offsets_m[sel])
        return out

    def to_dict(self):
        return {
            "shot_x": self.shot_x, "shot_z": self.shot_z,
            "side": self.side_name,
            "branches": [b.to_dict() for b in self.branches],
            "crossovers_m": [float(c) for c in self.crossovers_m],
            "chosen_by": self.chosen_by,
            "bic": {str(k): float(v) for k, v in self.bic.items()},
            "sigma_ms": finite_or_none(self.sigma_s * 1e3),
            "pick_index": [int(i) for i in self.pick_index],
            "offset_m": [float(u) for u in self.offsets_m],
            "time_ms": [float(t) * 1e3 for t in self.times_s],
            "branch_of_pick": [int(b) for b in self.branch_of_pick],
            "messages": [str(m) for m in self.messages],
            "notices": [m.to_dict() for m in self.messages],
        }

    @classmethod
    def from_dict(cls, d):
        return cls(
            shot_x=float(d["shot_x"]), shot_z=float(d["shot_z"]),
            side=1 if d["side"] == "right" else -1,
            branches=[Branch.from_dict(b) for b in d["branches"]],
            crossovers_m=[float(c) for c in d["crossovers_m"]],
            pick_index=np.asarray(d["pick_index"], int),
            branch_of_pick=np.asarray(d["branch_of_pick"], int),
            chosen_by=d["chosen_by"], bic={int(k): float(v) for k, v in d["bic"].items()},
            sigma_s=nan_if_none(d.get("sigma_ms")) * 1e-3,
            offsets_m=np.asarray(d["offset_m"], float), times_s=np.asarray(d["time_ms"], float) * 1e-3,
            messages=notices_from_values(d.get("notices"), d.get("messages", [])),
        )


@dataclass
class SideProblem:
    """Picks of one side of one shot, ready to fit (internal hand-over)."""

    shot_x: float
    shot_z: float
    side: int
    pick_index: np.ndarray
    offset_m: np.ndarray
    time_s: np.ndarray
    sigma_s: np.ndarray
