"""The records of a delay-time refractor tied to boreholes (:mod:`tomo.layered.ties`),
and the depth formula's overburden velocity term they rest on.

They live apart from the computation so that :class:`tomo.layered.result.LayeredResult`
can hold and read them (``layers.json``: ``borehole_ties``) without importing it.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, fields

import numpy as np

__all__ = ["BoreholeTie", "RefractorTie", "overburden_term", "velocity_from_term", "TIE_SIGMAS"]

#: A borehole more than this many sigmas from the refractor is not satisfied by the
#: velocity (about 95 % of a normal error lies within two sigmas; common practice).
TIE_SIGMAS = 2.0


def overburden_term(v_m_s, v_refractor_m_s):
    """f(V) = V V_n / sqrt(V_n^2 - V^2), m/s: depth per unit time-depth below the layers
    above (the plus-minus depth formula, Hagedoorn 1959, Geophysical Prospecting 7)."""
    v, vn = np.asarray(v_m_s, float), np.asarray(v_refractor_m_s, float)
    return v * vn / np.sqrt(vn * vn - v * v)


def velocity_from_term(f_m_s, v_refractor_m_s):
    """The overburden velocity V (m/s) whose :func:`overburden_term` is ``f_m_s`` (m/s):
    V = f V_n / sqrt(V_n^2 + f^2)."""
    f, vn = np.asarray(f_m_s, float), np.asarray(v_refractor_m_s, float)
    return f * vn / np.sqrt(vn * vn + f * f)


@dataclass
class BoreholeTie:
    """One borehole against the delay-time refractor (depths m, velocities m/s).

    ``depth_before_m`` is the delay-time depth at the borehole before the tie,
    ``depth_velocity_m`` after the velocity alone, ``depth_after_m`` after the residual
    correction too; ``sigma_delay_m`` the delay-time depth's own uncertainty there.
    ``own_velocity_m_s`` ties this borehole alone (NaN: none can). ``used``: in the
    velocity fit. ``flagged``: the velocity leaves it more than :data:`TIE_SIGMAS`
    sigmas off. ``note`` says why a borehole was left out or not tied.
    """

    label: str
    x: float
    depth_m: float
    sigma_m: float
    depth_before_m: float = float("nan")
    sigma_delay_m: float = float("nan")
    own_velocity_m_s: float = float("nan")
    used: bool = False
    depth_velocity_m: float = float("nan")
    depth_after_m: float = float("nan")
    flagged: bool = False
    note: str = ""

    @property
    def tied(self):
        """The refractor reaches this borehole (it lies in the delay-time profile)."""
        return math.isfinite(self.depth_before_m)

    @property
    def misfit_m(self):
        """Logged depth minus the depth after the velocity: the residual correction, m."""
        return self.depth_m - self.depth_velocity_m

    def to_dict(self):
        return {f.name: getattr(self, f.name) for f in fields(self)}

    @classmethod
    def from_dict(cls, d):
        names = {f.name for f in fields(cls)}
        return cls(**{k: (float("nan") if v is None else v) for k, v in d.items() if k in names})


@dataclass
class RefractorTie:
    """A refractor tied to its boreholes.

    Attributes
    ----------
    refractor : int
        Interface number (1: the top of layer 2); the overburden velocity calibrated is
        that of layer ``refractor``.
    velocity_before_m_s, velocity_after_m_s : float
        That layer's velocity as the picks measured it and as the boreholes calibrate it.
    refractor_velocity_m_s : float
        V_n used by the plus-minus depths.
    own_velocity_spread_m_s : float
        Standard deviation of the own velocities of the boreholes in the fit (0 for one).
    rms_before_m, rms_velocity_m : float
        RMS of logged minus refractor depth over the tied boreholes before the tie and
        after the velocity alone (after the residual correction it is 0).
    boreholes : list of BoreholeTie
    """

    refractor: int
    velocity_before_m_s: float
    velocity_after_m_s: float
    refractor_velocity_m_s: float
    own_velocity_spread_m_s: float = float("nan")
    rms_before_m: float = float("nan")
    rms_velocity_m: float = float("nan")
    boreholes: list = field(default_factory=list)

    @property
    def velocity_change_pct(self):
        return 100.0 * (self.velocity_after_m_s / self.velocity_before_m_s - 1.0)

    @property
    def flagged(self):
        return [b for b in self.boreholes if b.flagged]

    def to_dict(self):
        d = {f.name: getattr(self, f.name) for f in fields(self) if f.name != "boreholes"}
        d["boreholes"] = [b.to_dict() for b in self.boreholes]
        return d

    @classmethod
    def from_dict(cls, d):
        names = {f.name for f in fields(cls)} - {"boreholes"}
        values = {k: (float("nan") if v is None else v) for k, v in d.items() if k in names}
        return cls(boreholes=[BoreholeTie.from_dict(b) for b in d.get("boreholes", [])], **values)

    def summary(self):
        """One line: the velocity change and how far the boreholes were from the refractor."""
        return (f"refractor {self.refractor} tied to {len([b for b in self.boreholes if b.tied])} borehole(s): "
                f"layer {self.refractor} velocity {self.velocity_before_m_s:.0f} -> {self.velocity_after_m_s:.0f} "
                f"m/s ({self.velocity_change_pct:+.1f} %, {self.basis()}); RMS mis-tie {self.rms_before_m:.2f} m "
                f"before, {self.rms_velocity_m:.2f} m after the velocity, 0 after the residual correction")

    def basis(self):
        """What the velocity rests on, in words."""
        used = sum(b.used for b in self.boreholes)
        if used == 0:
            return "no borehole fit for the velocity: unchanged"
        if used == 1:
            return "from 1 borehole"
        return f"from {used} boreholes whose own velocities spread {self.own_velocity_spread_m_s:.0f} m/s"
