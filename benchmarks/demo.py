"""Time `tomo demo` step by step (goal: the whole demo in under a minute on a 2-core machine).

Run: python benchmarks/demo.py
"""

from __future__ import annotations

import tempfile
import time

from tomo.cli.workflow_demo import run_demo


def main():
    with tempfile.TemporaryDirectory() as tmp:
        t0 = time.perf_counter()
        result = run_demo(tmp, progress=None)
        total = time.perf_counter() - t0
    print(f"{'step':<10}{'seconds':>10}")
    for step, seconds in result.timings.items():
        print(f"{step:<10}{seconds:>10.1f}")
    print(f"{'total':<10}{total:>10.1f}   goal < 60 s: {'met' if total < 60 else 'MISSED'}")


if __name__ == "__main__":
    main()
