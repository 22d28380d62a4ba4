"""Regenerate the README's demo figures in docs/images/ (small PNGs).

Runs ``tomo demo`` into a temporary folder and redraws its figures at a screen
resolution. Run from the repository root: ``python docs/make_images.py``.
"""

from __future__ import annotations

import sys
import tempfile
from pathlib import Path

from tomo.demo import run_demo
from tomo.figures import style
from tomo.figures.bundle import make_figures
from tomo.runfile import read_run

IMAGES = Path(__file__).resolve().parent / "images"
DPI = 110


def main():
    IMAGES.mkdir(exist_ok=True)
    with tempfile.TemporaryDirectory() as tmp:
        result = run_demo(tmp, progress=lambda line: print(line, file=sys.stderr))
        run = read_run(result.run_file)
        for spec, fig in make_figures(run):
            path = IMAGES / f"demo-{spec.name}.png"
            fig.savefig(path, dpi=DPI, bbox_inches="tight")
            style.plt.close(fig)
            print(f"wrote {path} ({path.stat().st_size // 1024} kB)")
        print(f"chi2 {run.chi2:.2f}, RMS {run.rms_ms:.2f} ms, {run.iterations} iterations: {run.stop_reason}")


if __name__ == "__main__":
    main()
