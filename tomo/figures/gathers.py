"""Shot gathers with their picks, and all picks of a line against offset, for review.

The gather figure draws every trace normalised to its own largest amplitude (so weak far
traces read as clearly as near ones), as a wiggle with its positive lobes filled, time
increasing downwards and geophone position across; each pick is a short bar across its
trace with a +-1 sigma span along it, automatic picks in one colour, picks re-made from
the neighbours' trend or by hand in others, and traces without a pick marked at the top
with a letter for the reason (and drawn in grey).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from . import style

__all__ = ["gather_figure", "offset_figure", "write_gather_figures"]

#: Colour of each pick status, and the letter that marks a trace without a pick.
STATUS_COLOR = {"picked": style.color(3), "re-picked": style.color(5), "edited": style.color(2),
                "added": style.color(2), "corrected": style.color(2)}
UNPICKED_LETTER = {"dead": "D", "noisy": "N", "clipped": "C", "inconsistent": "I", "at shot": "S",
                   "dropped": "X"}


def _time_window_ms(gather, rows):
    times = [r.time_s for r in rows if r.picked]
    end = gather.delay_s + gather.n_samples * gather.dt_s
    top = min(max(times) * 1.25 + 0.01, end) if times else end
    return gather.delay_s * 1e3, top * 1e3


def gather_figure(gather, rows, title=None):
    """The traces of ``gather`` as wiggles with their picks (``rows``: its TraceRows)."""
    fig = style.new_figure(height_in=5.5)
    ax = fig.add_subplot(1, 1, 1)
    t_ms = gather.time_s * 1e3
    t0, t1 = _time_window_ms(gather, rows)
    shown = (t_ms >= t0) & (t_ms <= t1)
    spacing = float(np.median(np.diff(np.sort(gather.receiver_x)))) if gather.n_traces > 1 else 1.0
    half = 0.45 * spacing
    data = (gather.data - gather.data.mean(axis=1, keepdims=True)) * gather.polarity[:, None]
    by_receiver = {round(r.receiver_x, 4): r for r in rows}
    for k in range(gather.n_traces):
        trace = data[k, shown]
        peak = np.max(np.abs(trace))
        wiggle = trace / peak * half if peak > 0 else trace * 0
        x0 = gather.receiver_x[k]
        row = by_receiver.get(round(x0, 4))
        # traces without a pick in grey, so that the eye runs along the picked ones
        ink = style.BLACK if row is None or row.picked else style.GREY
        ax.plot(x0 + wiggle, t_ms[shown], color=ink, lw=0.4)
        ax.fill_betweenx(t_ms[shown], x0, x0 + np.maximum(wiggle, 0), color=ink, lw=0)
    labelled = set()
    for x0 in gather.receiver_x:
        r = by_receiver.get(round(x0, 4))
        if r is None:
            continue
        if r.picked:
            color = STATUS_COLOR.get(r.status, style.color(3))
            label = None if r.status in labelled else r.status
            labelled.add(r.status)
            t, s = r.time_s * 1e3, r.sigma_s * 1e3
            ax.plot([x0 - half, x0 + half], [t, t], color=color, lw=1.6, label=label)
            ax.plot([x0, x0], [t - s, t + s], color=color, lw=3.0, alpha=0.6, solid_capstyle="butt")
        else:
            ax.text(x0, t0, UNPICKED_LETTER.get(r.status, "?"), color=style.color(0), ha="center", va="bottom",
                    fontsize=7, fontweight="bold")
    ax.axvline(gather.source_x, color=style.GREY, lw=0.8, ls="--")
    ax.plot([gather.source_x], [t0], marker="*", color=style.color(1), ms=10, clip_on=False, zorder=5)
    ax.set_ylim(t1, t0)
    ax.set_xlim(gather.receiver_x.min() - spacing, gather.receiver_x.max() + spacing)
    ax.set_xlabel("geophone position x (m)")
    ax.set_ylabel("time after the shot (ms)")
    ax.grid(False)
    missing = sorted({r.status for r in rows if not r.picked})
    key = "; ".join(f"{UNPICKED_LETTER.get(s, '?')} {s}" for s in missing)
    ax.set_title((title or f"shot at x = {gather.source_x:g} m") + (f"\nno pick: {key}" if key else ""), pad=14)
    if labelled:
        ax.legend(loc="lower left", title="pick (bar: +-1 sigma)", framealpha=0.9)
    return fig


def offset_figure(rows):
    """Every pick of the line against signed offset, one colour per shot, +-1 sigma bars."""
    fig = style.new_figure(height_in=4.5)
    ax = fig.add_subplot(1, 1, 1)
    shots = sorted({round(r.source_x, 4) for r in rows})
    for k, sx in enumerate(shots):
        mine = [r for r in rows if round(r.source_x, 4) == sx and r.picked]
        if not mine:
            continue
        off = np.array([r.receiver_x - r.source_x for r in mine])
        t = np.array([r.time_s for r in mine]) * 1e3
        s = np.array([r.sigma_s for r in mine]) * 1e3
        order = np.argsort(off)
        ax.errorbar(off[order], t[order], yerr=s[order], fmt="o-", ms=2.5, lw=0.6, elinewidth=0.8,
                    color=style.color(k), label=f"{sx:g} m")
    ax.set_xlabel("offset, geophone minus shot position (m)")
    ax.set_ylabel("first-arrival time (ms)")
    ax.set_title("all picks against offset (bars: +-1 sigma)")
    if len(shots) <= 16:
        ax.legend(title="shot at", ncol=2, fontsize=7, loc="upper center")
    return fig


def write_gather_figures(run, folder):
    """A PNG per gather (``gather-<record>.png``) and ``picks-offset.png`` into ``folder``.

    ``run`` is a :class:`tomo.records.workflow.PickRun`. Returns the paths written.
    """
    folder = Path(folder)
    paths = []
    for gather in run.gathers:
        rows = [r for r in run.rows if abs(r.source_x - gather.source_x) < 1e-4
                and np.any(np.abs(gather.receiver_x - r.receiver_x) < 1e-4)]
        name = Path(gather.path).stem
        fig = gather_figure(gather, rows, title=f"{Path(gather.path).name}: shot at x = {gather.source_x:g} m")
        paths.append(style.save(fig, folder / f"gather-{name}.png"))
    paths.append(style.save(offset_figure(run.rows), folder / "picks-offset.png"))
    return paths
