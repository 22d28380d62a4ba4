"""Two tomograms of one line against each other: the same iso-velocity surface in both.

Many velocity models fit the same picks within their noise, and a tomogram keeps much
of its starting model where the picks allow it (measured in tests/test_inversion.py:
runs from the layered start fit the synthetic lines as well as runs from the 1-D
gradient start but keep the layered depths). Inverting the picks again from another
starting model (or with other smoothing) and comparing the two results is the plain
check of how much of a refractor the picks decide (common practice): where the two
contours agree, the picks hold the surface there; where they part, the difference is
a lower bound on its uncertainty.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from ..analysis.coverage import covered
from ..analysis.digest import check_same_picks
from ..analysis.surface import check_contour, contour_surface, refractor_contour
from ..core.errors import InputError
from . import style
from .compare import _HALO, stack_under
from .section import _edges, colorbar, colour_range, display_cells, draw_base

__all__ = ["versus_table", "versus_figure", "versus_summary", "run_labels", "CAPTION", "LABELS"]

#: Caption of the figure in reports.
CAPTION = ("The same iso-velocity surface in two tomograms of these picks (solid: this run; dashed: the "
           "second run), and their difference along the line. Where they part, the picks do not decide "
           "the surface; the difference is a lower bound on its uncertainty there.")

_COLOURS = (style.PALETTE[4], style.PALETTE[1])  # sky blue, orange (Okabe-Ito)

#: Names of the two runs when none are given.
LABELS = ("this run", "other run")


def run_labels(path, run, other_path, other):
    """Legend names of two runs: the file names with their starting models."""
    def one(p, r):
        start = (r.settings or {}).get("start")
        return f"{Path(p).name} ({start} start)" if start else Path(p).name

    labels = (one(path, run), one(other_path, other))
    return labels if labels[0] != labels[1] else (str(path), str(other_path))


def _contour_value(run, other, contour_m_s):
    if contour_m_s is not None:
        return float(contour_m_s)
    for r in (run, other):
        value = refractor_contour(r.layered) if r.layered else None
        if value is not None:
            return float(value)
    raise InputError("give the contour velocity in m/s: neither run holds a layered result to take the "
                     "refractor's velocity from", field="--contour")


def versus_table(run, other, contour_m_s=None, labels=LABELS):
    """The ``contour_m_s`` iso-velocity surface of two runs of one line, column by column.

    Parameters
    ----------
    run, other : RunData
        Two inversions of the same line (e.g. from the layered and the gradient start).
    contour_m_s : float, optional
        Velocity of the surface, m/s; by default the mean of the layer velocities above
        and below the deepest refractor of ``run``'s (else ``other``'s) layered result.
    labels : (str, str)
        Names used in error messages and legends.

    Returns
    -------
    dict
        ``contour_m_s``; on ``run``'s columns ``x`` (m), ``elevation_m`` and
        ``other_elevation_m`` (m, NaN where a column never reaches the velocity),
        ``difference_m`` (other minus this, m; positive: the other run's surface lies
        higher), ``this_constrained`` and ``other_constrained`` (each surface above its
        run's depth of investigation) and ``constrained`` (both, and the column within
        the geophone spread); ``notes``, what the user should know of the comparison (an
        older run file without a picks digest).

    Raises
    ------
    InputError
        If the runs do not hold the same picks and geometry
        (:func:`tomo.analysis.digest.check_same_picks`), share no part of the line, or
        the velocity is outside a model's range.
    """
    notes = check_same_picks(run, other, labels)
    value = _contour_value(run, other, contour_m_s)
    x, xo = np.asarray(run.x, float), np.asarray(other.x, float)
    if min(x.max(), xo.max()) <= max(x.min(), xo.min()):
        raise InputError(f"{labels[0]} (x = {x.min():g} to {x.max():g} m) and {labels[1]} "
                         f"(x = {xo.min():g} to {xo.max():g} m) share no part of the line")
    for r, label in zip((run, other), labels):
        try:
            check_contour(r, value)
        except InputError as exc:
            raise InputError(f"{label}: {exc}") from None
    a, b = contour_surface(run, value), contour_surface(other, value)
    ok = np.isfinite(b.elevation_m)
    if ok.any():
        zb = np.interp(x, b.x[ok], b.elevation_m[ok], left=np.nan, right=np.nan)
    else:
        zb = np.full(x.size, np.nan)
    # a column of this run counts only where the other run's nearest columns are constrained too
    cb = np.interp(x, b.x, b.constrained.astype(float), left=0.0, right=0.0) > 0.5
    diff = zb - a.elevation_m
    # beyond the end geophones only the rays of off-end shots pass, shallow and few:
    # no column there counts, whatever the depth of investigation says
    rx = np.asarray(run.picks["receiver_x"], float)
    spread = (x >= rx.min()) & (x <= rx.max())
    return {"contour_m_s": value, "x": x, "elevation_m": a.elevation_m, "other_elevation_m": zb,
            "difference_m": diff, "constrained": a.constrained & cb & np.isfinite(diff) & spread,
            "this_constrained": a.constrained, "other_constrained": cb, "notes": notes}


def versus_summary(table, labels=LABELS):
    """One line: how far apart the two surfaces are where both are constrained, as a
    depth difference (positive: the other run's surface is deeper)."""
    deeper = -table["difference_m"][table["constrained"]]  # same ground: higher is shallower
    head = f"{table['contour_m_s']:.0f} m/s surface"
    if deeper.size == 0:
        return f"{head}: no column where both lie above the depth of investigation"
    j = int(np.argmax(np.abs(deeper)))
    x_at = table["x"][table["constrained"]][j]
    mean = float(np.mean(deeper))

    def way(d):
        return f"{abs(d):.2f} m {'deeper' if d > 0 else 'shallower'}"

    return (f"{head}: {labels[1]} puts it on average {way(mean)} than {labels[0]} (depth difference "
            f"{mean:+.2f} m, positive deeper; RMS {np.sqrt(np.mean(deeper ** 2)):.2f} m; largest {way(deeper[j])} "
            f"at x = {x_at:g} m), over the {deeper.size} columns of the spread where both lie above the depth "
            "of investigation")


def versus_figure(run, other, contour_m_s=None, labels=LABELS, title=None):
    """The first run's tomogram with both runs' ``contour_m_s`` surfaces, and their
    difference along the line (:func:`versus_table`). Returns a matplotlib Figure."""
    table = versus_table(run, other, contour_m_s, labels)
    value = table["contour_m_s"]
    fig = style.new_figure(height_in=6.2)
    gs = fig.add_gridspec(3, 1, height_ratios=[2.4, 0.34, 1.0], hspace=0.25)
    ax = fig.add_subplot(gs[0])
    clip, ve = draw_base(ax, run)
    cov = covered(run)
    v = np.asarray(run.velocity, float)
    if np.any(cov):
        vmin, vmax, extend = colour_range(run)
        image = ax.pcolormesh(_edges(run.x), _edges(run.z), display_cells(run, np.ma.masked_where(~cov, v)),
                              cmap=style.VELOCITY_CMAP, vmin=vmin, vmax=vmax, shading="flat", zorder=1,
                              rasterized=True)
        image.set_clip_path(clip)
        colorbar(fig, ax, image, "P-wave velocity (m/s)", extend=extend)
    x = table["x"]
    for z, ok, style_, colour, label in (
            (table["elevation_m"], table["this_constrained"], "-", _COLOURS[0], labels[0]),
            (table["other_elevation_m"], table["other_constrained"], "--", _COLOURS[1], labels[1])):
        ax.plot(x, np.where(ok, z, np.nan), style_, color=colour, lw=1.6, zorder=4, path_effects=_HALO,
                label=f"{value:.0f} m/s surface, {label}")
        ax.plot(x, np.where(ok, np.nan, z), ":", color=colour, lw=1.0, zorder=4)
    ax.plot([], [], ":", color=style.GREY, lw=1.0, label="dotted: below that run's depth of investigation")
    ax.set_title(title or f"Two tomograms of one line, colours: {labels[0]} (vertical exaggeration {ve:g}:1)")
    handles, names = ax.get_legend_handles_labels()
    lx = fig.add_subplot(gs[1])
    lx.axis("off")
    lx.legend(handles, names, loc="center", ncol=2, frameon=False, fontsize=7.5, columnspacing=1.5)
    bx = fig.add_subplot(gs[2])
    bx.axhline(0.0, color=style.GREY, lw=0.8)
    d = -table["difference_m"]  # depth difference: the same ground, so higher is shallower
    ok = table["constrained"]
    bx.plot(x, np.where(ok, d, np.nan), "o-", color=_COLOURS[1], ms=2.8, lw=1.0, mec=style.BLACK, mew=0.3,
            label="both above the depth of investigation")
    # the scale follows the constrained columns; the others are drawn at its edge
    lim = max(float(np.max(np.abs(d[ok]))) if ok.any() else float(np.nanmax(np.abs(d), initial=0.0)), 0.5)
    bx.plot(x, np.where(ok, np.nan, np.clip(d, -1.1 * lim, 1.1 * lim)), "o", color=_COLOURS[1], ms=2.8,
            mfc="none", label="either below it, or beyond the spread (clipped)")
    bx.set_xlim(ax.get_xlim())
    bx.set_ylim(-1.2 * lim, 1.2 * lim)
    bx.set_xlabel("Distance along line (m)")
    bx.set_ylabel("Depth difference (m)")
    rms = f"; RMS {np.sqrt(np.mean(d[ok] ** 2)):.2f} m where both are constrained" if ok.any() else ""
    bx.set_title(f"Depth of the dashed surface minus that of the solid one (positive: dashed deeper){rms}",
                 fontsize=8.5)
    bx.legend(loc="best", fontsize=7, frameon=False)
    stack_under(fig, ax, lx, bx)
    return fig
