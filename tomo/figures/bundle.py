"""Every figure of a run, made and saved in one go (the ``tomo plot`` job)."""

from __future__ import annotations

import contextlib
import os
import shutil
import tempfile
from dataclasses import dataclass
from pathlib import Path

from ..core.fileio import prepare_folder
from . import compare, depth, fit, rays, resolution, section, style

__all__ = ["FIGURES", "OPTIONAL_FIGURES", "FigureSpec", "make_figures", "plot_run"]


@dataclass(frozen=True)
class FigureSpec:
    """One kind of run figure: file stem, caption and the function that draws it."""

    name: str
    caption: str
    draw: object


FIGURES = (
    FigureSpec("velocity", "Velocity section over the terrain. Pale grey: no ray reaches these cells (below the "
               "deepest ray); dashed line: depth of investigation, above which 95 % of the ray length lies.",
               section.velocity_section),
    FigureSpec("coverage", "Ray coverage: ray length per cell; pale grey where no ray crosses a cell.",
               section.coverage_section),
    FigureSpec("rays", "Ray paths of every pick through the final model. Where rays crowd along one path, the "
               "ground below it is seen by few or none; numbers on top are geophone stations.", rays.ray_figure),
    FigureSpec("depth", "Depth below the ground to the deepest refractor (the tomogram's contour at the layered "
               "refractor's velocity) with its range, the delay-time refractor with one sigma, and the boreholes; "
               "numbers on top are geophone stations.", depth.depth_figure),
    FigureSpec("traveltimes", "Observed picks and times computed in the final model, every shot.", fit.traveltime_fit),
    FigureSpec("residuals", "Residuals against offset and their distribution beside the pick uncertainty.",
               fit.residual_figure),
    FigureSpec("misfit", "Misfit history: chi-squared, RMS residual and regularisation weight per iteration.",
               fit.misfit_history),
    FigureSpec("compare", "Layered against gridded: the delay-time refractor with its uncertainty, the "
               "chosen iso-velocity contour, and their difference along the line.", compare.layered_vs_gridded),
)

#: Figures drawn only when the run holds their data, left out silently otherwise.
OPTIONAL_FIGURES = (
    FigureSpec("resolution", "Resolution test: a known perturbation added to the final model (true), what the "
               "inversion of synthetic picks at the same shots, geophones and noise brought back (recovered), and "
               "the per-cell semblance of the two; stippled cells, here and in the sections, are not resolved.",
               resolution.resolution_figure),
)


def make_figures(run, skip_note=None, depth_range=None):
    """Draw every run figure.

    Returns a list of (FigureSpec, Figure) for the figures that apply; a figure whose
    data the run lacks (the layered comparison without a layered result) is skipped
    and ``skip_note(message)`` is called if given. ``depth_range``
    (:class:`tomo.analysis.depth_range.DepthRange`) is shaded in the depth figure.
    """
    out = []
    for spec in FIGURES + OPTIONAL_FIGURES:
        fig = spec.draw(run, depth_range=depth_range) if spec.name == "depth" else spec.draw(run)
        if fig is None:
            if skip_note and spec in FIGURES:
                why = ("holds no layered result to take the refractor's velocity from" if spec.name == "depth"
                       else "holds no layered refractor profile")
                skip_note(f"skipped the '{spec.name}' figure: the run file {why}")
            continue
        out.append((spec, fig))
    return out


def plot_run(run, out_dir, formats=("png", "pdf"), skip_note=None, progress=None, extra=(), depth_range=None):
    """Save every run figure into ``out_dir`` as ``<name>.<format>``.

    ``extra`` holds more (name, Figure) pairs to save with them (e.g. the comparison
    with another run, :mod:`tomo.figures.versus`).

    The figures are first written into a temporary folder inside ``out_dir`` and moved
    into place only when all of them are done, so a failure leaves no partial set.

    Returns
    -------
    list of Path
        The files written.
    """
    out_dir = prepare_folder(out_dir)
    figures = make_figures(run, skip_note, depth_range) + [(FigureSpec(name, "", None), fig) for name, fig in extra]
    tmp = Path(tempfile.mkdtemp(prefix=".tomo-plot.", dir=out_dir))
    written = []
    try:
        staged = []
        for spec, fig in figures:
            for fmt in formats:
                fig.savefig(tmp / f"{spec.name}.{fmt}", format=fmt, bbox_inches="tight")
                staged.append(f"{spec.name}.{fmt}")
            style.plt.close(fig)
            if progress:
                progress(spec.name)
        for name in staged:
            os.replace(tmp / name, out_dir / name)
            written.append(out_dir / name)
    finally:
        for _, fig in figures:
            style.plt.close(fig)
        with contextlib.suppress(OSError):
            shutil.rmtree(tmp)
    return written
