"""The delay-time refractor profile: depths under every geophone, and its CSV file."""

from __future__ import annotations

import csv
import io
import math
from dataclasses import dataclass, field

import numpy as np

from ..core.fileio import atomic_open

__all__ = ["RefractorProfile", "write_profile_csv", "COLUMNS", "CSV_COLUMNS", "GRM_COLUMNS"]

COLUMNS = ("refractor", "x", "surface_z", "depth_m", "elevation_m", "uncertainty_m", "velocity_m_s", "method")


#: Columns of the refractor CSV file (plus-minus), then the GRM ones when computed.
CSV_COLUMNS = ("refractor", "x", "surface_z", "depth_m", "elevation_m", "uncertainty_m", "velocity_m_s")


GRM_COLUMNS = ("grm_depth_m", "grm_elevation_m", "grm_uncertainty_m", "grm_velocity_m_s")


@dataclass
class RefractorProfile:
    """Refractor depths under geophones, one entry per geophone, refractor and method.

    ``refractor`` j is the top of layer j + 1 (1: the first refractor). Depth (m) below
    the ground at the geophone, elevation (m) = ``surface_z - depth_m``, uncertainty (m)
    one sigma, ``velocity_m_s`` the refractor velocity used, ``method`` "plus-minus" or
    "grm".
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

    def to_dict(self):
        rows = {c: [] for c in COLUMNS}
        for k in range(len(self)):
            for c in COLUMNS:
                v = getattr(self, c)[k]
                rows[c].append(str(v) if c == "method" else (int(v) if c == "refractor" else
                                                             (float(v) if math.isfinite(v) else None)))
        return {"columns": rows, "pairs": list(self.pairs), "warnings": list(self.warnings)}

    @classmethod
    def from_dict(cls, d):
        cols = d["columns"]
        def arr(c):
            return np.array([np.nan if v is None else v for v in cols[c]], float)
        return cls(refractor=np.asarray(cols["refractor"], int), x=arr("x"), surface_z=arr("surface_z"),
                   depth_m=arr("depth_m"), elevation_m=arr("elevation_m"),
                   uncertainty_m=arr("uncertainty_m"), velocity_m_s=arr("velocity_m_s"),
                   method=np.asarray(cols["method"], dtype=object),
                   pairs=list(d.get("pairs", [])), warnings=list(d.get("warnings", [])))

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
