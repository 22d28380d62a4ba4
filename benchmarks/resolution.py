"""Resolution tests and survey design on the demo line: the numbers the README quotes.

Inverts the demo picks (layered start), runs checkerboard tests of 10, 5 and 2.5 m
(four, two and one station spacing) and prints the scores over the well-covered cells
and the seconds each took; with ``--design``, also tries the demo layout and the two
cheaper ones of ``docs/design/`` on the demo model, within 1 and 2 m (70-80 s each on
two cores).

    python benchmarks/resolution.py [--design]
"""

from __future__ import annotations

import sys
import time
from pathlib import Path

import tomo
from tomo.api import design, design_table_lines, resolve

ROOT = Path(__file__).resolve().parents[1]


def checkers():
    demo = tomo.demo_dir(("picks.csv", "terrain.csv"))
    survey = tomo.read_survey(demo / "picks.csv", terrain=demo / "terrain.csv")
    t0 = time.perf_counter()
    run = tomo.invert(survey, progress=lambda info: None)
    print(f"demo inversion: chi2 {run.chi2:.2f}, {run.iterations} iterations, {time.perf_counter() - t0:.1f} s")
    print(f"{'checker m':>9}  {'chi2 start':>10}  {'correlation':>11}  {'semblance':>9}  {'amplitude %':>11}  "
          f"{'resolved %':>10}  {'seconds':>7}")
    for size in (10.0, 5.0, 2.5):
        t0 = time.perf_counter()
        record = resolve(run, checker_m=size, seed=0).resolution
        s = record.summary(run)
        print(f"{size:9.1f}  {record.chi2_start:10.2f}  {s['correlation']:11.2f}  {s['semblance']:9.2f}  "
              f"{100 * s['amplitude']:11.0f}  {100 * s['resolved_share']:10.0f}  {time.perf_counter() - t0:7.1f}")


def layouts(tolerance_m):
    demo = tomo.demo_dir(("site.toml", "layout.csv"))
    t0 = time.perf_counter()
    result = design(demo / "site.toml", [demo / "layout.csv", ROOT / "docs/design/coarse.csv",
                                         ROOT / "docs/design/short.csv"], noise_ms=0.5, tolerance_m=tolerance_m)
    print("\n".join(design_table_lines(result) + result.summary()))
    print(f"design: {time.perf_counter() - t0:.0f} s")


if __name__ == "__main__":
    checkers()
    if "--design" in sys.argv[1:]:
        for tolerance in (1.0, 2.0):
            layouts(tolerance)
