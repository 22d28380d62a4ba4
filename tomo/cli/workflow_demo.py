"""The demo: the whole workflow on the invented hillside line shipped in ``tomo/data/demo/``.

``run_demo(out_dir)`` runs, in order, ``tomo check``, ``tomo layers``, ``tomo invert``
(from the layered start, read from the ``layers.json`` of the step before, so the
layered interpretation is made once; then once more from the 1-D gradient start, to
show how much of the section the picks decide), the figures of ``tomo plot`` (with the
two runs compared) and ``tomo report`` on the demo's ``picks.csv`` and ``terrain.csv``,
writing everything into ``out_dir``. The check, layers and invert steps go through the
command line (:func:`tomo.cli.main`), so the demo prints exactly what a user running
those commands would see; the others call :mod:`tomo.api`.
"""

from __future__ import annotations

import time
from dataclasses import dataclass, field
from pathlib import Path

from ..core.errors import TomoError

__all__ = ["demo_dir", "DEMO_FILES", "run_demo", "DemoResult"]

#: Files the demo needs in the demo folder.
DEMO_FILES = ("picks.csv", "terrain.csv", "site.toml", "layout.csv", "project.toml")

#: Processes for the inversion's forward solves (the machine has 2 cores).
DEMO_WORKERS = 2
#: Steps the demo announces.
STEPS = 7
#: Members of the demo's ensemble: enough to draw a band, few enough to keep the demo short
#: (a report for a client would use the default 32).
DEMO_MEMBERS = 8


def demo_dir():
    """The demo line's folder inside the installed package (:func:`tomo.api.demo_dir`),
    checked for the files the demo needs."""
    from ..api import demo_dir as folder

    return folder(DEMO_FILES)


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


def _cli(argv, step, log=None, keep_stderr=False):
    """Run one ``tomo`` command; with ``log``, its output goes to that file instead of
    the screen (stderr too unless ``keep_stderr``, used for the inversion's progress)."""
    import contextlib
    import sys

    from . import main

    if log is None:
        status = main(argv)
    else:
        with open(log, "w", encoding="utf-8") as handle, contextlib.redirect_stdout(handle):
            if keep_stderr:
                status = main(argv)
            else:
                with contextlib.redirect_stderr(handle):
                    status = main(argv)
    if status != 0:
        if log is not None and not keep_stderr:
            # the one-line error went to the log: show it
            lines = Path(log).read_text(encoding="utf-8").strip().splitlines()
            if lines:
                print(lines[-1], file=sys.stderr)
        raise TomoError(f"demo step '{step}' failed (exit status {status})"
                        + (f"; its output is in {log}" if log else ""))


def run_demo(out_dir="tomo-demo", progress=None, workers=DEMO_WORKERS, members=DEMO_MEMBERS):
    """Run check, layers, invert (twice), plot and report on the demo line.

    Parameters
    ----------
    out_dir : str or Path
        Folder for every output (created if needed).
    progress : callable, optional
        Called with one line of text per step and per inversion iteration.
    members : int
        Members of the ensemble step (at least 2).

    Returns
    -------
    DemoResult
    """
    from .. import api

    folder = demo_dir()
    out = api.prepare_folder(out_dir)
    picks, terrain = str(folder / "picks.csv"), str(folder / "terrain.csv")
    timings = {}
    files = []

    def step(k, name, text):
        _say(progress, f"[{k}/{STEPS}] {name}: {text}")
        return time.perf_counter()

    t0 = step(1, "check", f"pick QC of {picks} (report in {out / 'check.txt'})")
    _cli(["check", picks, "--terrain", terrain, "--figure", str(out / "qc.png")], "check", out / "check.txt")
    timings["check"] = time.perf_counter() - t0
    files += [out / "check.txt", out / "qc.png"]

    t0 = step(2, "layers", f"branch fits, intercept-time layers, delay-time depths (report in {out / 'layers.txt'})")
    _cli(["layers", picks, "--terrain", terrain, "--out", str(out / "layers.json"),
          "--profile", str(out / "refractor.csv"), "--figure", str(out / "curves.png")], "layers",
         out / "layers.txt")
    timings["layers"] = time.perf_counter() - t0
    files += [out / "layers.txt", out / "layers.json", out / "refractor.csv", out / "curves.png"]
    _say(progress, "       " + _layer_summary(out / "layers.json"))

    run_path = out / "run.h5"
    t0 = step(3, "invert", "travel-time tomography from the layered starting model")
    _invert(picks, terrain, run_path, workers, out / "invert.txt", show_progress=progress is not None,
            layers=out / "layers.json")
    timings["invert"] = time.perf_counter() - t0
    files += [out / "invert.txt", run_path]

    # a tomogram keeps much of its starting model where the picks allow it: the same
    # picks from the other start show what they leave open (tomo.figures.versus)
    second_path = out / "run-gradient.h5"
    t0 = step(4, "invert", f"the same picks from the 1-D gradient start, for comparison (log in "
                           f"{out / 'invert-gradient.txt'})")
    _invert(picks, terrain, second_path, workers, out / "invert-gradient.txt", show_progress=False,
            start="gradient")
    timings["gradient run"] = time.perf_counter() - t0
    files += [out / "invert-gradient.txt", second_path]
    run, second = api.read_run(run_path), api.read_run(second_path)
    labels = api.run_labels(run_path, run, second_path, second)
    _say(progress, "       " + api.compare_runs(run, second, labels=labels))

    ensemble_path = out / "ensemble.h5"
    t0 = step(5, "ensemble", f"{members} inversions of the same picks that differ in what the picks cannot "
                             f"decide (log in {out / 'ensemble.txt'})")
    _cli(["ensemble", picks, "--terrain", terrain, "--layers", str(out / "layers.json"), "--members",
          str(members), "--workers", str(workers), "--no-bounds", "--out", str(ensemble_path)], "ensemble",
         out / "ensemble.txt")
    timings["ensemble"] = time.perf_counter() - t0
    files += [out / "ensemble.txt", ensemble_path]
    # the ensemble's central member is the run of step 3 (the same picks, start and
    # settings); its file adds every member, so the figures and report draw the band
    run = api.read_run(ensemble_path)
    _say(progress, "       " + api.ensemble_summary(run)[-1])

    t0 = step(6, "plot", f"figures into {out}")
    written = api.plot_run(run, out, formats=("png", "pdf"), other=second, labels=labels, skip_note=progress)
    files += written
    # the report embeds the PNGs just written instead of drawing every figure again
    pngs = {path.stem: path.read_bytes() for path in written if path.suffix == ".png"}
    timings["plot"] = time.perf_counter() - t0

    t0 = step(7, "report", "one self-contained HTML file")
    report = api.write_report(run, out / "report.html", source=ensemble_path, figure_pngs=pngs, other=second,
                              labels=labels, project=api.read_project(folder / "project.toml"))
    timings["report"] = time.perf_counter() - t0
    files.append(report)
    return DemoResult(out_dir=out, report=report, run_file=run_path, files=files, timings=timings)


def _layer_summary(path):
    import json

    try:
        layers = json.loads(Path(path).read_text(encoding="utf-8")).get("layers") or []
    except (OSError, ValueError):
        return "layers: see the layers report"
    parts = []
    for layer in layers:
        v, h = layer.get("velocity_m_s"), layer.get("thickness_m")
        parts.append(f"{v:.0f} m/s" + (f" ({h:.1f} m)" if h is not None else ""))
    return "layers: " + ", ".join(parts) + " (velocity assumed to increase with depth)"


def _invert(picks, terrain, run_path, workers, log, show_progress=True, start="layered", layers=None):
    """The inversion step through ``tomo invert`` (from the ``layers`` file when given);
    its progress lines stay on screen when ``show_progress``, else they go to the log
    with the rest."""
    extra = [] if layers is None else ["--layers", str(layers)]
    _cli(["invert", picks, "--terrain", terrain, "--start", start, *extra, "--out", str(run_path),
          "--workers", str(workers)], "invert", log, keep_stderr=show_progress)
