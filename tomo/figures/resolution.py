"""A resolution test of a run: true and recovered perturbation and the recovery score."""

from __future__ import annotations

import numpy as np

from ..analysis.coverage import covered
from . import style
from .hatching import draw_unresolved
from .section import colorbar, display_cells, draw_base

__all__ = ["resolution_figure", "PERTURBATION_CMAP"]

#: Diverging map for perturbations: red slower, blue faster (the usual tomography
#: convention); ColorBrewer's RdBu reads with the common colour-vision deficiencies.
PERTURBATION_CMAP = "RdBu"
SCORE_CMAP = "viridis"


def _edges(centres):
    c = np.asarray(centres, float)
    mid = (c[1:] + c[:-1]) / 2
    return np.concatenate([[2 * c[0] - mid[0]], mid, [2 * c[-1] - mid[-1]]])


def _panel(fig, ax, run, values, title, cmap, vmin, vmax, label, extend="neither"):
    clip, ve = draw_base(ax, run, hatch=False)
    image = ax.pcolormesh(_edges(run.x), _edges(run.z), display_cells(run, values), cmap=cmap, vmin=vmin,
                          vmax=vmax, shading="flat", zorder=1, rasterized=True)
    image.set_clip_path(clip)
    colorbar(fig, ax, image, label, extend=extend)
    ax.set_title(f"{title} (vertical exaggeration {ve:g}:1)")
    return clip


def resolution_figure(run, title=None):
    """Three sections of the run's resolution test: the true perturbation, the
    recovered one (% of velocity) and the per-cell semblance with its threshold.

    Cells outside the ray envelope are blank, as in the velocity section.

    Returns
    -------
    matplotlib.figure.Figure or None
        None for a run without a resolution test.
    """
    record = getattr(run, "resolution", None)
    if record is None:
        return None
    cov = covered(run)
    true_pct = 100.0 * np.expm1(np.asarray(record.true, float))
    rec_pct = 100.0 * np.expm1(np.asarray(record.recovered, float))
    peak = float(np.nanmax(np.abs(true_pct))) or 1.0
    fig = style.new_figure(height_in=9.5)
    axes = fig.subplots(3, 1, gridspec_kw={"hspace": 0.55})
    _panel(fig, axes[0], run, np.ma.masked_where(~cov, true_pct), "True perturbation", PERTURBATION_CMAP, -peak,
           peak, "Velocity change (%)")
    _panel(fig, axes[1], run, np.ma.masked_where(~cov, rec_pct), "Recovered perturbation", PERTURBATION_CMAP, -peak,
           peak, "Velocity change (%)", extend="both")
    score = np.ma.masked_where(~cov | ~np.isfinite(record.semblance), record.semblance)
    clip = _panel(fig, axes[2], run, score, "Recovery score", SCORE_CMAP, 0.5, 1.0,
                  "Semblance (1 exact, 0.5 nothing)", extend="min")
    handle = draw_unresolved(axes[2], run, clip)
    s = record.summary(run)
    head = title or f"Resolution test: {record.label()}"
    fig.suptitle(f"{head}\nchi2 {record.chi2_start:.2f} at the final model, {record.chi2:.2f} after "
                 f"{record.iterations} iteration(s); in the well-covered cells median semblance "
                 f"{s['semblance']:.2f}, correlation {s['correlation']:.2f}, "
                 f"{100 * s['resolved_share']:.0f} % resolved", fontsize=9)
    del handle  # in the legend already (draw_unresolved adds it)
    axes[2].legend(loc="upper center", bbox_to_anchor=(0.5, -0.3), ncol=2, frameon=False)
    return fig
