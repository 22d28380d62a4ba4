"""Resolution tests: how much of a known perturbation the line's picks bring back.

A test adds a known perturbation of log-velocity to the run's final model, computes
synthetic picks through it at the run's geometry with noise drawn from each pick's own
sigma, and inverts them with the run's settings from the run's final model. What the
inversion puts back, the recovered perturbation ``ln v_recovered - ln v_final``, is
compared with the true one cell by cell. This is the checkerboard test as Zelt (1998,
"Lateral velocity resolution from three-dimensional seismic refraction data", Geophys.
J. Int. 135, 1101-1112; from memory) applies it: the pattern is superposed on the final
model, not on a simple background, because in a nonlinear problem the rays, and hence
what can be resolved, follow the model itself; the inversion uses the same settings and
the same noise as the real one. Rawlinson & Spakman (2016, "On the use of sensitivity
tests in seismic tomography", Geophys. J. Int. 206; from memory) warn how far such a
test can be read: it shows what the line can bring back of that pattern, at that size
and strength, and says nothing of structure of another shape; a well-recovered
checkerboard is no proof the real model is right.

Two patterns:

- the checkerboard (:func:`checker_pattern`): squares of side ``size_m`` alternating
  between +a and -a in log-velocity, a = ln(1 + amplitude/100), laid out along the line
  from the first geophone and down from the ground. The squares are sinusoidal
  (a sin(pi x'/L) sin(pi d/L)), not sharp-edged: a smooth inversion cannot rebuild a
  sharp edge, and a sharp square caps the correlation of any smooth recovery at
  (2 sqrt(2)/pi)^2 = 0.81 in two dimensions (the correlation of a square wave with its
  first harmonic, squared), which would blur what the test measures;
- a target (:func:`target_pattern`): the bodies of a model file (``tomo.survey.model``)
  measured against the file's own layers, ln v(with bodies) - ln v(layers only), added
  to the final model: "would a soft zone 30 % slower than the ground around it, here,
  show?".

The regularisation is measured from the final model (the inversion's reference model
m_r is the final model), so the roughness penalised is the perturbation's alone: with
m_r = 0, as in the real run, the smoothing would reshape the background too and that
change would be counted as recovered perturbation. In the linear limit the recovered
perturbation is then the resolution matrix applied to the true one.

The recovery score of each cell compares the true (t) and recovered (r) perturbations
over a square window centred on it, one checker wide (at least :data:`MIN_WINDOW_CELLS`
cells), over the ground cells in it:

- the semblance S = sum (t + r)^2 / (2 sum (t^2 + r^2)) (Zelt 1998, from memory): 1
  for an exact recovery, 0.5 when nothing or something unrelated is recovered, and
  lowered by a wrong amplitude as well as a wrong shape (a recovery of the right shape
  at half the amplitude scores 0.9, at a fifth 0.69). Cells below
  :data:`SEMBLANCE_THRESHOLD` count as not resolved (Zelt's threshold, from memory);
- the correlation sum t r / sqrt(sum t^2 sum r^2) (about zero, not about the window's
  mean: the true pattern is centred by construction), which sees the shape only.

Windows where the true pattern is nearly nothing (RMS below :data:`QUIET_FRACTION` of
its peak, e.g. far from a target's bodies) get no score (NaN): there was nothing to
recover there.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, fields

import numpy as np

from ..analysis.coverage import covered, investigation_elevation
from ..core.errors import InputError
from ..survey.picks import Picks
from ..survey.terrain import Terrain
from ..tomography.inversion import invert
from ..tomography.mesh import Mesh
from ..tomography.passes import forward_pass
from ..tomography.settings import InversionSettings

__all__ = ["ResolutionRecord", "checker_pattern", "target_pattern", "recovery_scores", "resolution_test",
           "check_checker", "run_mesh", "run_picks", "run_settings", "trusted_cells", "feature_size",
           "SEMBLANCE_THRESHOLD", "DEFAULT_AMPLITUDE_PCT", "MAX_AMPLITUDE_PCT", "MIN_WINDOW_CELLS", "QUIET_FRACTION"]

#: Cells whose semblance is below this are not resolved (Zelt 1998, from memory).
SEMBLANCE_THRESHOLD = 0.7
#: Default checker amplitude, % of velocity: strong enough to stand above pick noise of
#: a few tenths of a millisecond over a few metres, weak enough to keep the rays close
#: to the final model's (common practice: 5-10 %).
DEFAULT_AMPLITUDE_PCT = 10.0
#: Largest amplitude, %: beyond it the perturbation bends the rays away from the final
#: model's and the test no longer measures the run's resolution.
MAX_AMPLITUDE_PCT = 50.0
#: The score window is at least this many cells wide, so a score rests on several cells.
MIN_WINDOW_CELLS = 3
#: Windows whose true-pattern RMS is below this fraction of its peak get no score.
QUIET_FRACTION = 0.1


@dataclass
class ResolutionRecord:
    """A resolution test of a run, as stored in the run file's ``/resolution`` group.

    Attributes
    ----------
    kind : {"checker", "target"}
    size_m : float
        Checker side, m (for a target: the smallest side of its bodies' boxes).
    amplitude_pct : float
        Checker amplitude, % of velocity (NaN for a target).
    window_m : float
        Side of the score window, m.
    threshold : float
        Semblance below which a cell is not resolved.
    seed : int
        Seed of the noise added to the synthetic picks.
    true, recovered : ndarray (nz, nx)
        True and recovered perturbation of ln(velocity) (NaN in the air).
    semblance, correlation : ndarray (nz, nx)
        Per-cell recovery scores (module docstring); NaN where there is no score.
    chi2_start, chi2 : float
        Misfit of the synthetic picks to the final model (where the test inversion
        starts) and to the recovered model.
    iterations : int
    converged : bool
    stop_reason : str
    target_file : str or None
    notes : list of str
    """

    kind: str
    size_m: float
    amplitude_pct: float
    window_m: float
    threshold: float
    seed: int
    true: np.ndarray
    recovered: np.ndarray
    semblance: np.ndarray
    correlation: np.ndarray
    chi2_start: float
    chi2: float
    iterations: int
    converged: bool
    stop_reason: str
    target_file: str | None = None
    notes: list = field(default_factory=list)

    @property
    def unresolved(self):
        """Boolean (nz, nx): cells with a score below the threshold."""
        with np.errstate(invalid="ignore"):
            return np.isfinite(self.semblance) & (self.semblance < self.threshold)

    def label(self):
        """``checker 8 m, +-10 %`` or ``target site.toml``."""
        if self.kind == "checker":
            return f"checker {self.size_m:g} m, +-{self.amplitude_pct:g} %"
        return f"target {self.target_file or 'model'}"

    def summary(self, run):
        """Scores over the run's well-covered scored cells (:func:`trusted_cells`):
        their number, median semblance and correlation, the share resolved, and the
        amplitude recovered (the least-squares slope sum t r / sum t^2 of recovered on
        true perturbation)."""
        cells = trusted_cells(run) & np.isfinite(self.semblance)
        n = int(cells.sum())
        if n == 0:
            return {"cells": 0, "semblance": math.nan, "correlation": math.nan, "resolved_share": math.nan,
                    "amplitude": math.nan}
        t, r = self.true[cells], self.recovered[cells]
        return {"cells": n, "semblance": float(np.median(self.semblance[cells])),
                "correlation": float(np.nanmedian(self.correlation[cells])),
                "resolved_share": float(np.mean(self.semblance[cells] >= self.threshold)),
                "amplitude": float(np.sum(t * r) / np.sum(t * t)) if np.any(t) else math.nan}

    def attributes(self):
        """The scalar fields (for the run file's attributes)."""
        arrays = {"true", "recovered", "semblance", "correlation"}
        return {f.name: getattr(self, f.name) for f in fields(self) if f.name not in arrays}


def trusted_cells(run):
    """Boolean (nz, nx): cells some ray envelope covers and that lie above the depth of
    investigation (where the coverage is good)."""
    doi = investigation_elevation(run)
    with np.errstate(invalid="ignore"):
        return covered(run) & (np.asarray(run.z, float)[:, None] >= doi[None, :])


def run_mesh(run):
    """The :class:`Mesh` a run was inverted on (from its recorded definition)."""
    m = run.mesh
    terrain = Terrain(np.asarray(m["terrain_x"], float), np.asarray(m["terrain_z"], float))
    return Mesh(x0=float(m["x0"]), z_top=float(m["z_top"]), cell=float(m["cell"]), nx=int(m["nx"]),
                nz=int(m["nz"]), refine=int(m["refine"]), terrain=terrain)


def run_picks(run):
    """The run's picks (positions, observed times and sigmas) as :class:`Picks`."""
    p = run.picks
    return Picks(p["source_x"], p["source_z"], p["receiver_x"], p["receiver_z"],
                 np.asarray(p["observed_ms"], float) * 1e-3, np.asarray(p["sigma_ms"], float) * 1e-3)


def run_settings(run, workers=None):
    """The run's inversion settings (its recorded ones; the velocity bounds it used)."""
    recorded = dict(run.settings or {})
    names = {f.name for f in fields(InversionSettings)}
    values = {k: v for k, v in recorded.items() if k in names}
    for key in ("v_min_m_s", "v_max_m_s"):
        if values.get(key) is None and recorded.get(f"{key}_used") is not None:
            values[key] = float(recorded[f"{key}_used"])
    if workers is not None:
        values["workers"] = int(workers)
    return InversionSettings.from_dict(values).check()


def check_checker(size_m, amplitude_pct, mesh, picks):
    """Refuse a checker smaller than a model cell or longer than the line, and an
    amplitude outside (0, :data:`MAX_AMPLITUDE_PCT`] %."""
    stations = np.concatenate([picks.source_x, picks.receiver_x])
    length = float(stations.max() - stations.min())
    if not (math.isfinite(size_m) and size_m >= mesh.cell * (1 - 1e-9)):
        raise InputError(f"checker size {size_m:g} m is smaller than a model cell ({mesh.cell:g} m): the grid "
                         "cannot draw it", field="--checker")
    if size_m > length:
        raise InputError(f"checker size {size_m:g} m is longer than the line ({length:g} m from the first to the "
                         "last station): no pattern to recover", field="--checker")
    if not (math.isfinite(amplitude_pct) and 0 < amplitude_pct <= MAX_AMPLITUDE_PCT):
        raise InputError(f"checker amplitude {amplitude_pct:g} % is outside (0, {MAX_AMPLITUDE_PCT:g}] %",
                         field="--amplitude")


def checker_pattern(mesh, size_m, amplitude_pct, x_origin):
    """The checkerboard perturbation of ln(velocity) on the mesh's cells (module
    docstring); NaN in the air.

    ``x_origin`` (m, usually the first geophone) is moved to the nearest cell edge and
    depth is counted in whole cells below each column's top ground cell, so that a
    checker one cell wide alternates cell by cell at full amplitude instead of being
    sampled at its zeros.
    """
    a = math.log(1.0 + amplitude_pct / 100.0)
    edge = mesh.x0 + round((x_origin - mesh.x0) / mesh.cell) * mesh.cell
    top = np.argmax(mesh.ground, axis=0)
    rows = np.arange(mesh.nz)[:, None]
    depth = (rows - top[None, :] + 0.5) * mesh.cell
    along = np.sin(np.pi * (mesh.x - edge) / size_m)[None, :]
    pattern = a * along * np.sin(np.pi * depth / size_m)
    return np.where(mesh.ground, pattern, np.nan)


def target_pattern(model, mesh):
    """The perturbation of ln(velocity) a model file's bodies make against its own
    layers, on the mesh's cells (cell velocities as :meth:`Model.velocity_cells`
    averages them); NaN in the air. InputError when the model has no body."""
    if not model.bodies:
        raise InputError("the model has no [[body]]: a target test adds the model's bodies (the hypothesised "
                         "feature) to the run's final model, measured against the file's layers",
                         path=model.path, field="body")
    layers_only = type(model)(model.layers, (), model.terrain, model.path)
    pattern = np.log(model.velocity_cells(mesh)) - np.log(layers_only.velocity_cells(mesh))
    return np.where(mesh.ground, pattern, np.nan)


def feature_size(model):
    """The smallest side of the bounding boxes of a model's bodies, m."""
    sides = [min(np.ptp(b.outline[:, 0]), np.ptp(b.outline[:, 1])) for b in model.bodies]
    return float(min(sides))


def window_cells(window_m, cell):
    """Odd number of cells of the score window (at least :data:`MIN_WINDOW_CELLS`)."""
    n = max(MIN_WINDOW_CELLS, int(round(window_m / cell)))
    return n if n % 2 else n + 1


def recovery_scores(true, recovered, ground, n_cells):
    """Per-cell semblance and correlation (module docstring) over square windows of
    ``n_cells`` cells; NaN in the air and where the window's true pattern is quiet.

    Parameters
    ----------
    true, recovered : ndarray (nz, nx)
        Perturbations of ln(velocity).
    ground : ndarray of bool (nz, nx)
    n_cells : int
        Window side, cells (odd).

    Returns
    -------
    semblance, correlation : ndarray (nz, nx)
    """
    from scipy.ndimage import uniform_filter

    t = np.where(ground, np.nan_to_num(np.asarray(true, float)), 0.0)
    r = np.where(ground, np.nan_to_num(np.asarray(recovered, float)), 0.0)

    def window_sum(a):
        # a mean over the window times its size; cells outside the grid count as zero
        return uniform_filter(a, size=int(n_cells), mode="constant", cval=0.0) * n_cells ** 2

    tt, rr, tr = window_sum(t * t), window_sum(r * r), window_sum(t * r)
    count = window_sum(ground.astype(float))
    peak = float(np.max(np.abs(t))) if t.size else 0.0
    with np.errstate(invalid="ignore", divide="ignore"):
        quiet = tt < (QUIET_FRACTION * peak) ** 2 * np.maximum(count, 1.0)
        semblance = 0.5 + tr / (tt + rr)
        correlation = np.where(rr > 0, tr / np.sqrt(tt * rr), 0.0)
    bad = ~ground | quiet | (peak == 0)
    return np.where(bad, np.nan, semblance), np.where(bad, np.nan, correlation)


def synthetic_picks(mesh, velocity, picks, settings, seed):
    """Picks through ``velocity`` (m/s on the cells) at the picks' positions, with
    Gaussian noise of each pick's sigma (seeded): the inversion's own forward solver."""
    slowness = np.where(mesh.ground, 1.0 / np.where(mesh.ground, velocity, 1.0), 0.0)
    times = forward_pass(mesh, slowness, picks, settings, rays=False).time_s
    rng = np.random.default_rng(int(seed))
    noisy = times + rng.normal(0.0, 1.0, times.size) * picks.sigma_s
    # a noisy time at a very short offset could come out non-positive
    return picks.with_times(np.maximum(noisy, 1e-5), picks.sigma_s)


def resolution_test(run, true, kind, size_m, amplitude_pct=math.nan, seed=0, window_m=None, workers=None,
                    progress=None, target_file=None):
    """Recover a known perturbation of a run's final model (module docstring).

    Parameters
    ----------
    run : RunData
        The run: its final model, mesh, picks (positions and sigmas) and settings.
    true : ndarray (nz, nx)
        The perturbation of ln(velocity) to recover, on the run's cells.
    kind : {"checker", "target"}
    size_m : float
        Checker side (or feature size), m; the score window's side by default.
    amplitude_pct : float
        Checker amplitude, % (recorded).
    seed : int
        Seed of the pick noise.
    window_m : float, optional
        Side of the score window, m (default ``size_m``).
    workers : int, optional
        Processes of the test inversion (default: the run's).
    progress : callable, optional
        Passed to :func:`tomo.tomography.inversion.invert`.

    Returns
    -------
    ResolutionRecord
    """
    mesh, picks = run_mesh(run), run_picks(run)
    settings = run_settings(run, workers)
    final = np.asarray(run.velocity, float)
    if final.shape != mesh.shape:
        raise InputError(f"the run's model has shape {final.shape}, its mesh {mesh.shape}")
    true = np.where(mesh.ground, np.asarray(true, float), np.nan)
    synthetic = synthetic_picks(mesh, final * np.exp(np.nan_to_num(true)), picks, settings, seed)
    start = np.where(mesh.ground, final, np.nan)
    notes = [f"resolution test ({kind}): synthetic picks through the final model plus the pattern, noise of each "
             "pick's sigma; regularisation measured from the final model"]
    result = invert(synthetic, mesh, start, settings, progress=progress, reference_velocity=start, notes=notes)
    recovered = np.where(mesh.ground, np.log(result.velocity) - np.log(np.where(mesh.ground, final, 1.0)), np.nan)
    window_m = float(size_m if window_m is None else window_m)
    semblance, correlation = recovery_scores(true, recovered, mesh.ground, window_cells(window_m, mesh.cell))
    return ResolutionRecord(kind, float(size_m), float(amplitude_pct), window_m, SEMBLANCE_THRESHOLD, int(seed),
                            true, recovered, semblance, correlation, float(result.history["chi2"][0]),
                            float(result.chi2), int(result.iterations), bool(result.converged), result.stop_reason,
                            target_file, list(result.notes))
