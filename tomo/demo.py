"""The demo: the whole workflow on the invented hillside line in the repository's ``demo/``.

``run_demo(out_dir)`` runs, in order, ``tomo check``, ``tomo layers``, ``tomo invert``,
the figures of ``tomo plot`` and ``tomo report`` on ``demo/picks.csv`` and
``demo/terrain.csv``, writing everything into ``out_dir``. The check, layers and invert
steps go through the command line (:func:`tomo.cli.main`), so the demo prints exactly
what a user running those commands would see.
"""

from __future__ import annotations

import time
from dataclasses import dataclass, field
from pathlib import Path

from .errors import InputError, TomoError

__all__ = ["demo_dir", "DEMO_FILES", "run_demo", "DemoResult"]

#: Files the demo needs in the demo folder.
DEMO_FILES = ("picks.csv", "terrain.csv", "site.toml", "layout.csv")

#: Processes for the inversion's forward solves (the machine has 2 cores).
DEMO_WORKERS = 2


def demo_dir():
    """The repository's ``demo/`` folder (beside the ``tomo`` package, which is
    installed editable); InputError naming the folder if its files are missing."""
    import tomo

    folder = Path(tomo.__file__).resolve().parents[1] / "demo"
    missing = [name for name in DEMO_FILES if not (folder / name).is_file()]
    if missing:
        raise InputError(
            f"demo file(s) missing: {', '.join(missing)} (the demo runs from a source checkout "
            "installed with 'pip install -e .')", path=folder)
    return folder


@dataclass
class DemoResult:
    """What the demo made: the output folder, the report, every file, step timings (s)."""

    out_dir: Path
    report: Path
    run_file: Path
    files: list = field(default_factory=list)
    timings: dict = field(default_factory=dict)


def _say(progress, message):
    if progress:
        progress(message)


def _cli(argv, step):
    from .cli import main

    status = main(argv)
    if status != 0:
        raise TomoError(f"demo step '{step}' failed (exit status {status}); see the message above")


def run_demo(out_dir="tomo-demo", progress=None, workers=DEMO_WORKERS):
    """Run check, layers, invert, plot and report on the demo line.

    Parameters
    ----------
    out_dir : str or Path
        Folder for every output (created if needed).
    progress : callable, optional
        Called with one line of text per step and per inversion iteration.

    Returns
    -------
    DemoResult
    """
    from .figures import style
    from .figures.bundle import make_figures, prepare_folder
    from .report import write_report
    from .runfile import read_run

    folder = demo_dir()
    out = prepare_folder(out_dir)
    picks, terrain = str(folder / "picks.csv"), str(folder / "terrain.csv")
    timings = {}
    files = []

    def step(k, name, text):
        _say(progress, f"[{k}/5] {name}: {text}")
        return time.perf_counter()

    t0 = step(1, "check", f"pick QC of {picks}")
    _cli(["check", picks, "--terrain", terrain, "--figure", str(out / "qc.png")], "check")
    timings["check"] = time.perf_counter() - t0
    files.append(out / "qc.png")

    t0 = step(2, "layers", "branch fits, intercept-time layers and delay-time refractor depths")
    _cli(["layers", picks, "--terrain", terrain, "--out", str(out / "layers.json"),
          "--profile", str(out / "refractor.csv"), "--figure", str(out / "curves.png")], "layers")
    timings["layers"] = time.perf_counter() - t0
    files += [out / "layers.json", out / "refractor.csv", out / "curves.png"]

    run_path = out / "run.h5"
    t0 = step(3, "invert", "travel-time tomography from the layered starting model")
    _invert(picks, terrain, run_path, progress, workers)
    timings["invert"] = time.perf_counter() - t0
    files.append(run_path)

    t0 = step(4, "plot", f"figures into {out}")
    run = read_run(run_path)
    figures = make_figures(run, skip_note=progress)
    pngs = {}
    try:
        for spec, fig in figures:
            for fmt in ("png", "pdf"):
                path = out / f"{spec.name}.{fmt}"
                style.save(fig, path) if fmt == "pdf" else _save_keep(fig, path)
                files.append(path)
            pngs[spec.name] = (out / f"{spec.name}.png").read_bytes()
    finally:
        for _, fig in figures:
            style.plt.close(fig)
    timings["plot"] = time.perf_counter() - t0

    t0 = step(5, "report", "one self-contained HTML file")
    report = write_report(out / "report.html", run, source=str(run_path), figure_pngs=pngs)
    timings["report"] = time.perf_counter() - t0
    files.append(report)
    return DemoResult(out_dir=out, report=report, run_file=run_path, files=files, timings=timings)


def _save_keep(fig, path):
    """Save a figure atomically without closing it (it is saved again as PDF)."""
    from .fileio import atomic_path

    with atomic_path(path) as tmp:
        fig.savefig(tmp, format=Path(path).suffix.lstrip("."), bbox_inches="tight")


def _invert(picks, terrain, run_path, progress, workers):
    """The inversion step: the ``tomo invert`` command when it is built, else the library."""
    from .cli import invert as invert_cli

    if "not built yet" not in (invert_cli.__doc__ or ""):
        _cli(["invert", picks, "--terrain", terrain, "--start", "layered", "--out", str(run_path),
              "--workers", str(workers)], "invert")
        return
    from .inversion import run_inversion

    run_inversion(picks, terrain_path=terrain, start="layered", out_path=str(run_path),
                  progress=(lambda info: _say(progress, f"  {info}")), workers=workers)
