"""The range of a surface's depth below ground along the line, from whichever source a
report is given: an ensemble of runs (5-95 % per column), a second run of the same
picks from another start, or the delay-time depths' one-sigma uncertainty.

A range is what a depth table needs beside each depth: a client reads "8.2 m" as a
fact unless the table says "7.6 to 8.9 m, from two runs of the same picks". Each
source measures something different, so a :class:`DepthRange` carries a sentence
saying which it is.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .digest import check_same_picks
from .surface import contour_surface

__all__ = ["DepthRange", "two_run_range", "delay_time_range"]


@dataclass(frozen=True)
class DepthRange:
    """Shallowest and deepest depth below ground of one surface, per position.

    Attributes
    ----------
    x : ndarray
        Positions along the line, m, increasing.
    shallow_m, deep_m : ndarray
        Ends of the range, m below the ground (NaN where the source gives none).
    kind : str
        ``"ensemble"``, ``"two-runs"`` or ``"delay-time-sigma"`` (or another source's name).
    source : str
        What the range is, in words, for the report (e.g. "5-95 % of 40 runs with
        resampled picks").
    """

    x: np.ndarray
    shallow_m: np.ndarray
    deep_m: np.ndarray
    kind: str
    source: str

    def at(self, x):
        """(shallow, deep) in m at positions ``x`` (m): linear between the range's
        positions, NaN outside them or next to a position without a range."""
        x = np.atleast_1d(np.asarray(x, float))
        out = []
        for values in (self.shallow_m, self.deep_m):
            ok = np.isfinite(values)
            v = (np.interp(x, self.x[ok], values[ok], left=np.nan, right=np.nan) if ok.any()
                 else np.full(x.shape, np.nan))
            # no bridging of gaps: a position whose neighbours lack a range has none
            near = np.interp(x, self.x, ok.astype(float), left=0.0, right=0.0)
            out.append(np.where(near > 0.999, v, np.nan))
        return out[0], out[1]


def two_run_range(run, other, velocity_m_s, labels=("this run", "the other run")):
    """The range between the ``velocity_m_s`` surfaces of two runs of the same picks,
    where both lie above their depth of investigation (NaN elsewhere). The difference is
    a lower bound of the surface's uncertainty (many models fit the picks)."""
    check_same_picks(run, other, labels)
    a, b = contour_surface(run, velocity_m_s), contour_surface(other, velocity_m_s)
    x = np.asarray(a.x, float)
    okb = np.isfinite(b.depth_m)
    db = np.interp(x, b.x[okb], b.depth_m[okb], left=np.nan, right=np.nan) if okb.any() else np.full(x.size, np.nan)
    cb = np.interp(x, b.x, b.constrained.astype(float), left=0.0, right=0.0) > 0.5
    both = a.constrained & cb & np.isfinite(a.depth_m) & np.isfinite(db)
    shallow = np.where(both, np.fmin(a.depth_m, db), np.nan)
    deep = np.where(both, np.fmax(a.depth_m, db), np.nan)
    return DepthRange(x, shallow, deep, "two-runs",
                      f"between the {velocity_m_s:.0f} m/s surfaces of {labels[0]} and {labels[1]} (the same picks "
                      "from another starting model); a lower bound of the uncertainty")


def delay_time_range(line, n_sigma=1.0):
    """Depth +- ``n_sigma`` sigma of a delay-time refractor
    (:class:`tomo.layered.profile.RefractorLine`), m below ground."""
    d, s = np.asarray(line.depth_m, float), np.asarray(line.uncertainty_m, float)
    return DepthRange(np.asarray(line.x, float), d - n_sigma * s, d + n_sigma * s, "delay-time-sigma",
                      f"the delay-time depth of refractor {line.refractor} +- {n_sigma:g} sigma (the picks' "
                      "uncertainty carried through the plus-minus method)")
