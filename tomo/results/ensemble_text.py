"""What an ensemble says, in words: for the command line and the report."""

from __future__ import annotations

import numpy as np

from ..uncertainty.bands import default_band_contour

__all__ = ["describe_ensemble", "band_text", "widest_reason", "ensemble_html"]


def _spread(run):
    """The geophones' span along the line, m: where a band is summarised."""
    x = np.asarray(run.picks["receiver_x"], float)
    return float(x.min()), float(x.max())


def band_text(band, span=None):
    """One sentence on a band: its median and largest width over the constrained
    columns (within ``span``, (x_min, x_max) m, when given), and where it is widest."""
    ok = band.constrained & np.isfinite(band.width_m)
    if span is not None:
        ok &= (band.x >= span[0]) & (band.x <= span[1])
    if not np.any(ok):
        return f"{band.velocity_m_s:.0f} m/s surface: no column lies above the depth of investigation"
    width = np.where(ok, band.width_m, -np.inf)
    j = int(np.argmax(width))
    widened = int(np.sum(band.band_from[ok] != "members"))
    where = "" if span is None else " of the spread"
    text = (f"{band.velocity_m_s:.0f} m/s surface: band (5-95 % of {band.n_members} members) "
            f"{np.median(band.width_m[ok]):.1f} m wide at the median column{where}, {width[j]:.1f} m at most, at "
            f"x = {band.x[j]:.1f} m ({band.depth_low_m[j]:.1f}-{band.depth_high_m[j]:.1f} m deep)")
    if widened:
        text += f"; extremal bounds widen it at {widened} column(s)"
    return text


def describe_ensemble(run, contour_m_s=None):
    """Lines on an ensemble: members kept, rejected and failed, their misfits, and the
    band of the ``contour_m_s`` (m/s) surface."""
    record = run.ensemble
    kept = record.kept
    lines = [f"ensemble: {len(record.index)} of {len(record.specs)} members finished, {int(kept.sum())} kept "
             f"(chi2 on their own picks {record.chi2_fitted[kept].min():.2f}-{record.chi2_fitted[kept].max():.2f}; "
             f"on the observed picks {np.median(record.chi2[kept]):.2f} at the median)"]
    rejected = [int(i) for i, k in zip(record.index, kept) if not k]
    if rejected:
        lines.append(f"kept out (chi2 above {record.settings.max_chi2:g} on their own picks): members "
                     + ", ".join(map(str, rejected)))
    for index, reason in sorted(record.failed.items()):
        lines.append(f"member {index} failed: {reason}")
    if record.missing:
        lines.append(f"{len(record.missing)} member(s) not run yet: complete the ensemble with --resume")
    value = default_band_contour(run) if contour_m_s is None else float(contour_m_s)
    for b in record.bounds:
        lines.append(f"extremal bound at x = {b['x']:.1f} m: the {b['velocity_m_s']:.0f} m/s surface can lie "
                     f"{b['shallow_m']:.1f}-{b['deep_m']:.1f} m deep (the central member has {b['central_m']:.1f} m) "
                     f"with chi2 within {b['chi2_limit']:.2f}")
    lines.append(band_text(run.band(value), _spread(run)))
    return lines


def widest_reason(run, band, j):
    """Why the band is widest at column ``j``, in words: an extremal bound, few rays,
    a steep surface, or the members' spread of the contour velocity."""
    reasons = []
    if band.band_from[j] != "members":
        reasons.append("an extremal bound shows the picks allow the surface that far")
    cov = np.nansum(np.asarray(run.coverage, float), axis=0)
    ok = band.constrained & np.isfinite(band.width_m)
    typical = float(np.median(cov[ok])) if np.any(ok) else 0.0
    if typical > 0 and cov[j] < 0.5 * typical:
        reasons.append(f"few rays cross that column ({cov[j]:.0f} m of ray against {typical:.0f} m at the median one)")
    slope = np.degrees(np.arctan(np.abs(np.gradient(band.elevation_m, band.x))))
    if np.isfinite(slope[j]) and slope[j] > 20:
        reasons.append(f"the surface is steep there ({slope[j]:.0f} degrees), where a smooth model cannot place "
                       "it closely")
    if not reasons:
        reasons.append("the members' velocity rises slowly through the surface there, so the choice of contour "
                       "velocity moves it most")
    return "; ".join(reasons)


def ensemble_html(run, contour_m_s=None, step_m=10.0, esc=lambda s: s, table=True):
    """The report's section on an ensemble: what the members are, the band of the
    ``contour_m_s`` surface along the line (a depth table with its range, unless
    ``table`` is false: the report's depth table carries the band), where it is widest
    and why, and what it is conditional on. '' for a run that is no ensemble."""
    if run.ensemble is None:
        return ""
    value = default_band_contour(run) if contour_m_s is None else float(contour_m_s)
    band = run.band(value)
    span = _spread(run)
    ok = band.constrained & np.isfinite(band.width_m) & (band.x >= span[0]) & (band.x <= span[1])
    lines = describe_ensemble(run, value)
    parts = [f"<p>{esc(line)}.</p>" for line in lines[:-1]]
    if np.any(ok):
        j = int(np.argmax(np.where(ok, band.width_m, -np.inf)))
        parts.append(f"<p>{esc(band_text(band, span))}: {esc(widest_reason(run, band, j))}.</p>")
    rows = []
    marks = (np.arange(np.ceil(band.x[ok].min() / step_m) * step_m, band.x[ok].max() + 1e-9, step_m)
             if np.any(ok) else [])
    for x in marks:
        k = int(np.argmin(np.abs(band.x - x)))
        if ok[k]:
            rows.append(f"<tr><td>{band.x[k]:.1f}</td><td>{band.depth_m[k]:.1f}</td><td>{band.depth_low_m[k]:.1f}"
                        f"&ndash;{band.depth_high_m[k]:.1f}</td><td>{band.width_m[k]:.1f}</td></tr>")
    if rows and table:
        parts.append(f"<table><thead><tr><th>x (m)</th><th>depth, median (m)</th><th>range, 5-95 % (m)</th>"
                     f"<th>width (m)</th></tr></thead><tbody>{''.join(rows)}</tbody></table>")
    parts.append("<p>The band is what these members allow under the method's assumptions: a smooth 2-D model, "
                 "first arrivals as the picks, noise as their sigmas say, velocity increasing into the rock along "
                 "the rays that reach it. Members share the smoothing of the objective, so a feature narrower than "
                 "the rays can resolve may lie outside every member; extremal bounds, where computed, widen the band "
                 "at their columns. The band is no guarantee: calibrate against boreholes.</p>")
    return "".join(parts)
