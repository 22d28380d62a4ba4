"""Survey design: which candidate layout resolves a model's rock surface, and at what cost.

Before anyone goes to the field, each candidate layout (shot and geophone positions) is
tried on a model of the site (``tomo.survey.model``): synthetic picks through the model,
forward-modelled on a grid twice as fine as the inversion's (so the inversion does not
meet its own discretisation: the "inverse crime" of testing a method on data made by
the same operator; Wirgin 2004, "The inverse crime", arXiv math-ph/0401050, from
memory), with Gaussian noise of the stated sigma; then an inversion and a small
ensemble of the picks (:mod:`tomo.uncertainty.ensemble`; the members' band alone,
without the extremal bounds of ``tomo ensemble``, which would add a dozen inversions
per layout). Each layout is judged on the
*target*: the ``V`` m/s surface of the model, by default with V in the middle of the
velocity step at the model's deepest interface (the geometric mean of the velocities
just above and just below it, :func:`target_velocity`), so that the surface is that
interface.

A column of the *target region* (the stretch every layout should cover: the union of
the layouts' geophone spreads) is resolved when

- the layout's inversion reaches V there, above its depth of investigation
  (:func:`tomo.analysis.coverage.investigation_elevation`);
- the recovered surface lies within the tolerance of the model's (``|error| <= T``);
- the ensemble's 5-95 % band is no wider than 2 T (the picks pin the surface down).

A layout resolves the target when at least :data:`RESOLVED_SHARE` of the region's
columns are resolved; the cheapest such layout (fewest shots x geophones: the field
time of a hammer survey grows with both) is recommended.

Everything here is conditional on the model: a design is only as good as the guess of
the ground it is tried on, and the same caveats as for any tomogram apply (hidden
layers and velocity inversions are invisible to first arrivals).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from ..analysis.coverage import investigation_elevation
from ..core.errors import InputError
from ..survey.geometry import station_spacing
from ..survey.meshspec import auto_mesh_spec, inversion_mesh_spec
from ..tomography.mesh import build_mesh
from ..tomography.synth import synthetic_times

__all__ = ["LayoutResult", "DesignResult", "target_velocity", "model_surface", "design_picks", "target_region",
           "assess_layout", "cheapest", "RESOLVED_SHARE", "DESIGN_MEMBERS", "DEFAULT_TOLERANCE_M", "SURFACE_STEP_M"]

#: Share of the target region's columns that must be resolved (our choice: the last
#: tenth allows for the ends of a spread, where no ray goes deep).
RESOLVED_SHARE = 0.9
#: Members of each layout's ensemble: enough for a rough 5-95 % band (the band of 8
#: members is their range less the extremes' interpolation), few enough to try several
#: layouts in minutes.
DESIGN_MEMBERS = 8
#: Default tolerance on the depth of the rock surface, m (common practice for
#: foundation and cut design from refraction: about a metre).
DEFAULT_TOLERANCE_M = 1.0
#: Vertical step at which the model's surface is found, m.
SURFACE_STEP_M = 0.02


def target_velocity(model, contour_m_s=None):
    """The target's velocity (m/s) and a description of it.

    ``contour_m_s`` as given, or the geometric mean of the model's velocities just
    above and just below its deepest interface (median along the interface's points):
    the inversion's parameter is log-velocity and its smoothing spreads a step evenly
    in log v, so the geometric mean marks the step's middle (common practice)."""
    if contour_m_s is not None:
        value = float(contour_m_s)
        if not (math.isfinite(value) and value > 0):
            raise InputError(f"contour velocity {contour_m_s!r} must be a positive number of m/s", field="--contour")
        return value, f"the {value:.0f} m/s surface of the model"
    if len(model.layers) < 2:
        raise InputError("the model has one layer: no interface to resolve (give --contour V)",
                         path=model.path, field="layer")
    base = model.layers[-2].base
    x = base[:, 0]
    depth = np.array([np.max([lay.base_depth(xi) for lay in model.layers[:-1]]) for xi in x])
    above = model.velocity_at(x, np.maximum(depth - 1e-3, 0.0))
    below = model.velocity_at(x, depth + 1e-3)
    value = float(np.median(np.sqrt(above * below)))
    return value, f"the model's deepest interface (its {value:.0f} m/s surface)"


def model_surface(model, x, velocity_m_s, max_depth_m):
    """Depth (m) below the ground of the model's first ``velocity_m_s`` crossing going
    down at each ``x`` (m), to :data:`SURFACE_STEP_M`; NaN where not reached above
    ``max_depth_m``."""
    x = np.asarray(x, float)
    depth = np.arange(0.0, float(max_depth_m) + SURFACE_STEP_M, SURFACE_STEP_M)
    v = model.velocity_at(x[None, :], depth[:, None])
    fast = v >= velocity_m_s
    first = np.argmax(fast, axis=0)
    out = depth[first].astype(float)
    out[~fast.any(axis=0)] = np.nan
    return out


def design_picks(model, layout, terrain, noise_ms, seed, mesh_spec=None):
    """Synthetic picks for a layout: first arrivals through ``model`` on a grid with
    cells half the inversion's (the inversion's: half the station spacing), plus
    Gaussian noise of ``noise_ms`` (seeded); every pick's sigma is ``noise_ms``.

    Returns the Picks (times and sigmas in s)."""
    spacing = station_spacing(layout)
    spec = inversion_mesh_spec(spacing, mesh_spec)
    offsets = np.abs(layout.receiver_x - layout.source_x)
    full = auto_mesh_spec(spacing, float(offsets.max()), spec)
    xs = np.concatenate([layout.source_x, layout.receiver_x])
    fine = build_mesh(float(xs.min()), float(xs.max()), terrain, full.cell_m / 2.0, full.depth_m + full.cell_m,
                      refine=full.refine, padding=full.padding_m)
    times = synthetic_times(model, layout, fine).time_s
    rng = np.random.default_rng(int(seed))
    noisy = np.maximum(times + rng.normal(0.0, noise_ms * 1e-3, times.size), 1e-5)
    return layout.with_times(noisy, np.full(times.size, noise_ms * 1e-3))


def target_region(layouts):
    """(x_min, x_max), m: the union of the layouts' geophone spreads."""
    lo = min(float(p.receiver_x.min()) for p in layouts)
    hi = max(float(p.receiver_x.max()) for p in layouts)
    return lo, hi


@dataclass
class LayoutResult:
    """How one layout does on the target (module docstring).

    Attributes
    ----------
    name : str
    n_shots, n_geophones : int
    spacing_m, spread_m : float
        Geophone spacing and spread length, m.
    chi2 : float
        The central inversion's misfit.
    doi_depth_m : float
        Median depth of investigation below the ground over the region's columns the
        layout covers, m.
    target_depth_m : float
        Median depth of the model's target over the region, m.
    error_max_m, error_rms_m : float
        Largest and RMS difference recovered minus model over the columns where the
        recovered surface lies above the depth of investigation, m (NaN if none).
    band_width_m : float
        Median width of the ensemble's 5-95 % band there, m.
    resolved_share : float
        Share of the region's columns resolved.
    resolves : bool
    reason : str
        Why not (empty when it resolves).
    x, depth_true_m, depth_m, band_low_m, band_high_m, resolved : ndarray
        Per column of the region: position, model depth, recovered depth, band, verdict.
    run : object
        The layout's central run with its ensemble (not kept in tables).
    """

    name: str
    n_shots: int
    n_geophones: int
    spacing_m: float
    spread_m: float
    chi2: float
    doi_depth_m: float
    target_depth_m: float
    error_max_m: float
    error_rms_m: float
    band_width_m: float
    resolved_share: float
    resolves: bool
    reason: str
    x: np.ndarray = field(repr=False, default=None)
    depth_true_m: np.ndarray = field(repr=False, default=None)
    depth_m: np.ndarray = field(repr=False, default=None)
    band_low_m: np.ndarray = field(repr=False, default=None)
    band_high_m: np.ndarray = field(repr=False, default=None)
    resolved: np.ndarray = field(repr=False, default=None)
    run: object = field(repr=False, default=None)

    @property
    def cost(self):
        """Shots x geophones: the traces to record."""
        return self.n_shots * self.n_geophones

    def row(self):
        """The table row: plain numbers and text."""
        return {"layout": self.name, "shots": self.n_shots, "geophones": self.n_geophones, "traces": self.cost,
                "spacing_m": self.spacing_m, "spread_m": self.spread_m, "chi2": self.chi2,
                "doi_depth_m": self.doi_depth_m, "target_depth_m": self.target_depth_m,
                "error_max_m": self.error_max_m, "error_rms_m": self.error_rms_m,
                "band_width_m": self.band_width_m, "resolved_pct": 100.0 * self.resolved_share,
                "resolves": "yes" if self.resolves else "no", "reason": self.reason}


@dataclass
class DesignResult:
    """Every layout's result, the target and the recommendation."""

    layouts: list
    velocity_m_s: float
    target: str
    tolerance_m: float
    noise_ms: float
    region: tuple
    members: int
    choice: LayoutResult | None

    def summary(self):
        """Lines: the target, then the recommendation or a statement that none does."""
        lo, hi = self.region
        lines = [f"target: {self.target}, from x = {lo:g} to {hi:g} m, within {self.tolerance_m:g} m "
                 f"(picks with {self.noise_ms:g} ms noise; ensembles of {self.members} members)"]
        if self.choice is None:
            lines.append("no layout resolves the target within the tolerance: "
                         + "; ".join(f"{r.name}: {r.reason}" for r in self.layouts))
        else:
            lines.append(f"cheapest layout that resolves it: {self.choice.name} ({self.choice.n_shots} shots x "
                         f"{self.choice.n_geophones} geophones = {self.choice.cost} traces)")
        return lines


def _on_region(values, x, region_x):
    """Per-column values of a run read at the region's columns (NaN off the run's grid)."""
    return np.interp(region_x, x, values, left=np.nan, right=np.nan)


def _reason(share, covered, beneath, off, wide, missing):
    if share >= RESOLVED_SHARE:
        return ""
    parts = []
    if covered < 1.0:
        parts.append(f"covers {100 * covered:.0f} % of the region")
    if missing:
        parts.append(f"never reaches the target velocity in {100 * missing:.0f} % of it")
    if beneath:
        parts.append(f"target below the depth of investigation in {100 * beneath:.0f} % of it")
    if off:
        parts.append(f"off by more than the tolerance in {100 * off:.0f} %")
    if wide:
        parts.append(f"band wider than twice the tolerance in {100 * wide:.0f} %")
    return f"{100 * share:.0f} % of the region resolved: " + ", ".join(parts or ["too little resolved"])


def assess_layout(name, layout, run, surface, band, model, velocity_m_s, region, tolerance_m):
    """The :class:`LayoutResult` of a layout's central ``run``, its ``velocity_m_s``
    ``surface`` (a ``Surface``) and the ensemble's ``band`` (a ``SurfaceBand``); both
    None where the run never reaches the velocity."""
    cell = float(run.mesh.get("cell", abs(run.x[1] - run.x[0])))
    region_x = np.arange(region[0] + cell / 2, region[1], cell) if region[1] - region[0] > cell else \
        np.array([(region[0] + region[1]) / 2])
    x = np.asarray(run.x, float)
    ground = np.interp(x, run.terrain_x, run.terrain_z)
    doi = _on_region(ground - investigation_elevation(run), x, region_x)
    # the model's target to the depth of the region's length, whatever the layout's grid
    true = model_surface(model, region_x, velocity_m_s, max(region[1] - region[0], 10.0 * tolerance_m))
    inside = (region_x >= x[0] - cell / 2) & (region_x <= x[-1] + cell / 2)
    if surface is None or band is None:
        depth = low = high = np.full(region_x.size, np.nan)
    else:
        depth, low, high = (_on_region(a, x, region_x) for a in (surface.depth_m, band.depth_low_m,
                                                                   band.depth_high_m))
    with np.errstate(invalid="ignore"):
        seen = np.isfinite(depth)
        above = seen & np.isfinite(doi) & (depth <= doi)
        error = depth - true
        close = above & (np.abs(error) <= tolerance_m)
        narrow = (high - low) <= 2.0 * tolerance_m
        resolved = close & narrow & inside
    n = region_x.size
    share = float(resolved.mean())
    reason = _reason(share, float(inside.mean()), float((seen & ~above & inside).sum() / n),
                     float((above & ~close).sum() / n), float((close & ~narrow).sum() / n),
                     float((inside & ~seen).sum() / n))
    judged = above & np.isfinite(error)
    sources, _ = layout.sources()
    receivers, _ = layout.receivers()
    rx = np.unique(np.round(layout.receiver_x, 4))
    return LayoutResult(
        name=name, n_shots=len(sources), n_geophones=len(receivers),
        spacing_m=float(np.median(np.diff(rx))) if rx.size > 1 else math.nan, spread_m=float(np.ptp(rx)),
        chi2=float(run.chi2), doi_depth_m=float(np.nanmedian(doi)) if np.isfinite(doi).any() else math.nan,
        target_depth_m=float(np.nanmedian(true)) if np.isfinite(true).any() else math.nan,
        error_max_m=float(np.max(np.abs(error[judged]))) if judged.any() else math.nan,
        error_rms_m=float(np.sqrt(np.mean(error[judged] ** 2))) if judged.any() else math.nan,
        band_width_m=float(np.nanmedian((high - low)[judged])) if judged.any() else math.nan,
        resolved_share=share, resolves=share >= RESOLVED_SHARE, reason=reason, x=region_x, depth_true_m=true,
        depth_m=depth, band_low_m=low, band_high_m=high, resolved=resolved, run=run)


def cheapest(results):
    """The layout with the fewest traces among those that resolve the target (ties: the
    smaller band, then the name); None when none does."""
    good = [r for r in results if r.resolves]
    if not good:
        return None
    return min(good, key=lambda r: (r.cost, r.band_width_m if math.isfinite(r.band_width_m) else math.inf, r.name))

