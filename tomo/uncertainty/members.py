"""What makes one member of an ensemble differ from the others, and running one member.

Each member is a full inversion to the target misfit (``tomo.tomography.inversion``) that
differs from the others only in what the picks cannot decide (randomise-then-optimise,
or randomised maximum likelihood: Oliver, He & Reynolds 1996, "Conditioning permeability
fields to pressure data", ECMOR V; Bardsley et al. 2014, SIAM J. Sci. Comput. 36):

- the pick noise: every pick redrawn as the central member's computed time plus
  N(0, sigma) with the pick's own sigma (a parametric bootstrap: Efron & Tibshirani
  1993, An Introduction to the Bootstrap, ch. 6; data drawn around the fitted model,
  not around the observed picks, whose noise is already in them, so a redrawn set is
  as noisy as the observed one and the same target misfit applies);
- the starting model: the layered interpretation with each layer velocity and each
  interface depth scaled within its uncertainty (the layered result's one sigma, or
  :data:`VELOCITY_SPREAD` / :data:`DEPTH_SPREAD` where it gives none), or the 1-D
  gradient start with v0 and k scaled within :data:`GRADIENT_SPREAD`;
- the regularisation: the ratio of horizontal to vertical smoothing drawn log-uniformly
  over a factor of :data:`RATIO_RANGE` about the default, and the chi2 target drawn
  between 1 - 2 sqrt(2/n) and 1 (n picks; chi2 of n picks scatters by sqrt(2/n), so
  lower targets, rougher models, are as consistent with the noise as the default);
  with the weight set by the discrepancy principle, the ratio and the target are the
  regularisation's free choices;
- the grid: the mesh origin shifted by a random fraction of a cell in x and z, so no
  feature is tied to one placement of the cell edges.

Member 0 is the central member: the picks as they are, the default settings, the
unshifted grid. Everything a member draws comes from its own seed
(``numpy.random.SeedSequence(seed).spawn``), so the same seed gives the same members on
any number of workers, in any order.
"""

from __future__ import annotations

import math
import time as _time
from dataclasses import asdict, dataclass, replace

import numpy as np

from ..layered.result import interface_depths
from ..tomography.inversion import invert
from ..tomography.mesh import Mesh
from ..tomography.settings import InversionSettings
from ..tomography.starting import paint_layer_table, smooth_start

__all__ = ["MemberSpec", "MemberTask", "MemberResult", "member_specs", "run_member", "resample_cells",
           "VELOCITY_SPREAD", "DEPTH_SPREAD", "GRADIENT_SPREAD", "RATIO_RANGE"]

#: One-sigma relative spread of a layer velocity where the layered result gives none
#: (common practice: layer velocities from branch slopes are good to about 5 %).
VELOCITY_SPREAD = 0.05
#: One-sigma relative spread of an interface depth where the layered result gives
#: none (common practice: intercept-time depths are good to about 10 %).
DEPTH_SPREAD = 0.10
#: One-sigma relative spread of v0 and k of the gradient start.
GRADIENT_SPREAD = 0.10
#: The horizontal/vertical smoothing ratio ranges over this factor either way.
RATIO_RANGE = 4.0


@dataclass(frozen=True)
class MemberSpec:
    """What member ``index`` draws (recorded in the ensemble file).

    Attributes
    ----------
    index : int
    seed : int
        The member's own seed (its noise and draws).
    start : {"layered", "gradient"}
    velocity_factor : tuple of float
        Factors on the layer velocities (layered start) or on (v0, k) (gradient start).
    depth_factor : tuple of float
        Factors on the interface depths (layered start; empty otherwise).
    ratio_factor : float
        Factor on smooth_x / smooth_z (smooth_x times its root, smooth_z divided by it).
    chi2_target : float
    shift_x, shift_z : float
        Mesh origin shift, fractions of a cell (x to the left, z upward).
    noise : bool
        The picks are redrawn within their sigma.
    """

    index: int
    seed: int
    start: str
    velocity_factor: tuple
    depth_factor: tuple
    ratio_factor: float
    chi2_target: float
    shift_x: float
    shift_z: float
    noise: bool

    def to_dict(self):
        d = asdict(self)
        d["velocity_factor"], d["depth_factor"] = list(self.velocity_factor), list(self.depth_factor)
        return d

    @classmethod
    def from_dict(cls, d):
        return cls(**{**d, "velocity_factor": tuple(d["velocity_factor"]), "depth_factor": tuple(d["depth_factor"])})


def member_specs(n_members, seed, n_picks, layered=None, layered_share=0.5):
    """The specs of members 0 .. n_members - 1 (module docstring).

    Parameters
    ----------
    n_members : int
    seed : int
    n_picks : int
    layered : LayeredResult, optional
        The layered interpretation (its layer count and sigmas); None: every member
        starts from the gradient.
    layered_share : float
        Chance that a member (after the central one) starts from the layered model
        rather than the gradient.
    """
    children = np.random.SeedSequence(int(seed)).spawn(int(n_members))
    low_target = max(0.5, 1.0 - 2.0 * math.sqrt(2.0 / max(n_picks, 1)))
    specs = []
    for index, child in enumerate(children):
        member_seed = int(child.generate_state(1)[0])
        rng = np.random.default_rng(child)
        use_layered = layered is not None and (index == 0 or rng.uniform() < layered_share)
        if index == 0:
            n_v = len(layered.layers) if use_layered else 2
            n_d = len(layered.layers) - 1 if use_layered else 0
            specs.append(MemberSpec(0, member_seed, "layered" if use_layered else "gradient", (1.0,) * n_v,
                                    (1.0,) * n_d, 1.0, 1.0, 0.0, 0.0, False))
            continue
        if use_layered:
            v_sig = [(lay.velocity_sigma_m_s or VELOCITY_SPREAD * lay.velocity_m_s) / lay.velocity_m_s
                     for lay in layered.layers]
            d_sig = [(lay.thickness_sigma_m / lay.thickness_m) if lay.thickness_sigma_m and lay.thickness_m
                     else DEPTH_SPREAD for lay in layered.layers[:-1]]
            v_fac = tuple(float(np.exp(rng.normal(0.0, s))) for s in v_sig)
            d_fac = tuple(float(np.exp(rng.normal(0.0, s))) for s in d_sig)
        else:
            v_fac = tuple(float(np.exp(rng.normal(0.0, GRADIENT_SPREAD))) for _ in range(2))
            d_fac = ()
        ratio = float(np.exp(rng.uniform(-1.0, 1.0) * math.log(RATIO_RANGE)))
        target = float(rng.uniform(low_target, 1.0))
        specs.append(MemberSpec(index, member_seed, "layered" if use_layered else "gradient", v_fac, d_fac,
                                ratio, target, float(rng.uniform()), float(rng.uniform()), True))
    return specs


@dataclass
class MemberTask:
    """Everything a worker needs to run one member (plain data, pickled to the worker)."""

    spec: MemberSpec
    picks: object
    mesh: Mesh
    predicted_s: np.ndarray | None
    settings: InversionSettings
    layered: object = None
    gradient: tuple | None = None
    smoothing_cells: float = 2.0
    #: processes for the member's own shot solves: the central member runs alone, before
    #: the others, and uses them all; the rest run one to a worker
    shot_workers: int = 1
    #: boreholes every member honours (``tomo.tomography.constraints.ContourPoints``)
    points: object = None


@dataclass
class MemberResult:
    """One finished member: its model on the ensemble's grid and its fit.

    ``velocity`` and ``coverage`` are resampled onto the central member's cells (m/s,
    NaN in the air; ray length, m). ``chi2`` is the misfit to the picks as observed,
    ``chi2_fitted`` to the member's own redrawn picks.
    """

    index: int
    velocity: np.ndarray
    coverage: np.ndarray
    chi2: float
    chi2_fitted: float
    iterations: int
    converged: bool
    stop_reason: str
    wall_s: float
    run: object = None


def shifted_mesh(mesh, shift_x, shift_z):
    """The mesh with its origin moved left by ``shift_x`` and up by ``shift_z`` cells,
    one cell longer and deeper so it still covers everything the original does."""
    if shift_x == 0 and shift_z == 0:
        return mesh
    return Mesh(x0=mesh.x0 - shift_x * mesh.cell, z_top=mesh.z_top + shift_z * mesh.cell, cell=mesh.cell,
                nx=mesh.nx + 1, nz=mesh.nz + 1, refine=mesh.refine, terrain=mesh.terrain)


def _start_velocity(task, mesh):
    spec = task.spec
    if spec.start == "layered":
        velocities = task.layered.velocities * np.asarray(spec.velocity_factor)
        tops = interface_depths(task.layered, mesh.x) * np.asarray(spec.depth_factor)[:, None]
        tops = np.maximum.accumulate(tops, axis=0)
        return smooth_start(paint_layer_table(velocities, tops, mesh), mesh, task.smoothing_cells)
    v0, k = task.gradient
    fv, fk = spec.velocity_factor
    return np.where(mesh.ground, v0 * fv + k * fk * np.maximum(mesh.depth, 0.0), np.nan)


def _member_settings(settings, spec, workers=1):
    root = math.sqrt(spec.ratio_factor)
    return replace(settings, smooth_x=settings.smooth_x * root, smooth_z=settings.smooth_z / root,
                   chi2_target=spec.chi2_target, workers=workers)


def resample_cells(source_x, source_z, values, target_x, target_z):
    """Values on one cell grid read at another's cell centres (m), bilinear in (x, z)
    between the source's cell centres, NaN where a source neighbour is NaN (air) or
    outside it."""
    from scipy.interpolate import RegularGridInterpolator

    # the source's z decreases downward: flip to increasing for the interpolator
    z = np.asarray(source_z)[::-1]
    f = RegularGridInterpolator((z, np.asarray(source_x)), np.asarray(values, float)[::-1],
                                bounds_error=False, fill_value=np.nan)
    zz, xx = np.meshgrid(target_z, target_x, indexing="ij")
    return f(np.column_stack([zz.ravel(), xx.ravel()])).reshape(zz.shape)


def run_member(task):
    """Run one member (a Dask task or a plain call); returns its :class:`MemberResult`."""
    t0 = _time.perf_counter()
    spec = task.spec
    picks = task.picks
    if spec.noise:
        rng = np.random.default_rng(spec.seed)
        sigma = (picks.sigma_s if picks.sigma_s is not None
                 else np.full(len(picks), task.settings.default_sigma_ms * 1e-3))
        picks = picks.with_times(task.predicted_s + rng.normal(0.0, 1.0, len(picks)) * sigma, sigma)
    mesh = shifted_mesh(task.mesh, spec.shift_x, spec.shift_z)
    run = invert(picks, mesh, _start_velocity(task, mesh), _member_settings(task.settings, spec, task.shot_workers),
                 points=task.points)
    observed = np.asarray(task.picks.time_s, float) * 1e3
    chi2 = float(np.mean(((observed - run.picks["computed_ms"]) / run.picks["sigma_ms"]) ** 2))
    base = task.mesh
    if mesh is base:
        velocity, coverage = run.velocity, run.coverage
    else:
        logv = resample_cells(run.x, run.z, np.log(run.velocity), base.x, base.z)
        velocity = np.where(base.ground, np.exp(logv), np.nan)
        coverage = np.where(base.ground, np.nan_to_num(resample_cells(run.x, run.z, run.coverage, base.x, base.z)),
                            0.0)
        # edge cells the shifted grid's air reaches: the nearest ground value above or below
        velocity = _fill_columns(velocity, base.ground)
    return MemberResult(spec.index, velocity, coverage, chi2, float(run.chi2), run.iterations, bool(run.converged),
                        run.stop_reason, _time.perf_counter() - t0, run if spec.index == 0 else None)


def _fill_columns(velocity, ground):
    """Ground cells left NaN by resampling (next to the ground surface, where the
    shifted grid's cell was air) take the nearest ground value in their column."""
    out = velocity.copy()
    missing = ground & ~np.isfinite(out)
    for j in np.flatnonzero(missing.any(axis=0)):
        col = out[:, j]
        ok = np.flatnonzero(np.isfinite(col))
        if ok.size == 0:
            continue
        for i in np.flatnonzero(missing[:, j]):
            col[i] = col[ok[np.argmin(np.abs(ok - i))]]
    return out
