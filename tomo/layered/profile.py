"""The delay-time refractor profile: depths under every geophone, and its CSV file."""

from __future__ import annotations

import csv
import io
import math
from dataclasses import dataclass, field, fields

import numpy as np

from ..core.fileio import atomic_open
from ..core.notices import notices_from_values

__all__ = ["RefractorProfile", "RefractorLine", "DelayPair", "write_profile_csv", "COLUMNS", "CSV_COLUMNS",
           "GRM_COLUMNS"]

COLUMNS = ("refractor", "x", "surface_z", "depth_m", "elevation_m", "uncertainty_m", "velocity_m_s", "method")


#: Columns of the refractor CSV file (plus-minus), then the GRM ones when computed.
CSV_COLUMNS = ("refractor", "x", "surface_z", "depth_m", "elevation_m", "uncertainty_m", "velocity_m_s")


GRM_COLUMNS = ("grm_depth_m", "grm_elevation_m", "grm_uncertainty_m", "grm_velocity_m_s")


@dataclass
class DelayPair:
    """A reversed pair of shots used for the delay times of one refractor.

    Attributes
    ----------
    refractor : int
        Interface number (1: the top of layer 2).
    shot_left_x, shot_right_x : float
        Shot A (left, shooting right) and shot B (right), m.
    n_geophones : int
        Geophones between the shots that both record.
    reciprocal_time_ms : float
        ``t_AB``, ms; ``reciprocal_time_from`` says how it was found ("picks", "matched
        to reciprocal pairs" or "branch lines").
    minus_time_velocity_m_s : float or None
        The pair's own minus-time velocity, m/s.
    velocity_used_m_s : float
        The refractor velocity its depths use (pooled over the pairs), m/s.
    grm_xy_m, grm_velocity_m_s, grm_xy_smoothest_m : float or None
        With GRM: the optimum XY (m), the velocity-analysis velocity (m/s) and the XY of
        the smoothest velocity analysis (m).
    grm_xy_scan_m, grm_velocity_analysis_rms_ms : list of float or None
        With GRM: the XY values scanned (m) and the roughness of each (ms).
    """

    refractor: int
    shot_left_x: float
    shot_right_x: float
    n_geophones: int
    reciprocal_time_ms: float
    reciprocal_time_from: str
    minus_time_velocity_m_s: float | None
    velocity_used_m_s: float
    grm_xy_m: float | None = None
    grm_velocity_m_s: float | None = None
    grm_xy_smoothest_m: float | None = None
    grm_xy_scan_m: list | None = None
    grm_velocity_analysis_rms_ms: list | None = None

    def to_dict(self):
        d = {f.name: getattr(self, f.name) for f in fields(self)}
        if self.grm_xy_m is None:  # a pair without GRM results carries no GRM keys
            d = {k: v for k, v in d.items() if not k.startswith("grm_")}
        return d

    @classmethod
    def from_dict(cls, d):
        names = {f.name for f in fields(cls)}
        return cls(**{k: v for k, v in d.items() if k in names})


@dataclass
class RefractorLine:
    """One refractor of a delay-time profile as arrays sorted by x.

    Attributes
    ----------
    refractor : int
        Interface number (1: the top of layer 2).
    method : str
        "plus-minus" or "grm".
    x, surface_z, depth_m, elevation_m, uncertainty_m : ndarray
        Geophone position, ground elevation, refractor depth below the ground, refractor
        elevation and the depth's one-sigma uncertainty (NaN where unknown), m.
    velocity_m_s : ndarray
        Refractor velocity used, m/s.
    """

    refractor: int
    method: str
    x: np.ndarray
    surface_z: np.ndarray
    depth_m: np.ndarray
    elevation_m: np.ndarray
    uncertainty_m: np.ndarray
    velocity_m_s: np.ndarray

    def __len__(self):
        return int(self.x.size)

    @classmethod
    def empty(cls, refractor, method="plus-minus"):
        e = np.zeros(0)
        return cls(int(refractor), method, e, e, e, e, e, e)


@dataclass
class RefractorProfile:
    """Refractor depths under geophones, one entry per geophone, refractor and method.

    ``refractor`` j is the top of layer j + 1 (1: the first refractor). Depth (m) below
    the ground at the geophone, elevation (m) = ``surface_z - depth_m``, uncertainty (m)
    one sigma, ``velocity_m_s`` the refractor velocity used, ``method`` "plus-minus" or
    "grm". ``pairs`` describes each reversed pair used (:class:`DelayPair`), ``warnings`` are
    :class:`~tomo.core.notices.Notice` records.
    """

    refractor: np.ndarray
    x: np.ndarray
    surface_z: np.ndarray
    depth_m: np.ndarray
    elevation_m: np.ndarray
    uncertainty_m: np.ndarray
    velocity_m_s: np.ndarray
    method: np.ndarray
    pairs: list = field(default_factory=list)
    warnings: list = field(default_factory=list)

    def __len__(self):
        return int(self.x.size)

    def refractor_depths(self, refractor, method="plus-minus"):
        """x (m) and depth (m) of one refractor, sorted by x; falls back to any method."""
        sel = (self.refractor == refractor) & (self.method == method)
        if not np.any(sel):
            sel = self.refractor == refractor
        order = np.argsort(self.x[sel])
        return self.x[sel][order], self.depth_m[sel][order]

    def refractor_line(self, refractor, method="plus-minus"):
        """One refractor as arrays sorted by x (:class:`RefractorLine`); falls back to any
        method like :meth:`refractor_depths`; empty when the profile does not map it."""
        sel = (self.refractor == refractor) & (self.method == method)
        if not np.any(sel):
            sel = self.refractor == refractor
        idx = np.flatnonzero(sel)[np.argsort(self.x[sel])]
        used = str(self.method[idx[0]]) if idx.size else method
        return RefractorLine(int(refractor), used, self.x[idx], self.surface_z[idx], self.depth_m[idx],
                             self.elevation_m[idx], self.uncertainty_m[idx], self.velocity_m_s[idx])

    def to_dict(self):
        rows = {c: [] for c in COLUMNS}
        for k in range(len(self)):
            for c in COLUMNS:
                v = getattr(self, c)[k]
                rows[c].append(str(v) if c == "method" else (int(v) if c == "refractor" else
                                                             (float(v) if math.isfinite(v) else None)))
        return {"columns": rows, "pairs": [p.to_dict() for p in self.pairs],
                "warnings": [str(w) for w in self.warnings], "notices": [w.to_dict() for w in self.warnings]}

    @classmethod
    def from_dict(cls, d):
        cols = d["columns"]
        def arr(c):
            return np.array([np.nan if v is None else v for v in cols[c]], float)
        return cls(refractor=np.asarray(cols["refractor"], int), x=arr("x"), surface_z=arr("surface_z"),
                   depth_m=arr("depth_m"), elevation_m=arr("elevation_m"),
                   uncertainty_m=arr("uncertainty_m"), velocity_m_s=arr("velocity_m_s"),
                   method=np.asarray(cols["method"], dtype=object),
                   pairs=[DelayPair.from_dict(p) for p in d.get("pairs", [])],
                   warnings=notices_from_values(d.get("notices"), d.get("warnings", [])))

    def to_csv_text(self):
        """CSV text, one row per geophone and refractor.

        Columns ``refractor,x,surface_z,depth_m,elevation_m,uncertainty_m,velocity_m_s``
        from the plus-minus method; with GRM results also ``grm_depth_m,
        grm_elevation_m, grm_uncertainty_m, grm_velocity_m_s`` (empty where GRM has no
        value). Distances and depths in m, velocities in m/s.
        """
        def fmt(v, digits=3):
            return "" if v is None or not math.isfinite(v) else f"{v:.{digits}f}"

        has_grm = bool(np.any(self.method == "grm"))
        header = list(CSV_COLUMNS) + (list(GRM_COLUMNS) if has_grm else [])
        grm = {}
        for k in np.flatnonzero(self.method == "grm"):
            grm[(int(self.refractor[k]), round(float(self.x[k]), 3))] = k
        keys = [(int(self.refractor[k]), round(float(self.x[k]), 3), k) for k in range(len(self))
                if self.method[k] == "plus-minus"]
        out = io.StringIO()
        w = csv.writer(out, lineterminator="\n")
        w.writerow(header)
        for j, x, k in sorted(keys):
            row = [j, f"{self.x[k]:.3f}", f"{self.surface_z[k]:.3f}", fmt(self.depth_m[k]),
                   fmt(self.elevation_m[k]), fmt(self.uncertainty_m[k]), fmt(self.velocity_m_s[k], 1)]
            if has_grm:
                g = grm.get((j, x))
                row += ["", "", "", ""] if g is None else [
                    fmt(self.depth_m[g]), fmt(self.elevation_m[g]), fmt(self.uncertainty_m[g]),
                    fmt(self.velocity_m_s[g], 1)]
            w.writerow(row)
        return out.getvalue()


def write_profile_csv(path, profile):
    """Write the profile as CSV atomically (columns: :meth:`RefractorProfile.to_csv_text`)."""
    with atomic_open(path, "w", encoding="utf-8", newline="") as out:
        out.write(profile.to_csv_text())
