"""The layered and the gridded interpretation on one profile.

The delay-time refractor of the layered interpretation (plus-minus or GRM depths under
each geophone, Hagedoorn 1959; Palmer 1980) is drawn with its uncertainty over the
tomogram, beside the iso-velocity contour chosen to stand for the same refractor, and
their difference is plotted along the line. Where the two agree inside the uncertainty
the refractor is well determined by two different methods; where they part, look at
the coverage and the assumptions (the layered method assumes velocity increasing with
depth and laterally uniform layers between shots).

The layered result is read with :meth:`tomo.layered.result.LayeredResult.from_dict`
(the run file keeps its ``layers.json`` content).

Uncertainty of a delay-time depth. When the layered result gives none, it is estimated
from the pick uncertainty: a plus time t+ = t_AG + t_BG - t_AB adds three picks, so
sigma(t+) = sqrt(3) sigma_t for independent picks, and the depth
h = t+ V1 V2 / (2 sqrt(V2^2 - V1^2)) (Hagedoorn 1959, Geophys. Prosp. 7) carries
sigma_h = sigma(t+) V1 V2 / (2 sqrt(V2^2 - V1^2)). Velocity errors are not included,
so this is a lower bound.
"""

from __future__ import annotations

import numpy as np
from matplotlib import patheffects

from ..analysis.coverage import covered
from ..analysis.surface import contour_surface, layer_velocities, refractor_contour
from ..layered.result import layered_result
from . import style
from .section import _edges, colorbar, colour_range, display_cells, draw_base

__all__ = ["refractor_profiles", "layer_velocities", "refractor_contour", "layered_vs_gridded",
           "compare_table", "compare_tables"]

_HALO = [patheffects.withStroke(linewidth=3.2, foreground="white")]


def refractor_profiles(layered, sigma_t_ms=None):
    """The delay-time refractor profile(s) of a layered result.

    Parameters
    ----------
    layered : LayeredResult or dict
        The result or its ``layers.json`` content; each refractor is read with
        :meth:`~tomo.layered.result.LayeredResult.refractor` (the plus-minus depths, the
        GRM ones where the profile has no others).
    sigma_t_ms : float, optional
        Pick uncertainty used to estimate the depth uncertainty when the profile has none.

    Returns
    -------
    dict of int -> dict of ndarray
        Per refractor number: ``x, surface_z, depth_m, elevation_m, sigma_m`` (m), sorted
        by x; ``sigma_m`` NaN where unknown.
    """
    result = layered_result(layered)
    if result is None:
        return {}
    velocities = layer_velocities(result)
    profiles = {}
    for k in result.refractors:
        line = result.refractor(k)
        elevation = line.elevation_m.copy()
        missing = ~np.isfinite(elevation)
        elevation[missing] = (line.surface_z - line.depth_m)[missing]
        sigma = line.uncertainty_m
        if not np.any(np.isfinite(sigma)) and sigma_t_ms and len(velocities) > k:
            v1, v2 = velocities[k - 1], velocities[k]
            if v2 > v1:
                sigma_plus_s = np.sqrt(3.0) * sigma_t_ms * 1e-3
                sigma = np.full(line.x.size, sigma_plus_s * v1 * v2 / (2.0 * np.sqrt(v2**2 - v1**2)))
        keep = np.isfinite(line.x) & np.isfinite(elevation)
        profiles[k] = {"x": line.x[keep], "surface_z": line.surface_z[keep], "depth_m": line.depth_m[keep],
                       "elevation_m": elevation[keep], "sigma_m": sigma[keep]}
    return profiles


def compare_tables(run, min_points=3):
    """:func:`compare_table` for every refractor of the layered profile mapped under at
    least ``min_points`` geophones (each against its own contour); [] when none."""
    if not run.layered:
        return []
    profiles = refractor_profiles(run.layered)
    out = []
    for k in sorted(profiles):
        if profiles[k]["x"].size >= min_points:
            table = compare_table(run, refractor=k)
            if table is not None:
                out.append(table)
    return out


def compare_table(run, contour_m_s=None, refractor=None):
    """Layered refractor and tomogram contour at the refractor's x positions.

    ``refractor`` counts from 1; by default the refractor mapped under the most
    geophones. Returns a dict with ``refractor`` (number), ``contour_m_s``, and arrays
    ``x``, ``refractor_elevation_m``, ``sigma_m``, ``contour_elevation_m``,
    ``difference_m`` (contour minus refractor, m) and ``constrained`` (contour above the
    depth of investigation); or None when the run holds no such refractor profile.
    """
    if not run.layered:
        return None
    sigma_t = float(np.nanmedian(run.picks["sigma_ms"])) if np.any(np.isfinite(run.picks["sigma_ms"])) else None
    profiles = refractor_profiles(run.layered, sigma_t)
    if not profiles:
        return None
    k = max(profiles, key=lambda n: (profiles[n]["x"].size, n)) if refractor is None else int(refractor)
    if k not in profiles:
        return None
    value = contour_m_s if contour_m_s is not None else refractor_contour(run.layered, k)
    if value is None:
        return None
    v = np.asarray(run.velocity, float)
    if not (np.nanmin(v) < value < np.nanmax(v)):
        return None
    surface = contour_surface(run, value)
    prof = profiles[k]
    good = np.isfinite(surface.elevation_m)
    contour_z = np.interp(prof["x"], surface.x[good], surface.elevation_m[good], left=np.nan, right=np.nan)
    constrained = np.interp(prof["x"], surface.x, surface.constrained.astype(float)) > 0.5
    return {"refractor": k, "contour_m_s": float(value), "x": prof["x"],
            "refractor_elevation_m": prof["elevation_m"], "sigma_m": prof["sigma_m"],
            "contour_elevation_m": contour_z, "difference_m": contour_z - prof["elevation_m"],
            "constrained": constrained, "surface": surface, "profile": prof}


#: One colour per refractor (Okabe-Ito): sky blue, orange, vermillion, bluish green.
REFRACTOR_COLORS = (style.PALETTE[4], style.PALETTE[1], style.PALETTE[3], style.PALETTE[2])


def _break_gaps(x, *ys):
    """Insert NaN where consecutive x are more than 1.5 median steps apart, so lines
    are not drawn across geophones the refractor was not mapped under."""
    x = np.asarray(x, float)
    if x.size < 3:
        return (x, *ys)
    step = np.diff(x)
    gap = np.flatnonzero(step > 1.5 * np.median(step)) + 1
    return (np.insert(x, gap, np.nan), *(np.insert(np.asarray(y, float), gap, np.nan) for y in ys))


def layered_vs_gridded(run, contour_m_s=None, refractor=None, title="Layered and gridded interpretation"):
    """Delay-time refractors (with uncertainty) and their iso-velocity contours over the
    tomogram, and their differences along the line.

    Every refractor mapped under at least three geophones is drawn, each with the
    contour at the mean of the layer velocities above and below it; ``refractor`` (and
    ``contour_m_s``) restrict the figure to one.

    Returns
    -------
    matplotlib.figure.Figure or None
        None when the run holds no layered refractor profile (nothing to compare).
    """
    if refractor is not None or contour_m_s is not None:
        one = compare_table(run, contour_m_s, refractor)
        tables = [one] if one is not None else []
    else:
        tables = compare_tables(run)
    if not tables:
        return None
    fig = style.new_figure(height_in=6.6)
    gs = fig.add_gridspec(3, 1, height_ratios=[2.4, 0.42, 1.0], hspace=0.25)
    ax = fig.add_subplot(gs[0])
    clip, ve = draw_base(ax, run)
    cov = covered(run)
    vmasked = np.ma.masked_where(~cov, np.asarray(run.velocity, float))
    finite = np.asarray(run.velocity)[cov]
    if finite.size:
        vmin, vmax, extend = colour_range(run)
        image = ax.pcolormesh(_edges(run.x), _edges(run.z), display_cells(run, vmasked), cmap=style.VELOCITY_CMAP,
                              vmin=vmin, vmax=vmax, shading="flat", zorder=1, rasterized=True)
        image.set_clip_path(clip)
        colorbar(fig, ax, image, "P-wave velocity (m/s)", extend=extend)
    bx = fig.add_subplot(gs[2])
    bx.axhline(0.0, color=style.GREY, lw=0.8)
    lim = 0.5
    for n, table in enumerate(tables):
        colour = REFRACTOR_COLORS[n % len(REFRACTOR_COLORS)]
        d = table["difference_m"]
        ok = table["constrained"] & np.isfinite(d)
        x, zr, sig, d_ok, d_no = _break_gaps(table["x"], table["refractor_elevation_m"], table["sigma_m"],
                                             np.where(ok, d, np.nan), np.where(~ok, d, np.nan))
        k = table["refractor"]
        rms = f", RMS {float(np.sqrt(np.mean(d[ok] ** 2))):.1f} m" if ok.any() else ""
        if np.any(np.isfinite(sig)):
            ax.fill_between(x, zr - sig, zr + sig, color=colour, alpha=0.35, lw=0, zorder=3)
            bx.fill_between(x, -sig, sig, color=colour, alpha=0.2, lw=0)
        ax.plot(x, zr, "-", color=colour, lw=1.6, zorder=4, path_effects=_HALO,
                label=f"refractor {k}, delay times (band: 1 sigma)")
        surf = table["surface"]
        zc = np.where(surf["constrained"], surf["elevation_m"], np.nan)
        ax.plot(surf["x"], zc, "--", color=colour, lw=1.4, zorder=4, path_effects=_HALO,
                label=f"refractor {k}: {table['contour_m_s']:.0f} m/s contour (difference{rms})")
        bx.plot(x, d_ok, "o-", color=colour, ms=2.8, lw=1.0, mec=style.BLACK, mew=0.3)
        bx.plot(x, d_no, "o", color=colour, ms=2.8, mfc="none")
        if np.any(np.isfinite(d)):
            lim = max(lim, float(np.nanmax(np.abs(d))))
    head = f"{title} (vertical exaggeration {ve:g}:1)"
    if (run.settings or {}).get("start") == "layered":
        # said so that a reader can weigh the agreement (tomo.results.report.LAYERED_START_NOTE)
        head += "\ntomography started from this layered model (its objective keeps nothing of the start)"
    ax.set_title(head)
    handles, labels = ax.get_legend_handles_labels()
    lx = fig.add_subplot(gs[1])
    lx.axis("off")
    lx.legend(handles, labels, loc="center", ncol=2, frameon=False, fontsize=7.5, columnspacing=1.5)
    bx.set_xlim(ax.get_xlim())
    bx.set_ylim(-1.15 * lim, 1.15 * lim)
    bx.set_xlabel("Distance along line (m)")
    bx.set_ylabel("Difference (m)")
    bx.set_title("Contour minus refractor elevation (positive: contour above; open circles: contour below "
                 "the depth of investigation)", fontsize=8.5)
    stack_under(fig, ax, lx, bx)
    return fig


def stack_under(fig, ax, legend_ax, panel_ax):
    """Move a legend axis and a panel right under the section ``ax``, at its width.

    The aspect-locked section is narrower, and often shorter, than its grid slot; left
    there, the panels below would not line up with its distance axis.
    """
    fig.canvas.draw()
    top = ax.get_position()
    to_fig = fig.transFigure.inverted()
    section_bottom = ax.get_tightbbox(fig.canvas.get_renderer()).transformed(to_fig).y0
    legend_h, gap = legend_ax.get_position().height, 0.015
    legend_ax.set_position([top.x0, section_bottom - gap - legend_h, top.width, legend_h])
    panel_h = panel_ax.get_position().height
    panel_ax.set_position([top.x0, section_bottom - gap - legend_h - 0.06 - panel_h, top.width, panel_h])
