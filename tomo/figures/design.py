"""The survey design figure: each candidate layout's section with the model's target."""

from __future__ import annotations

import textwrap

import numpy as np

from ..analysis.coverage import covered
from . import style
from .section import colorbar, display_cells, draw_base, view_window

__all__ = ["design_figure", "TARGET_COLOR"]

TARGET_COLOR = style.BLACK
MISSED_COLOR = style.PALETTE[3]  # vermillion: columns not resolved


def _edges(centres):
    c = np.asarray(centres, float)
    mid = (c[1:] + c[:-1]) / 2
    return np.concatenate([[2 * c[0] - mid[0]], mid, [2 * c[-1] - mid[-1]]])


def _window(result):
    """Common (x_min, x_max, z_min, z_max) of every layout's section, m."""
    boxes = np.array([view_window(r.run) for r in result.layouts])
    return boxes[:, 0].min(), boxes[:, 1].max(), boxes[:, 2].min(), boxes[:, 3].max()


def _panel(fig, ax, layout, result, window, vmin, vmax):
    run = layout.run
    clip, _ = draw_base(ax, run, vertical_exaggeration=1.0, band_m_s=result.velocity_m_s)
    v = np.ma.masked_where(~covered(run), np.asarray(run.velocity, float))
    image = ax.pcolormesh(_edges(run.x), _edges(run.z), display_cells(run, v), cmap=style.VELOCITY_CMAP, vmin=vmin,
                          vmax=vmax, shading="flat", zorder=1, rasterized=True)
    image.set_clip_path(clip)
    ground = np.interp(layout.x, run.terrain_x, run.terrain_z)
    target = ground - layout.depth_true_m
    ax.plot(layout.x, target, "--", color=TARGET_COLOR, lw=1.4, zorder=6, label="target in the model")
    # the band's edges as lines too: where it is wide, the shading alone is easy to miss
    for k, edge in enumerate((layout.band_low_m, layout.band_high_m)):
        ax.plot(layout.x, ground - edge, ":", color=style.GREY, lw=1.0, zorder=5,
                label="edges of the band, also below the depth of investigation" if k == 0 else None)
    missed = np.where(layout.resolved, np.nan, target)
    ax.plot(layout.x, missed, "-", color=MISSED_COLOR, lw=3.0, alpha=0.8, zorder=5,
            label=f"not resolved within {result.tolerance_m:g} m")
    x_min, x_max, z_min, z_max = window
    ax.set_xlim(x_min, x_max)
    ax.set_ylim(z_min, z_max)
    verdict = "resolves the target" if layout.resolves else "does not resolve the target"
    detail = textwrap.fill(layout.reason or f"{100 * layout.resolved_share:.0f} % of the region resolved", 110)
    ax.set_title(f"{layout.name}: {layout.n_shots} shots x {layout.n_geophones} geophones: {verdict}\n{detail}",
                 fontsize=8.5)
    return image


def design_figure(result):
    """One section per layout (its central inversion, blank where no ray goes), the
    model's target surface dashed, its unresolved stretches marked, the ensemble's band
    (hatched above the depth of investigation, its edges dotted everywhere) and median
    where the inversion reaches the target's velocity; common axes.

    Returns
    -------
    matplotlib.figure.Figure
    """
    n = len(result.layouts)
    window = _window(result)
    ve = 1.0
    width = window[1] - window[0]
    height = window[3] - window[2]
    panel_in = max(1.6, min(3.2, style.FULL_WIDTH_IN * 0.8 * height / width * ve))
    fig = style.new_figure(height_in=1.4 + n * (panel_in + 0.7))
    axes = np.atleast_1d(fig.subplots(n, 1, gridspec_kw={"hspace": 0.7}))
    cov = [np.asarray(r.run.velocity, float)[covered(r.run)] for r in result.layouts]
    values = np.concatenate([c for c in cov if c.size]) if any(c.size for c in cov) else np.array([0.0, 1.0])
    vmin, vmax = float(np.percentile(values, 1)), float(np.percentile(values, 99))
    image = None
    for ax, layout in zip(axes, result.layouts):
        image = _panel(fig, ax, layout, result, window, vmin, vmax)
    colorbar(fig, axes[0], image, "P-wave velocity (m/s)")
    choice = "none resolves the target" if result.choice is None else f"cheapest that resolves it: {result.choice.name}"
    fig.suptitle(f"Survey design: {result.target}, within {result.tolerance_m:g} m; {choice}", fontsize=10)
    axes[-1].legend(loc="upper center", bbox_to_anchor=(0.5, -0.35), ncol=2, frameon=False)
    return fig
