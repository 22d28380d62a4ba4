"""Regenerate the README's demo figures in docs/images/ (small PNGs).

Runs ``tomo demo`` into a temporary folder and redraws its figures at a screen
resolution: every run figure (the depth figure with the range between the two runs),
the comparison of the two runs, and the pick QC and branch figures. Run from the
repository root: ``python docs/make_images.py``.
"""

from __future__ import annotations

import sys
import tempfile
from pathlib import Path

import tomo
from tomo.analysis.depth_range import two_run_range
from tomo.analysis.surface import refractor_contour
from tomo.api import design, resolve
from tomo.cli.workflow_demo import run_demo
from tomo.figures import style
from tomo.figures.bundle import make_figures
from tomo.figures.curves import branches_figure, qc_figure
from tomo.figures.design import design_figure
from tomo.figures.resolution import resolution_figure
from tomo.figures.versus import run_labels, versus_figure
from tomo.results.runfile import read_run

IMAGES = Path(__file__).resolve().parent / "images"
DESIGN = Path(__file__).resolve().parent / "design"
DPI = 110


def _save(fig, name):
    path = IMAGES / f"{name}.png"
    fig.savefig(path, dpi=DPI, bbox_inches="tight")
    style.plt.close(fig)
    print(f"wrote {path} ({path.stat().st_size // 1024} kB)")


def resolution_image(run):
    """The README's resolution test: a 10 m checkerboard (four station spacings) on the
    demo run."""
    _save(resolution_figure(resolve(run, checker_m=10.0, seed=0)), "demo-resolution")


def design_image():
    """The README's survey design: the demo layout against two cheaper ones on the demo
    model, within 2 m (about 80 s on two cores)."""
    layouts = [tomo.demo_dir() / "layout.csv", DESIGN / "coarse.csv", DESIGN / "short.csv"]
    result = design(tomo.demo_dir(("site.toml",)) / "site.toml", layouts, noise_ms=0.5, tolerance_m=2.0)
    _save(design_figure(result), "design-demo")


def main():
    IMAGES.mkdir(exist_ok=True)
    with tempfile.TemporaryDirectory() as tmp:
        result = run_demo(tmp, progress=lambda line: print(line, file=sys.stderr))
        run = read_run(result.run_file)
        second_path = result.out_dir / "run-gradient.h5"
        second = read_run(second_path)
        labels = run_labels(result.run_file, run, second_path, second)
        versus = versus_figure(run, second, labels=labels)
        band = two_run_range(run, second, refractor_contour(run.layered), labels)
        for name, fig in [(spec.name, fig) for spec, fig in make_figures(run, depth_range=band)] + [("versus", versus)]:
            path = IMAGES / f"demo-{name}.png"
            fig.savefig(path, dpi=DPI, bbox_inches="tight")
            style.plt.close(fig)
            print(f"wrote {path} ({path.stat().st_size // 1024} kB)")
        # the check and layers figures save themselves: at the same screen resolution
        style.matplotlib.rcParams["savefig.dpi"] = DPI
        survey = tomo.read_survey(tomo.demo_dir() / "picks.csv", tomo.demo_dir() / "terrain.csv")
        qc_figure(survey.picks, tomo.check_survey(survey), IMAGES / "demo-qc.png")
        branches_figure(tomo.interpret_layers(survey), IMAGES / "demo-branches.png", picks=survey.picks)
        print(f"wrote {IMAGES / 'demo-qc.png'} and {IMAGES / 'demo-branches.png'}")
        print(f"chi2 {run.chi2:.2f}, RMS {run.rms_ms:.2f} ms, {run.iterations} iterations: {run.stop_reason}")
        resolution_image(run)
    design_image()


if __name__ == "__main__":
    main()
