"""How well a run explains its picks: travel times, residuals and the misfit history.

Residual = observed - computed time (ms). The weighted misfit is chi-squared, the mean
of (residual / sigma)^2; a model that explains the picks to their noise has
chi-squared near 1 (the discrepancy principle: Morozov 1966; Constable, Parker &
Constable 1987, Geophysics 52, "Occam's inversion").
"""

from __future__ import annotations

import numpy as np
from matplotlib.ticker import FuncFormatter

from . import style

__all__ = ["traveltime_fit", "residual_figure", "misfit_history"]


def _shots(run):
    p = run.picks
    key = np.round(np.column_stack([p["source_x"], p["source_z"]]), 4)
    shots, index = np.unique(key, axis=0, return_inverse=True)
    return shots, index.ravel()


def traveltime_fit(run, title="Observed and computed first-arrival times"):
    """Observed picks (points) and the final model's times (lines) for every shot,
    against geophone position. Each shot has its own colour; its position is starred."""
    p = run.picks
    shots, index = _shots(run)
    fig = style.new_figure(height_in=4.6)
    ax = fig.add_subplot(1, 1, 1)
    for k, (sx, _) in enumerate(shots):
        sel = index == k
        order = np.argsort(p["receiver_x"][sel])
        rx = p["receiver_x"][sel][order]
        colour = style.color(k)
        ax.plot(rx, p["observed_ms"][sel][order], "o", ms=2.8, mfc="none", mec=colour, mew=0.8, zorder=3)
        # a line between geophones on either side of the shot would cut across it
        for side in (rx < sx, rx > sx):
            if side.sum() > 0:
                ax.plot(rx[side], p["computed_ms"][sel][order][side], "-", color=colour, lw=1.0, zorder=2)
        ax.plot([sx], [0.0], clip_on=False, zorder=4, **style.shot_style(colour, 8))
    ax.plot([], [], "o", ms=3, mfc="none", mec=style.GREY, label="observed pick")
    ax.plot([], [], "-", color=style.GREY, label="computed in final model")
    ax.plot([], [], label="shot position", **style.shot_style(style.GREY, 8))
    ax.set_ylim(bottom=0.0)
    ax.set_xlabel("Geophone position along line (m)")
    ax.set_ylabel("First-arrival time (ms)")
    ax.set_title(f"{title}: {len(shots)} shots, {p['observed_ms'].size} picks, RMS {run.rms_ms:.2f} ms")
    ax.legend(loc="upper center", bbox_to_anchor=(0.5, -0.12), ncol=3, frameon=False)
    return fig


def residual_figure(run, title="Residuals (observed - computed)"):
    """Residuals against signed offset, and their distribution beside the normal
    distribution of the stated pick uncertainty."""
    p = run.picks
    r = run.residual_ms
    offset = p["receiver_x"] - p["source_x"]
    sigma = np.asarray(p["sigma_ms"], float)
    sigma_typ = float(np.median(sigma[np.isfinite(sigma)])) if np.any(np.isfinite(sigma)) else float("nan")
    fig = style.new_figure(height_in=3.4)
    gs = fig.add_gridspec(1, 3, wspace=0.08)
    ax = fig.add_subplot(gs[0, :2])
    ah = fig.add_subplot(gs[0, 2], sharey=ax)
    outlier = np.abs(r) > 3 * sigma
    ax.plot(offset[~outlier], r[~outlier], "o", ms=2.5, color=style.PALETTE[0], alpha=0.7, mew=0,
            label="pick")
    if outlier.any():
        ax.plot(offset[outlier], r[outlier], "x", ms=4.5, color=style.PALETTE[3], mew=1.2,
                label=f"beyond 3 σ ({int(outlier.sum())})")
    if np.isfinite(sigma_typ):
        for s, ls in ((1, "--"), (-1, "--")):
            ax.axhline(s * sigma_typ, color=style.BLACK, lw=0.8, ls=ls)
        ax.plot([], [], "--", color=style.BLACK, lw=0.8, label=f"± pick σ ({sigma_typ:.2g} ms)")
    ax.axhline(0.0, color=style.GREY, lw=0.8)
    ax.set_xlabel("Offset, geophone - shot (m)")
    ax.set_ylabel("Residual (ms)")
    ax.legend(loc="upper left", ncol=3, framealpha=0.9)
    lim = max(float(np.nanmax(np.abs(r))) * 1.15, 3 * sigma_typ if np.isfinite(sigma_typ) else 0.0, 0.1)
    ax.set_ylim(-lim, lim * 1.35)  # head room for the legend
    bins = np.linspace(-lim, lim, 31)
    ah.hist(r, bins=bins, orientation="horizontal", color=style.PALETTE[4], edgecolor="white", lw=0.4,
            density=True, label="residuals")
    if np.isfinite(sigma_typ):
        t = np.linspace(-lim, lim, 200)
        # normal probability density with the picks' standard deviation
        pdf = np.exp(-0.5 * (t / sigma_typ) ** 2) / (sigma_typ * np.sqrt(2 * np.pi))
        ah.plot(pdf, t, color=style.PALETTE[3], lw=1.2, label="normal, pick σ")
    ah.set_xlabel("Density (1/ms)")
    ah.tick_params(labelleft=False)
    ah.legend(loc="upper right", framealpha=0.9)
    mean = float(np.mean(r))
    fig.suptitle(f"{title}: mean {mean:+.2f} ms, RMS {float(np.sqrt(np.mean(r ** 2))):.2f} ms, "
                 f"chi-squared {run.chi2:.2f}", y=0.99)
    return fig


def misfit_history(run, title="Misfit history"):
    """Chi-squared (log scale, target 1), RMS residual (ms) and the regularisation
    weight against iteration; iteration 0 is the starting model."""
    h = run.history
    chi2 = np.asarray(h.get("chi2", []), float)
    it = np.arange(chi2.size)
    fig = style.new_figure(height_in=2.8)
    axes = fig.subplots(1, 3)
    ax = axes[0]
    ax.semilogy(it, chi2, "o-", color=style.PALETTE[0], ms=4)
    ax.axhline(1.0, color=style.PALETTE[3], ls="--", lw=1.0, label="target (1)")
    ax.set_ylabel("Chi-squared (no unit)")
    ax.legend(loc="upper right")
    rms = np.asarray(h.get("rms_ms", []), float)
    axes[1].plot(np.arange(rms.size), rms, "s-", color=style.PALETTE[2], ms=4)
    sigma = np.asarray(run.picks["sigma_ms"], float)
    if np.any(np.isfinite(sigma)):
        axes[1].axhline(float(np.sqrt(np.nanmean(sigma**2))), color=style.PALETTE[3], ls="--", lw=1.0,
                        label="pick σ (RMS)")
        axes[1].legend(loc="upper right")
    axes[1].set_ylabel("RMS residual (ms)")
    axes[1].set_ylim(bottom=0.0)
    lam = np.asarray(h.get("lambda", []), float)
    if np.any(np.isfinite(lam) & (lam > 0)):
        axes[2].semilogy(np.arange(lam.size), lam, "^-", color=style.PALETTE[1], ms=4)
    axes[2].set_ylabel("Regularisation weight (no unit)")
    plain = FuncFormatter(lambda value, _: f"{value:g}")
    for a in axes:
        a.set_xlabel("Iteration")
        a.xaxis.get_major_locator().set_params(integer=True)
        if a.get_yscale() == "log":
            # ticks at 1, 2, 5 x 10^k around the data (every point between labelled
            # ticks), written 2, 5, 10 rather than 2 x 10^0
            style.log_ticks_covering(a, chi2 if a is ax else lam)
            a.yaxis.set_major_formatter(plain)
            a.yaxis.set_minor_formatter(FuncFormatter(lambda value, _: ""))
    fig.suptitle(f"{title}: {run.iterations} iterations, stopped because {run.stop_reason or 'not recorded'}",
                 y=0.98)
    fig.tight_layout(rect=(0, 0, 1, 0.93))
    return fig
