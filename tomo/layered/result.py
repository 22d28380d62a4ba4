"""The layered interpretation of a line as a value: ``LayeredResult`` (``layers.json``).

Cautions that go with every result (see :data:`CAUTIONS`): the solution is not unique;
a layer slower than the one above it, or too thin to give first arrivals of its own,
does not show on the travel-time curves, and the depths below it come out wrong;
velocities do not identify rock types; calibrate against boreholes; designs need review
by a licensed professional under local codes.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from .branches import SideFit
from .profile import RefractorProfile

__all__ = ["LayeredResult", "CAUTIONS", "json_safe", "interface_depths"]

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


@dataclass
class LayeredResult:
    """A line's layered interpretation (the content of ``layers.json``).

    Attributes
    ----------
    layers : list of dict
        Top to bottom: ``velocity_m_s``, ``thickness_m`` (None for the last layer),
        ``depth_top_m``, ``velocity_sigma_m_s``, ``thickness_sigma_m``, ``reversed``
        (refractor seen from both directions), ``n_sides`` (shot sides that saw it),
        ``lateral_change`` (its top changes along the line: a break fixed in place was
        merged, or the branches shooting one way are not parallel; the velocity is then
        from the minus times where those are reliable, the branch one kept as
        ``branch_velocity_m_s``).
    sides : list of SideFit
        Branch fits per shot side.
    layer_of_branch : list of list of int
        For each side, the line layer (1-based) of each branch; 0 when unmatched.
    shot_depths : list of dict
        Per shot side: ``shot_x``, ``side``, ``depths_m`` {layer k: depth of the top of
        layer k below the shot, m} from the intercept times.
    dips : list of dict
        Per reversed pair and refractor: shots, apparent velocities, true velocity, dip.
    profile : RefractorProfile or None
        Delay-time refractor depths under the geophones (:mod:`tomo.delay`).
    warnings, messages : list of str
        Warnings about the interpretation; per-shot problems with the input.
    cautions : list of str
    options : dict
        Settings used.
    """

    layers: list
    sides: list
    layer_of_branch: list
    shot_depths: list = field(default_factory=list)
    dips: list = field(default_factory=list)
    profile: object = None
    warnings: list = field(default_factory=list)
    messages: list = field(default_factory=list)
    cautions: list = field(default_factory=lambda: list(CAUTIONS))
    options: dict = field(default_factory=dict)

    @property
    def velocities_m_s(self):
        return np.array([lay["velocity_m_s"] for lay in self.layers])

    @property
    def thicknesses_m(self):
        return np.array([np.nan if lay["thickness_m"] is None else lay["thickness_m"] for lay in self.layers[:-1]])

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
            "layers": [dict(lay) for lay in self.layers],
            "shots": sides,
            "shot_depths": [dict(s, depths_m={str(k): v for k, v in s["depths_m"].items()}) for s in self.shot_depths],
            "dips": [dict(d) for d in self.dips],
            "delay_time_profile": None if self.profile is None else self.profile.to_dict(),
            "warnings": list(self.warnings),
            "messages": list(self.messages),
            "cautions": list(self.cautions),
            "options": dict(self.options),
        }

    @classmethod
    def from_dict(cls, d):
        sides = [SideFit.from_dict(s) for s in d.get("shots", [])]
        layer_of_branch = [list(s.get("layer_of_branch", [])) for s in d.get("shots", [])]
        shot_depths = [dict(s, depths_m={int(k): v for k, v in s["depths_m"].items()}) for s in d.get("shot_depths", [])]
        prof = d.get("delay_time_profile")
        return cls(
            layers=[dict(lay) for lay in d["layers"]], sides=sides, layer_of_branch=layer_of_branch,
            shot_depths=shot_depths, dips=[dict(x) for x in d.get("dips", [])],
            profile=None if prof is None else RefractorProfile.from_dict(prof),
            warnings=list(d.get("warnings", [])), messages=list(d.get("messages", [])),
            cautions=list(d.get("cautions", CAUTIONS)), options=dict(d.get("options", {})),
        )


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
        default = result.layers[k - 1]["depth_top_m"]
        pts = {}
        for s in result.shot_depths:
            if k in s["depths_m"] and math.isfinite(s["depths_m"][k]):
                pts.setdefault(round(s["shot_x"], 4), []).append(s["depths_m"][k])
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
