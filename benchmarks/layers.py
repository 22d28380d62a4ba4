"""Time the layered interpretation (branch fits, layer table, plus-minus and GRM).

Closed-form picks over three horizontal layers (500 / 1500 / 3000 m/s, 4 m and 10 m),
0.2 ms noise, five shots, 2 m spacing. Prints a table; no assertions.

    /work/venv/bin/python benchmarks/layers.py
"""

import math
import time

import numpy as np

from tomo.layered.interpret import interpret_line
from tomo.layered.qc import check_line
from tomo.survey.picks import Picks


def picks_for(n_geophones, n_shots=5, spacing=2.0, seed=0):
    v, h = [500.0, 1500.0, 3000.0], [4.0, 10.0]
    gx = np.arange(n_geophones) * spacing
    length = gx[-1]
    shots = list(np.linspace(-spacing / 2, length + spacing / 2, n_shots - 2)) + [-12.0, length + 12.0]
    sx, rx = np.repeat(shots, gx.size), np.tile(gx, len(shots))
    x = np.abs(rx - sx)
    times = [x / v[0]]
    for n in (1, 2):
        delay = sum(2 * h[i] * math.sqrt(v[n] ** 2 - v[i] ** 2) / (v[i] * v[n]) for i in range(n))
        times.append(x / v[n] + delay)
    t = np.min(times, axis=0) + np.random.default_rng(seed).normal(0, 2e-4, x.size)
    return Picks(sx, np.zeros(sx.size), rx, np.zeros(sx.size), t, np.full(sx.size, 2e-4))


def main():
    print(f"{'geophones':>9} {'shots':>5} {'picks':>6} {'check s':>8} {'layers s':>9} {'+GRM s':>7} {'layers':>6}")
    for n_geo, n_shots in [(24, 5), (48, 5), (96, 5), (96, 11)]:
        picks = picks_for(n_geo, n_shots)
        t0 = time.perf_counter()
        check_line(picks)
        t1 = time.perf_counter()
        result = interpret_line(picks)
        t2 = time.perf_counter()
        interpret_line(picks, grm=True)
        t3 = time.perf_counter()
        print(f"{n_geo:9d} {n_shots:5d} {len(picks):6d} {t1 - t0:8.2f} {t2 - t1:9.2f} {t3 - t2:7.2f} "
              f"{len(result.layers):6d}")


if __name__ == "__main__":
    main()
