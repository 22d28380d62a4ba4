"""The shared look of tomo's figures.

Line colours are the Okabe-Ito palette (Okabe & Ito 2008, "Color Universal Design"),
distinguishable with the common colour-vision deficiencies. Velocity images use
matplotlib's "cividis" (Nuñez, Anderton & Renslow 2018, PLoS ONE 13), designed to read
the same with and without deficient colour vision.
"""

from __future__ import annotations

import matplotlib
import numpy as np

matplotlib.use("Agg")

import matplotlib.pyplot as plt  # noqa: E402

#: Okabe-Ito colours, in an order that keeps neighbours far apart.
PALETTE = ["#0072B2", "#E69F00", "#009E73", "#D55E00", "#56B4E9", "#CC79A7", "#F0E442", "#000000"]
BLACK = "#000000"
GREY = "#7f7f7f"
VELOCITY_CMAP = "cividis"
COVERAGE_CMAP = "viridis"

#: One symbol per thing in every figure: shots are stars, geophones downward triangles,
#: boreholes diamonds (no other marker uses these shapes).
SHOT_MARKER = "*"
SHOT_COLOR = PALETTE[3]        # vermillion, with a black edge
GEOPHONE_MARKER = "v"
GEOPHONE_COLOR = BLACK
BOREHOLE_MARKER = "D"
BOREHOLE_COLOR = PALETTE[2]    # bluish green


def shot_style(color=None, size=8.5):
    """Keyword arguments of ``ax.plot`` for a shot marker (``color``: a per-shot colour)."""
    return {"marker": SHOT_MARKER, "ls": "none", "ms": size, "color": color or SHOT_COLOR, "mec": BLACK, "mew": 0.5}


#: A4 is 210 mm wide; with margins a full-width figure is about 7 inches.
FULL_WIDTH_IN = 7.0

RC = {
    "font.size": 9,
    "axes.titlesize": 10,
    "axes.labelsize": 9,
    "legend.fontsize": 8,
    "xtick.labelsize": 8,
    "ytick.labelsize": 8,
    "axes.grid": True,
    "grid.alpha": 0.3,
    "savefig.dpi": 200,
    "figure.dpi": 100,
}


def apply():
    """Apply tomo's style to matplotlib's settings (done on import of this module)."""
    matplotlib.rcParams.update(RC)


apply()


def color(k):
    """The k-th palette colour, cycling."""
    return PALETTE[k % len(PALETTE)]


def new_figure(width_in=FULL_WIDTH_IN, height_in=4.0, **kwargs):
    """A figure with tomo's style applied."""
    return plt.figure(figsize=(width_in, height_in), **kwargs)


def save(fig, path):
    """Save a figure (PNG or PDF by extension) atomically and close it."""
    from pathlib import Path

    from ..core.fileio import atomic_path

    path = Path(path)
    with atomic_path(path) as tmp:
        fig.savefig(tmp, format=path.suffix.lstrip(".").lower() or "png", bbox_inches="tight")
    plt.close(fig)
    return path


def log_ticks_covering(ax, values, axis="y"):
    """On a log axis, major ticks at 1, 2, 5 x 10^k from the tick at or below the
    smallest of ``values`` to the tick at or above the largest, and the limits just
    outside them: every point lies between labelled ticks."""
    from matplotlib.ticker import FixedLocator

    v = np.asarray(values, float)
    v = v[np.isfinite(v) & (v > 0)]
    if v.size == 0:
        return
    k0, k1 = int(np.floor(np.log10(v.min()))) - 1, int(np.ceil(np.log10(v.max()))) + 1
    ticks = np.array([m * 10.0 ** k for k in range(k0, k1 + 1) for m in (1, 2, 5)])
    lo, hi = ticks[ticks <= v.min() * (1 + 1e-9)].max(), ticks[ticks >= v.max() * (1 - 1e-9)].min()
    shown = ticks[(ticks >= lo) & (ticks <= hi)]
    target = ax.yaxis if axis == "y" else ax.xaxis
    target.set_major_locator(FixedLocator(shown))
    (ax.set_ylim if axis == "y" else ax.set_xlim)(lo / 1.08, hi * 1.08)
