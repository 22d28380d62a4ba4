"""The layered interpretation of a line as a value: ``LayeredResult`` (``layers.json``).

Its parts are small dataclasses: a :class:`Layer` per layer of the line table, a
:class:`ShotDepths` per shot side (intercept-time depths under the shot), a
:class:`ReversedPair` per reversed pair of branches (dipping-layer formula), the
delay-time :class:`~tomo.layered.profile.RefractorProfile`, and the warnings as
:class:`~tomo.core.notices.Notice` records. ``to_dict`` gives the ``layers.json``
content and ``from_dict`` reads it back, older files included (warnings kept as text
only come back with the code ``"unclassified"``).

Cautions that go with every result (see :data:`CAUTIONS`): the solution is not unique;
a layer slower than the one above it, or too thin to give first arrivals of its own,
does not show on the travel-time curves, and the depths below it come out wrong;
velocities do not identify rock types; calibrate against boreholes; designs need review
by a licensed professional under local codes.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, fields

import numpy as np

from ..core.notices import notices_from_values
from .profile import RefractorLine, RefractorProfile
from .sidefit import SideFit
from .tieresult import RefractorTie

__all__ = ["LayeredResult", "Layer", "ShotDepths", "ReversedPair", "CAUTIONS", "layered_result", "json_safe",
           "interface_depths"]

CAUTIONS = [
    "Layered refraction methods assume velocity increases with depth; a layer slower than "
    "the one above it (velocity inversion) gives no first arrivals and the depths below it "
    "come out too deep.",
    "A layer too thin to give first arrivals of its own (hidden layer) does not show on the "
    "travel-time curves; its presence makes the computed depths too shallow.",
    "The interpretation is not unique: other models fit the same times.",
    "Velocities do not identify rock types (ranges of materials overlap); calibrate against "
    "boreholes or test pits.",
    "Engineering designs based on these results need review by a licensed professional "
    "under local codes.",
]


def _optional_float(value):
    return None if value is None else float(value)


@dataclass
class Layer:
    """One layer of the line table, top to bottom.

    Attributes
    ----------
    velocity_m_s : float
        Layer velocity, m/s.
    velocity_sigma_m_s : float or None
        One sigma, m/s; None when not estimated (one side, or a velocity from the
        minus times).
    n_sides : int
        Shot sides whose branches saw the layer.
    reversed : bool or None
        Refractor (the layer's top) seen from both directions; None for the top layer.
    thickness_m, thickness_sigma_m : float or None
        Line-wide thickness from the intercept times and its one sigma, m; None for the
        last layer or where no side gives it.
    depth_top_m : float or None
        Depth of the layer's top below the ground, m (the sum of the thicknesses above).
    lateral_change : bool
        The layer's top changes along the line (a break fixed in place was merged, or the
        branches shooting one way are not parallel).
    branch_velocity_m_s : float or None
        The velocity from the branch slopes when the minus times replaced it, m/s.
    """

    velocity_m_s: float
    velocity_sigma_m_s: float | None = None
    n_sides: int = 0
    reversed: bool | None = None
    thickness_m: float | None = None
    thickness_sigma_m: float | None = None
    depth_top_m: float | None = None
    lateral_change: bool = False
    branch_velocity_m_s: float | None = None

    def to_dict(self):
        d = {f.name: getattr(self, f.name) for f in fields(self)}
        if d["branch_velocity_m_s"] is None:
            del d["branch_velocity_m_s"]  # only layers whose velocity was replaced carry it
        return d

    @classmethod
    def from_dict(cls, d):
        return cls(velocity_m_s=float(d["velocity_m_s"]),
                   velocity_sigma_m_s=_optional_float(d.get("velocity_sigma_m_s")),
                   n_sides=int(d.get("n_sides") or 0), reversed=d.get("reversed"),
                   thickness_m=_optional_float(d.get("thickness_m")),
                   thickness_sigma_m=_optional_float(d.get("thickness_sigma_m")),
                   depth_top_m=_optional_float(d.get("depth_top_m")),
                   lateral_change=bool(d.get("lateral_change", False)),
                   branch_velocity_m_s=_optional_float(d.get("branch_velocity_m_s")))


@dataclass
class ShotDepths:
    """Intercept-time depths under one shot side.

    Attributes
    ----------
    shot_x : float
        Shot position, m.
    side : str
        "right" or "left".
    depths_m : dict of int -> float
        Layer k (2..n) -> depth of its top below the shot, m.
    """

    shot_x: float
    side: str
    depths_m: dict

    def to_dict(self):
        return {"shot_x": self.shot_x, "side": self.side, "depths_m": {str(k): v for k, v in self.depths_m.items()}}

    @classmethod
    def from_dict(cls, d):
        return cls(float(d["shot_x"]), str(d["side"]),
                   {int(k): (float("nan") if v is None else float(v)) for k, v in d["depths_m"].items()})


@dataclass
class ReversedPair:
    """A refractor seen from a shot on its left and one on its right (dipping-layer formula).

    Attributes
    ----------
    layer : int
        Layer whose top is the refractor (2..n).
    shot_left_x, shot_right_x : float
        The shots, m.
    apparent_velocity_from_left_m_s, apparent_velocity_from_right_m_s : float
        Branch velocities shooting to larger and to smaller x, m/s.
    velocity_m_s, dip_deg : float
        True velocity, m/s, and dip, degrees (positive: deepening toward larger x).
    disagreement_pct : float
        Difference of the two apparent velocities, per cent of their mean.
    coverage_overlap_m : float
        Length of line both branches cover, m.
    perpendicular_depth_left_m, perpendicular_depth_right_m : float or None
        Depths perpendicular to the refractor under the two shots (first refractor only), m.
    vertical_depth_left_m, vertical_depth_right_m : float or None
        The same, vertical, m.
    """

    layer: int
    shot_left_x: float
    shot_right_x: float
    apparent_velocity_from_left_m_s: float
    apparent_velocity_from_right_m_s: float
    velocity_m_s: float
    dip_deg: float
    disagreement_pct: float
    coverage_overlap_m: float
    perpendicular_depth_left_m: float | None = None
    perpendicular_depth_right_m: float | None = None
    vertical_depth_left_m: float | None = None
    vertical_depth_right_m: float | None = None

    def to_dict(self):
        # the depths exist for the first refractor only; other pairs leave them out
        return {f.name: getattr(self, f.name) for f in fields(self) if getattr(self, f.name) is not None}

    @classmethod
    def from_dict(cls, d):
        names = {f.name for f in fields(cls)}
        return cls(**{k: (int(v) if k == "layer" else _optional_float(v)) for k, v in d.items() if k in names})


@dataclass
class LayeredResult:
    """A line's layered interpretation (the content of ``layers.json``).

    Attributes
    ----------
    layers : list of Layer
        Top to bottom.
    sides : list of SideFit
        Branch fits per shot side.
    layer_of_branch : list of list of int
        For each side, the line layer (1-based) of each branch; 0 when unmatched.
    shot_depths : list of ShotDepths
        Per shot side, the intercept-time depths under the shot.
    dips : list of ReversedPair
        Per reversed pair and refractor: shots, apparent velocities, true velocity, dip.
    profile : RefractorProfile or None
        Delay-time refractor depths under the geophones (:mod:`tomo.layered.delay`).
    warnings, messages : list of Notice
        Warnings about the interpretation; per-shot problems with the input.
    cautions : list of str
    options : dict
        Settings used.
    ties : list of RefractorTie
        Delay-time refractors tied to boreholes (:mod:`tomo.layered.ties`); empty when
        none were given.
    """

    layers: list
    sides: list
    layer_of_branch: list
    shot_depths: list = field(default_factory=list)
    dips: list = field(default_factory=list)
    profile: RefractorProfile | None = None
    warnings: list = field(default_factory=list)
    messages: list = field(default_factory=list)
    cautions: list = field(default_factory=lambda: list(CAUTIONS))
    options: dict = field(default_factory=dict)
    ties: list = field(default_factory=list)

    @property
    def velocities(self):
        """Layer velocities top to bottom, m/s (array)."""
        return np.array([lay.velocity_m_s for lay in self.layers], float)

    def contour_m_s(self, refractor=None):
        """The iso-velocity (m/s) that stands for refractor ``refractor`` (1: the base of
        the top layer; default the deepest) in a tomogram: the mean of the layer
        velocities above and below it (common practice); None with one layer."""
        v = self.velocities
        if v.size < 2:
            return None
        k = v.size - 1 if refractor is None else min(max(int(refractor), 1), v.size - 1)
        return float(0.5 * (v[k - 1] + v[k]))

    @property
    def thicknesses(self):
        """Thicknesses of the layers above the last, m (array; NaN where unknown)."""
        return np.array([np.nan if lay.thickness_m is None else lay.thickness_m for lay in self.layers[:-1]], float)

    velocities_m_s = velocities
    thicknesses_m = thicknesses

    def refractor(self, k, method="plus-minus"):
        """The delay-time refractor of interface ``k`` (1: the top of layer 2) as arrays
        (:class:`~tomo.layered.profile.RefractorLine`: x, depth, elevation, uncertainty in
        m, sorted by x); empty without a profile."""
        if self.profile is None:
            return RefractorLine.empty(k)
        return self.profile.refractor_line(k, method)

    @property
    def refractors(self):
        """Interface numbers the delay-time profile maps (sorted)."""
        return [] if self.profile is None else sorted({int(r) for r in self.profile.refractor})

    def to_dict(self):
        """Plain JSON-ready content (NaN and infinities become None)."""
        return json_safe(self._to_dict())

    def _to_dict(self):
        sides = []
        for fit, layers in zip(self.sides, self.layer_of_branch):
            d = fit.to_dict()
            d["layer_of_branch"] = [int(k) for k in layers]
            sides.append(d)
        return {
            "layers": [lay.to_dict() for lay in self.layers],
            "shots": sides,
            "shot_depths": [s.to_dict() for s in self.shot_depths],
            "dips": [d.to_dict() for d in self.dips],
            "delay_time_profile": None if self.profile is None else self.profile.to_dict(),
            # the text for people and older readers; the records (code, layer, hint) below
            "warnings": [str(w) for w in self.warnings],
            "messages": [str(m) for m in self.messages],
            "cautions": list(self.cautions),
            "options": dict(self.options),
            "notices": {"warnings": [w.to_dict() for w in self.warnings],
                        "messages": [m.to_dict() for m in self.messages]},
            "borehole_ties": [t.to_dict() for t in self.ties],
        }

    @classmethod
    def from_dict(cls, d):
        """A result from ``layers.json`` content (or the copy a run file keeps)."""
        sides = [SideFit.from_dict(s) for s in d.get("shots", [])]
        layer_of_branch = [list(s.get("layer_of_branch", [])) for s in d.get("shots", [])]
        prof = d.get("delay_time_profile")
        records = d.get("notices") or {}
        return cls(
            layers=[Layer.from_dict(lay) for lay in d["layers"]], sides=sides, layer_of_branch=layer_of_branch,
            shot_depths=[ShotDepths.from_dict(s) for s in d.get("shot_depths", [])],
            dips=[ReversedPair.from_dict(x) for x in d.get("dips", [])],
            profile=None if prof is None else RefractorProfile.from_dict(prof),
            warnings=notices_from_values(records.get("warnings"), d.get("warnings", [])),
            messages=notices_from_values(records.get("messages"), d.get("messages", [])),
            cautions=list(d.get("cautions", CAUTIONS)), options=dict(d.get("options", {})),
            ties=[RefractorTie.from_dict(t) for t in d.get("borehole_ties") or []],
        )


def layered_result(value):
    """A :class:`LayeredResult` from a result or its ``layers.json`` content (a run file
    keeps that content); None for None or an empty dict."""
    if not value:
        return None
    return value if isinstance(value, LayeredResult) else LayeredResult.from_dict(value)


def json_safe(value):
    """A copy of nested dicts/lists with NaN and infinities as None (JSON has neither)."""
    if isinstance(value, (float, np.floating)):
        value = float(value)
        return value if math.isfinite(value) else None
    if isinstance(value, (np.integer,)):
        return int(value)
    if isinstance(value, dict):
        return {k: json_safe(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [json_safe(v) for v in value]
    return value


def interface_depths(result, x):
    """Depth (m, below ground) of the top of each layer 2..n at distances ``x`` (m).

    The delay-time (plus-minus) refractor where the profile covers ``x``, the intercept-time depths
    under the shots (linear between shots, constant beyond) elsewhere, the line-wide
    table where neither exists. Returns an array (n_layers - 1, x.size),
    non-decreasing downward.
    """
    x = np.atleast_1d(np.asarray(x, float))
    n = len(result.layers)
    out = np.empty((n - 1, x.size))
    for k in range(2, n + 1):
        default = result.layers[k - 1].depth_top_m
        pts = {}
        for s in result.shot_depths:
            if k in s.depths_m and math.isfinite(s.depths_m[k]):
                pts.setdefault(round(s.shot_x, 4), []).append(s.depths_m[k])
        if pts:
            xs = np.array(sorted(pts))
            ds = np.array([np.mean(pts[v]) for v in xs])
            d = np.interp(x, xs, ds)
        else:
            d = np.full(x.size, default)
        prof = result.profile
        if prof is not None:
            # the plus-minus depths, as in the refractor CSV file (GRM only where no plus-minus)
            px, pd = prof.refractor_depths(k - 1)
            if px.size >= 2:
                inside = (x >= px.min()) & (x <= px.max())
                d = np.where(inside, np.interp(x, px, pd), d)
            elif px.size == 1:
                d = np.where(np.abs(x - px[0]) < 1e-9, pd[0], d)
        out[k - 2] = d
    out = np.maximum.accumulate(np.maximum(out, 0.0), axis=0) if n > 1 else out
    return out
