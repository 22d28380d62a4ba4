"""Sections of a run's model along the line: velocity and ray coverage.

Both are drawn over the true terrain, with shots and geophones marked and the vertical
exaggeration stated. In the velocity section, cells no ray reaches (below the deepest
ray of their column, or in columns without rays: :func:`tomo.export.covered`) are
blanked, drawn as pale grey ground, where the model is the starting model's; the
coverage section blanks every cell no ray crosses. A dashed depth-of-investigation line
marks where the coverage thins out (:func:`tomo.export.investigation_elevation`).
Boreholes the run holds are drawn on every section (:mod:`tomo.figures.boreholes`).
"""

from __future__ import annotations

import matplotlib
import numpy as np
from matplotlib import patheffects
from matplotlib.colors import LogNorm
from matplotlib.patches import Patch, PathPatch
from matplotlib.path import Path as MplPath
from matplotlib.ticker import FuncFormatter, MaxNLocator

from ..analysis.coverage import covered, deepest_ray_elevation, ground_elevation, investigation_elevation, ray_cells
from ..analysis.stations import every_nth, geophone_stations
from . import style
from .bands import draw_band
from .boreholes import draw_boreholes, lowest_borehole
from .hatching import draw_unresolved

__all__ = ["velocity_section", "coverage_section", "contour_levels", "choose_exaggeration", "draw_base",
           "display_cells", "colorbar", "colour_range", "stations", "view_window", "station_axis"]

#: Pale grey for ground the data do not constrain.
BLANK = "#e4e4e4"
SHOT_COLOR = style.SHOT_COLOR
GEOPHONE_COLOR = style.GEOPHONE_COLOR
DOI_COLOR = style.PALETTE[5]       # reddish purple, distinct on cividis and viridis


def _edges(centres):
    c = np.asarray(centres, float)
    if c.size == 1:
        return np.array([c[0] - 0.5, c[0] + 0.5])
    mid = (c[1:] + c[:-1]) / 2
    return np.concatenate([[2 * c[0] - mid[0]], mid, [2 * c[-1] - mid[-1]]])


def stations(run):
    """Unique shot and geophone positions, each an (n, 2) array of (x, z), m."""
    p = run.picks
    shots = np.unique(np.round(np.column_stack([p["source_x"], p["source_z"]]), 4), axis=0)
    geos = np.unique(np.round(np.column_stack([p["receiver_x"], p["receiver_z"]]), 4), axis=0)
    return shots, geos


def view_window(run):
    """(x_min, x_max, z_min, z_max) of the part of the section worth showing, m.

    Horizontally the stations plus one geophone spacing; vertically from the highest
    ground down to a fifth below the deepest ray (the whole grid if no ray).
    """
    shots, geos = stations(run)
    xs = np.concatenate([shots[:, 0], geos[:, 0]])
    spacing = float(np.median(np.diff(np.unique(geos[:, 0])))) if len(geos) > 1 else 1.0
    x_min, x_max = xs.min() - spacing, xs.max() + spacing
    half_cell = 0.5 * abs(run.x[1] - run.x[0])
    x_min, x_max = max(x_min, run.x[0] - half_cell), min(x_max, run.x[-1] + half_cell)
    grid_x = (run.x >= x_min) & (run.x <= x_max)
    ground = ground_elevation(run, np.linspace(x_min, x_max, 200))
    z_max = float(ground.max())
    doi = deepest_ray_elevation(run)[grid_x]
    cell = abs(run.z[0] - run.z[1])
    z_floor = float(run.z[-1] - cell / 2)
    if np.any(np.isfinite(doi)):
        z_min = float(np.nanmin(doi))
        z_min = z_min - 0.2 * (z_max - z_min)
        z_min = max(z_min, z_floor)
    else:
        z_min = z_floor
    deepest_hole = lowest_borehole(run)
    if np.isfinite(deepest_hole):
        z_min = max(min(z_min, deepest_hole - 0.05 * (z_max - deepest_hole)), z_floor)
    pad = 0.04 * (z_max - z_min)
    return x_min, x_max, z_min, z_max + 3 * pad


def choose_exaggeration(width_m, height_m, min_ratio=0.28):
    """Smallest of 1, 1.5, 2, 3, 4, 5 that makes the drawn section at least
    ``min_ratio`` as tall as it is wide (so thin sections stay readable)."""
    for ve in (1.0, 1.5, 2.0, 3.0, 4.0, 5.0):
        if ve * height_m / width_m >= min_ratio:
            return ve
    return 5.0


def _ground_path(run, x_min, x_max, z_bottom):
    xs = np.linspace(x_min, x_max, 400)
    zs = ground_elevation(run, xs)
    verts = np.concatenate([np.column_stack([xs, zs]), [[x_max, z_bottom], [x_min, z_bottom], [xs[0], zs[0]]]])
    codes = [MplPath.MOVETO] + [MplPath.LINETO] * (len(verts) - 2) + [MplPath.CLOSEPOLY]
    return MplPath(verts, codes), xs, zs


def draw_base(ax, run, vertical_exaggeration=None, doi=True, legend_items=None, hatch=True, band_m_s=None):
    """Frame a section axis: limits, aspect, pale ground, terrain line, stations, DOI,
    an ensemble's band (of the ``band_m_s`` surface; default: the layered refractor's)
    and (``hatch``) the cells the run's resolution test did not resolve.

    Returns (ground_path_patch, exaggeration) so that images can be clipped to the ground.
    """
    x_min, x_max, z_min, z_max = view_window(run)
    ve = vertical_exaggeration or choose_exaggeration(x_max - x_min, z_max - z_min)
    path, gx, gz = _ground_path(run, x_min, x_max, z_min - 1.0)
    ax.add_patch(PathPatch(path, facecolor=BLANK, edgecolor="none", zorder=0))
    clip = PathPatch(path, facecolor="none", edgecolor="none", transform=ax.transData)
    ax.add_patch(clip)
    ax.plot(gx, gz, color=style.BLACK, lw=1.0, zorder=5)
    shots, geos = stations(run)
    height = z_max - z_min
    ax.plot(geos[:, 0], geos[:, 1] + 0.012 * height, style.GEOPHONE_MARKER, ms=3.2, color=GEOPHONE_COLOR, zorder=6,
            label="geophones", clip_on=False)
    ax.plot(shots[:, 0], shots[:, 1] + 0.03 * height, zorder=7, label="shots", clip_on=False, **style.shot_style())
    draw_boreholes(ax, run, height)
    draw_band(ax, run, band_m_s)
    if hatch:
        draw_unresolved(ax, run, clip)
    if doi:
        line = investigation_elevation(run)
        ax.plot(run.x, line, "--", color=DOI_COLOR, lw=1.3, zorder=6,
                label="depth of investigation (95 % of ray length above)")
    ax.set_xlim(x_min, x_max)
    ax.set_ylim(z_min, z_max)
    ax.set_aspect(ve)
    ax.set_xlabel("Distance along line (m)")
    ax.set_ylabel("Elevation (m)")
    ax.grid(False)
    return clip, ve


def station_axis(ax, run, target_m=10.0):
    """Geophone station numbers (1 at the smallest x; :mod:`tomo.analysis.stations`)
    along the top of ``ax``, every n-th about ``target_m`` apart, the last one always."""
    x, numbers = geophone_stations(run)
    if x.size == 0:
        return None
    n = every_nth(x, target_m)
    keep = np.arange(0, x.size, n)
    if keep[-1] != x.size - 1 and x.size - 1 - keep[-1] >= max(n // 2, 1):
        keep = np.append(keep, x.size - 1)
    top = ax.secondary_xaxis("top")
    top.set_xticks(x[keep], [str(k) for k in numbers[keep]])
    top.tick_params(labelsize=7, length=2.5, pad=1.5)
    top.set_xlabel("Geophone station", fontsize=8, labelpad=2)
    return top


def display_cells(run, values):
    """``values`` (nz, nx) with the air cell just above each column's top ground cell
    filled from the cell below when the ground passes through it, so that an image
    clipped to the terrain reaches the ground line instead of stopping at the first
    cell centre below it. For drawing only."""
    out = np.ma.masked_invalid(np.ma.array(values, dtype=float, copy=True))
    ground_rows = np.isfinite(np.asarray(run.velocity, float))
    cell = abs(run.z[0] - run.z[1])
    surface = ground_elevation(run, run.x)
    for j in range(run.x.size):
        rows = np.flatnonzero(ground_rows[:, j])
        if rows.size == 0 or rows[0] == 0:
            continue
        top, above = rows[0], rows[0] - 1
        if surface[j] > run.z[above] - cell / 2 and not np.ma.getmaskarray(out)[top, j]:
            out[above, j] = out[top, j]
    return out


def colorbar(fig, ax, image, label, **kwargs):
    """A colour bar as tall as the (aspect-locked) section axis, just right of it."""
    cax = ax.inset_axes([1.015, 0.0, 0.022, 1.0])
    bar = fig.colorbar(image, cax=cax, **kwargs)
    bar.set_label(label)
    return bar


def colour_range(run):
    """Velocity colour limits (m/s) from the cells above the depth of investigation, so
    that poorly covered deep cells do not set the scale; and whether cells beyond
    them exist (for the colour bar's arrows)."""
    v = np.asarray(run.velocity, float)
    cov = covered(run)
    doi = investigation_elevation(run)
    with np.errstate(invalid="ignore"):
        trusted = cov & (np.asarray(run.z, float)[:, None] >= doi[None, :])
    values = v[trusted] if trusted.any() else v[cov]
    if values.size == 0:
        return 0.0, 1.0, "neither"
    lo, hi = float(values.min()), float(values.max())
    shown = v[cov]
    below, above = bool(np.any(shown < lo)), bool(np.any(shown > hi))
    extend = {(False, False): "neither", (True, False): "min", (False, True): "max",
              (True, True): "both"}[(below, above)]
    return lo, hi, extend


def contour_levels(values, n=6):
    """Round contour velocities (m/s) spanning ``values`` (NaN ignored)."""
    v = np.asarray(values, float)
    v = v[np.isfinite(v)]
    if v.size == 0:
        return np.array([])
    levels = MaxNLocator(nbins=n, steps=[1, 2, 2.5, 5, 10]).tick_values(v.min(), v.max())
    return levels[(levels > v.min()) & (levels < v.max())]


def _legend(ax, extra=(), blank_label="no ray reaches"):
    handles, labels = ax.get_legend_handles_labels()
    handles = list(handles) + [Patch(facecolor=BLANK, edgecolor=style.GREY, label=blank_label)] + list(extra)
    ax.legend(handles=handles, loc="upper center", bbox_to_anchor=(0.5, -0.2), ncol=2, frameon=False,
              handlelength=1.8, columnspacing=1.5)


def velocity_section(run, contours_m_s=None, vertical_exaggeration=None, title="Velocity section"):
    """The final velocity model over the terrain.

    Parameters
    ----------
    run : tomo.runfile.RunData
    contours_m_s : sequence of float, optional
        Iso-velocity contour levels, m/s; round values spanning the covered model by default.
    vertical_exaggeration : float, optional
        Vertical over horizontal scale; chosen from the section's shape by default.

    Returns
    -------
    matplotlib.figure.Figure
    """
    fig = style.new_figure(height_in=4.2)
    ax = fig.add_subplot(1, 1, 1)
    clip, ve = draw_base(ax, run, vertical_exaggeration)
    cov = covered(run)
    v = np.ma.masked_where(~cov, np.asarray(run.velocity, float))
    xe, ze = _edges(run.x), _edges(run.z)
    finite = np.asarray(run.velocity)[cov]
    vmin, vmax, extend = colour_range(run)
    image = ax.pcolormesh(xe, ze, display_cells(run, v), cmap=style.VELOCITY_CMAP, vmin=vmin, vmax=vmax,
                          shading="flat", zorder=1, rasterized=True)
    image.set_clip_path(clip)
    levels = contour_levels(finite) if contours_m_s is None else np.asarray(contours_m_s, float)
    if levels.size and finite.size:
        cs = ax.contour(run.x, run.z, v, levels=levels, colors="white", linewidths=0.8, zorder=3)
        # white on the dark end of the map, a thin dark edge for the light end
        cs.set(path_effects=[patheffects.withStroke(linewidth=1.7, foreground="#333333")])
        cs.set_clip_path(clip)
        labels = ax.clabel(cs, fmt="%.0f", fontsize=7, inline=True, inline_spacing=2)
        for t in labels:
            t.set_color(style.BLACK)
            t.set_bbox({"boxstyle": "round,pad=0.1", "facecolor": "white", "edgecolor": "none", "alpha": 0.8})
    colorbar(fig, ax, image, "P-wave velocity (m/s)", extend=extend)
    station_axis(ax, run)
    ax.set_title(f"{title} (vertical exaggeration {ve:g}:1; contours in m/s)")
    _legend(ax)
    return fig


def coverage_section(run, vertical_exaggeration=None, title="Ray coverage"):
    """Ray length per model cell (m, log scale) over the terrain; cells no ray crosses pale grey."""
    fig = style.new_figure(height_in=4.2)
    ax = fig.add_subplot(1, 1, 1)
    clip, ve = draw_base(ax, run, vertical_exaggeration)
    cov = np.asarray(run.coverage, float)
    mask = ~ray_cells(run)
    data = np.ma.masked_where(mask, cov)
    positive = cov[~mask]
    if positive.size:
        lo = max(float(np.percentile(positive, 2)), 1e-3)
        hi = max(float(positive.max()), lo * 10)
        # cells no ray crosses take the legend's pale grey, also inside the ray envelope
        cmap = matplotlib.colormaps[style.COVERAGE_CMAP].with_extremes(bad=BLANK)
        image = ax.pcolormesh(_edges(run.x), _edges(run.z), display_cells(run, data), cmap=cmap,
                              norm=LogNorm(vmin=lo, vmax=hi), shading="flat", zorder=1, rasterized=True)
        image.set_clip_path(clip)
        bar = colorbar(fig, ax, image, "Ray length in cell (m)", extend="min")
        plain = FuncFormatter(lambda value, _: f"{value:g}")
        bar.ax.yaxis.set_major_formatter(plain)
        bar.ax.yaxis.set_minor_formatter(FuncFormatter(lambda value, _: f"{value:g}" if str(value)[0] in "25" else ""))
    station_axis(ax, run)
    ax.set_title(f"{title} (vertical exaggeration {ve:g}:1)")
    _legend(ax, blank_label="no ray crosses the cell")
    return fig
