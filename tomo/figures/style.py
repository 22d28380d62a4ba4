"""The shared look of tomo's figures.

Line colours are the Okabe-Ito palette (Okabe & Ito 2008, "Color Universal Design"),
distinguishable with the common colour-vision deficiencies. Velocity images use
matplotlib's "cividis" (Nuñez, Anderton & Renslow 2018, PLoS ONE 13), designed to read
the same with and without deficient colour vision.
"""

from __future__ import annotations

import matplotlib

matplotlib.use("Agg")

import matplotlib.pyplot as plt  # noqa: E402

#: Okabe-Ito colours, in an order that keeps neighbours far apart.
PALETTE = ["#0072B2", "#E69F00", "#009E73", "#D55E00", "#56B4E9", "#CC79A7", "#F0E442", "#000000"]
BLACK = "#000000"
GREY = "#7f7f7f"
VELOCITY_CMAP = "cividis"
COVERAGE_CMAP = "viridis"

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
