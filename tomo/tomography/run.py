"""What an inversion returns: ``RunData``, the record of one run (model, fit, settings).

The record is plain numpy arrays and Python values; the run file
(:mod:`tomo.results.runfile`) stores exactly this content.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..core.version import __version__

__all__ = ["RunData"]


@dataclass
class RunData:
    """Everything in a run file, as numpy arrays and plain Python values.

    Attributes
    ----------
    x, z : ndarray
        Cell-centre distance (nx) and elevation (nz), m.
    velocity, coverage, start_velocity : ndarray (nz, nx)
        Final model (m/s, NaN in air), ray length per cell (m), starting model (m/s).
    terrain_x, terrain_z : ndarray
        Ground elevation points, m.
    picks : dict of str -> ndarray
        ``source_x, source_z, receiver_x, receiver_z`` (m) and ``observed_ms,
        computed_ms, sigma_ms`` (ms), one value per pick.
    history : dict of str -> ndarray
        ``chi2, rms_ms, lambda, step`` per iteration, entry 0 for the starting model.
    iteration_models : list of ndarray (nz, nx)
        Model after each finished iteration, m/s.
    chi2, rms_ms : float
        Final weighted misfit (mean of (residual / sigma)^2) and RMS residual, ms.
    iterations : int
    converged : bool
    stop_reason : str
    settings, mesh : dict
        Every setting of the run and the mesh definition, so it can be repeated.
    layered : dict or None
        The layered interpretation used or made alongside (layers.json content).
    notes : list of str
    tomo_version, created : str
    stations : tomo.survey.stations.Stations or None
        The line in map coordinates (surveyed stations and their EPSG system), if given.
    boreholes : tomo.survey.boreholes.Boreholes or None
        Boreholes placed on the line (``x`` in distance along it), if given.
    ensemble : tomo.uncertainty.record.EnsembleRecord or None
        When the run is the central member of an ensemble: every member's model and
        fit, and what the members say together (``tomo ensemble``).
    picks_digest : str or None
        Digest of the picks as read from a run file (:mod:`tomo.analysis.digest`);
        "" for a run file written before the digest, None for a run in memory.
    resolution : tomo.uncertainty.resolution.ResolutionRecord or None
        A resolution test of the run (``tomo resolve``): true and recovered
        perturbation and the per-cell recovery score.
    borehole_fit : tomo.analysis.borehole_fit.BoreholeFit or None
        For a run constrained by its boreholes: each one's contour depth without and
        with the constraints, and the flags; None for a run without them.
    """

    x: np.ndarray
    z: np.ndarray
    velocity: np.ndarray
    coverage: np.ndarray
    start_velocity: np.ndarray
    terrain_x: np.ndarray
    terrain_z: np.ndarray
    picks: dict
    history: dict
    iteration_models: list = field(default_factory=list)
    chi2: float = float("nan")
    rms_ms: float = float("nan")
    iterations: int = 0
    converged: bool = False
    stop_reason: str = ""
    settings: dict = field(default_factory=dict)
    mesh: dict = field(default_factory=dict)
    layered: dict | None = None
    notes: list = field(default_factory=list)
    tomo_version: str = __version__
    created: str = ""
    stations: object = None
    boreholes: object = None
    ensemble: object = None
    picks_digest: str | None = None
    resolution: object = None
    borehole_fit: object = None

    @property
    def residual_ms(self):
        """Observed minus computed time per pick, ms."""
        return self.picks["observed_ms"] - self.picks["computed_ms"]
