"""What importing tomo costs: wall time and the heavy libraries loaded, step by step.

Each row runs in a fresh interpreter (median of five runs), so nothing is cached in
``sys.modules`` from the row before. ``import tomo`` should load none of the heavy
libraries; the API loads the numerical ones; matplotlib, h5py, xarray and ObsPy load
only when a figure, a run file, a dataset or a shot record is asked for.

    python benchmarks/imports.py
"""

from __future__ import annotations

import statistics
import subprocess
import sys

HEAVY = ("numpy", "scipy", "skfmm", "matplotlib", "h5py", "xarray", "obspy", "pyproj", "ezdxf")
STEPS = [
    ("import tomo", "import tomo"),
    ("tomo.read_survey (the API)", "import tomo; tomo.read_survey"),
    ("tomo.read_run", "import tomo; tomo.read_run"),
    ("tomo.velocity_section", "import tomo; tomo.velocity_section"),
]
PROBE = """
import sys, time
t0 = time.perf_counter()
{code}
dt = time.perf_counter() - t0
print(dt, ",".join(m for m in {heavy!r} if m in sys.modules))
"""


def measure(code, repeats=5):
    times, loaded = [], ""
    for _ in range(repeats):
        out = subprocess.run([sys.executable, "-c", PROBE.format(code=code, heavy=HEAVY)], capture_output=True,
                             text=True, check=True).stdout.split()
        times.append(float(out[0]))
        loaded = out[1] if len(out) > 1 else "-"
    return statistics.median(times), loaded


def main():
    print(f"{'step':30s} {'time (s)':>9s}  heavy libraries loaded")
    for label, code in STEPS:
        seconds, loaded = measure(code)
        print(f"{label:30s} {seconds:9.3f}  {loaded.replace(',', ', ')}")


if __name__ == "__main__":
    main()
