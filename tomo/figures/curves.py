"""Travel-time curve figures: the QC view of all shots and the fitted branches per shot."""

from __future__ import annotations

import math

import numpy as np

from . import style

__all__ = ["qc_figure", "branches_figure"]

#: Pick markers per shot; stars, downward triangles and diamonds are kept for shots,
#: geophones and boreholes (:mod:`tomo.figures.style`).
_MARKERS = ["o", "s", "^", "P", "X", "<", ">", "h", "p"]
#: Crossovers: white squares (not the borehole diamond).
_CROSSOVER = "s"
#: Okabe-Ito vermillion, reserved for flags.
FLAG = "#D55E00"


def _shot_colors(n):
    # keep vermillion for flags: use the rest of the palette for shots
    colours = [c for c in style.PALETTE if c not in (FLAG, "#F0E442")]
    return [colours[k % len(colours)] for k in range(n)]


def qc_figure(picks, report, path):
    """All shots' travel-time curves against geophone position, flagged picks marked.

    Parameters
    ----------
    picks : Picks
    report : QCReport
        From :func:`tomo.qc.check_line`.
    path : str or Path
        PNG or PDF.
    """
    src, src_index = picks.sources()
    fig = style.new_figure(height_in=4.2)
    ax = fig.add_subplot(1, 1, 1)
    colours = _shot_colors(len(src))
    for k, (sx, _) in enumerate(src):
        sel = np.flatnonzero(src_index == k)
        order = sel[np.argsort(picks.receiver_x[sel])]
        x, t = picks.receiver_x[order], picks.time_s[order] * 1e3
        for side in (-1, 1):
            part = np.sign(x - sx) == side
            ax.plot(x[part], t[part], "-", color=colours[k], lw=0.8, alpha=0.8)
        ax.plot(x, t, _MARKERS[k % len(_MARKERS)], color=colours[k], ms=3, mfc="none", mew=0.8,
                label=f"shot {sx:g} m")
        ax.plot([sx], [0], clip_on=False, zorder=5, **style.shot_style(colours[k], 9))
    ax.plot([], [], label="shot (colour of its picks)", **style.shot_style(style.GREY, 8))
    mask = report.outlier_mask
    if mask.size and mask.any():
        ax.plot(picks.receiver_x[mask], picks.time_s[mask] * 1e3, "o", ms=9, mfc="none", mec=FLAG, mew=1.6,
                label=f"outlier ({int(mask.sum())})", zorder=6)
    flagged = [p for p in report.reciprocal_pairs if p["flagged"]]
    for n, p in enumerate(flagged):
        ax.plot([p["shot_b_x"], p["shot_a_x"]], [p["time_ab_ms"], p["time_ba_ms"]], "x", color=FLAG, ms=8, mew=1.6,
                label="reciprocal pair beyond tolerance" if n == 0 else None, zorder=6)
    ax.set_xlabel("Distance along line (m)")
    ax.set_ylabel("First-arrival time (ms)")
    ax.set_ylim(bottom=0)
    ax.set_title(f"Pick QC: {report.n_shots} shots, {report.n_picks} picks "
                 f"({len(report.outliers)} outlier(s), {report.n_flagged_reciprocals} reciprocal pair(s) flagged)")
    ax.legend(loc="upper left", bbox_to_anchor=(1.01, 1.0), frameon=False, fontsize=7)
    fig.tight_layout()
    return style.save(fig, path)


def branches_figure(result, path, picks=None, max_columns=3):
    """Picks and fitted branches per shot, labelled with velocities, crossovers marked.

    Parameters
    ----------
    result : LayeredResult
    path : str or Path
    picks : Picks, optional
        The picks interpreted; picks that the fits left out (outliers) are then marked.
    max_columns : int
        Panels per row.
    """
    by_shot = {}
    for fit, lob in zip(result.sides, result.layer_of_branch):
        by_shot.setdefault(round(fit.shot_x, 4), []).append((fit, lob))
    shots = sorted(by_shot)
    n = max(len(shots), 1)
    ncol = min(max_columns, n)
    nrow = math.ceil(n / ncol)
    fig = style.new_figure(height_in=min(2.6 * nrow + 0.6, 9.5))
    axes = fig.subplots(nrow, ncol, sharex=True, sharey=True, squeeze=False)
    tmax = max([float(np.max(f.times_s)) for f, _ in sum(by_shot.values(), []) if f.times_s.size] + [1e-3]) * 1e3
    layer_colours = [style.PALETTE[k] for k in (0, 2, 1, 5, 4)]
    labels = []
    for ax, sx in zip(axes.flat, shots):
        for fit, lob in by_shot[sx]:
            xs = fit.shot_x + fit.side * fit.offsets_m
            ax.plot(xs, fit.times_s * 1e3, "o", ms=2.5, color=style.GREY, mfc="none", mew=0.6)
            if not fit.ok:
                continue
            # a held-through-origin direct wave starts at the shot; other first branches
            # (off-end shots) start at their first pick
            start = 0.0 if fit.branches[0].intercept_s == 0.0 else float(fit.offsets_m.min())
            edges = [start] + list(fit.crossovers_m) + [float(fit.offsets_m.max())]
            for b, layer, u0, u1 in zip(fit.branches, lob, edges[:-1], edges[1:]):
                u0, u1 = max(u0, 0.0), max(u1, 0.0)
                colour = layer_colours[(max(layer, 1) - 1) % len(layer_colours)] if layer else style.BLACK
                uu = np.array([u0, u1])
                ax.plot(fit.shot_x + fit.side * uu, b.time(uu) * 1e3, "-", color=colour, lw=1.4)
                um = 0.5 * (u0 + u1)
                # below the line, on the side away from the shot, clear of the picks
                # the first branches of the two sides meet at the shot: push their labels
                # apart, away from the shot
                first = b.index == 1
                labels.append(ax.annotate(f"{b.velocity_m_s:.0f}", (fit.shot_x + fit.side * um,
                                                                    float(b.time(um)) * 1e3),
                                          xytext=(fit.side * (5 if first else 3), -10), textcoords="offset points",
                                          ha=("left" if fit.side > 0 else "right") if first else "center",
                                          fontsize=7, color=colour, zorder=7,
                                          # legible where a label sits on a branch or a pick
                                          bbox={"boxstyle": "round,pad=0.1", "fc": "white", "ec": "none",
                                                "alpha": 0.8}))
            for c, b in zip(fit.crossovers_m, fit.branches[:-1]):
                if math.isfinite(c) and c > 0:
                    ax.plot(fit.shot_x + fit.side * c, float(b.time(c)) * 1e3, _CROSSOVER, ms=4, color=style.BLACK,
                            mfc="white", mew=0.9, zorder=5)
        if picks is not None:
            used = np.zeros(len(picks), bool)
            for f, _ in by_shot[sx]:
                used[f.pick_index] = True
            out = ~used & (np.abs(picks.source_x - sx) < 1e-3)
            if np.any(out):
                ax.plot(picks.receiver_x[out], picks.time_s[out] * 1e3, "x", color=FLAG, ms=6, mew=1.4, zorder=6)
        ax.plot([sx], [0], clip_on=False, zorder=5, **style.shot_style(size=9))
        ax.set_title(f"shot at {sx:g} m", fontsize=9)
        ax.set_ylim(0, tmax * 1.12)
    for ax in axes.flat[len(shots):]:
        ax.set_visible(False)
    for ax in axes[-1, :]:
        ax.set_xlabel("Distance along line (m)")
    for ax in axes[:, 0]:
        ax.set_ylabel("Time (ms)")
    from matplotlib.lines import Line2D

    handles = [Line2D([], [], color=layer_colours[k % len(layer_colours)], lw=1.4,
                      label=f"layer {k + 1} ({lay.velocity_m_s:.0f} m/s)") for k, lay in enumerate(result.layers)]
    handles += [Line2D([], [], ls="none", marker="o", mfc="none", color=style.GREY, ms=4, label="picks"),
                Line2D([], [], ls="none", marker=_CROSSOVER, mfc="white", color=style.BLACK, ms=4, label="crossover"),
                Line2D([], [], label="shot", **style.shot_style(size=8))]
    if any(0 in lob for lob in result.layer_of_branch):
        handles.append(Line2D([], [], color=style.BLACK, lw=1.4, label="branch matching no layer"))
    if picks is not None:
        handles.append(Line2D([], [], ls="none", marker="x", color=FLAG, ms=5, mew=1.4, label="left out (outlier)"))
    fig.legend(handles=handles, loc="lower center", ncol=min(len(handles), 4), frameon=False, fontsize=7,
               bbox_to_anchor=(0.5, 0.0))
    fig.suptitle("Travel-time branches (labels: apparent velocity, m/s)", fontsize=10)
    fig.tight_layout(rect=(0, 0.07 if nrow > 1 else 0.1, 1, 1))
    _declutter(fig, labels)
    return style.save(fig, path)


def _declutter(fig, labels, tries=6):
    """Move velocity labels that would overlap an earlier one (or leave their panel)
    down, then up, by a label height at a time: a label is for reading."""
    renderer = fig.canvas.get_renderer()
    placed = {}
    for text in labels:
        ax = text.axes
        box_ax = ax.get_window_extent(renderer)
        x0, y0 = text.xyann
        height_pt = text.get_window_extent(renderer).height * 72.0 / fig.dpi + 1.0
        for k in range(tries + 1):
            # 0, -1, +1, -2, +2, ... label heights from the first choice
            step = (k + 1) // 2 * (-1 if k % 2 else 1)
            text.xyann = (x0, y0 + step * height_pt)
            box = text.get_window_extent(renderer).expanded(1.05, 1.1)
            inside = box.x0 >= box_ax.x0 and box.x1 <= box_ax.x1 and box.y0 >= box_ax.y0
            if inside and not any(box.overlaps(other) for other in placed.get(ax, [])):
                break
        else:
            text.xyann = (x0, y0)
            box = text.get_window_extent(renderer)
        placed.setdefault(ax, []).append(box)
