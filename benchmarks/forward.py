"""Forward-solver cost per source against the floor: a bare skfmm.travel_time call.

For forward grids of about 240x60, 480x120 and 2000x200 nodes (a layered model over
sloping ground, air masked), prints the time per source of tomo's solve (start circle,
masking, sampling at 48 receivers) and of a bare ``skfmm.travel_time`` on the same
grid with the same mask (the floor), and their ratio. Goal (issue 2): our overhead at
most 30 % of the floor. Also prints the accuracy of a point start against the exact
start circle on a uniform medium (max error at the receivers, ms).

Run: python benchmarks/forward.py [--repeat N]
"""

from __future__ import annotations

import argparse
import time

import numpy as np
import skfmm

from tomo.survey.model import Layer, Model
from tomo.survey.terrain import Terrain
from tomo.tomography.forward import node_speed, sample_field, solve_field
from tomo.tomography.mesh import build_mesh


def best_of(func, repeat):
    best = np.inf
    for _ in range(repeat):
        t0 = time.perf_counter()
        func()
        best = min(best, time.perf_counter() - t0)
    return best


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=5, help="timings are the best of N runs")
    args = parser.parse_args(argv)
    print(f"{'nodes (nx x nz)':>16} {'h m':>6} {'bare ms':>9} {'tomo ms':>9} {'overhead':>9}")
    for nx, nz, h in [(240, 60, 0.5), (480, 120, 0.25), (2000, 200, 0.5)]:
        length, depth = (nx - 1) * h, (nz - 1) * h
        terrain = Terrain(np.array([0.0, length]), np.array([depth * 0.15, 0.0]))
        # refine 1: the forward grid is the model grid, so the node counts are exact
        mesh = build_mesh(0.0, length, terrain, h, depth * 0.8, refine=1)
        model = Model((Layer(400.0, 10.0, np.array([[0.0, depth * 0.1], [length, depth * 0.2]])), Layer(2500.0)))
        slowness = model.slowness_nodes(mesh, samples=2)
        speed = node_speed(mesh, slowness)
        rx = np.linspace(0.1 * length, 0.9 * length, 48)
        rz = terrain.elevation(rx)
        sx, sz = 0.05 * length, float(terrain.elevation(0.05 * length))

        phi = np.ones(mesh.node_shape)
        j = int(round(sx / mesh.h))
        i = int(np.argmax(mesh.node_active[:, j]))
        phi[i + 1, j] = -1.0
        phi_m = np.ma.MaskedArray(phi, mask=~mesh.node_active)

        def bare():
            skfmm.travel_time(phi_m, speed, dx=mesh.h, order=2)

        def ours():
            f = solve_field(mesh, slowness, sx, sz, speed=speed)
            sample_field(mesh, f, rx, rz)

        ours()  # warm caches (mesh masks) once
        t_bare = best_of(bare, args.repeat)
        t_ours = best_of(ours, args.repeat)
        shape = mesh.node_shape
        print(f"{shape[1]:>8} x {shape[0]:<5} {mesh.h:6.2f} {t_bare * 1e3:9.1f} {t_ours * 1e3:9.1f} "
              f"{(t_ours / t_bare - 1) * 100:8.1f}%")

    print()
    print("source start on a uniform medium (1000 m/s), receivers 5-85 m away at a slope of 0.4:")
    terrain = Terrain(np.array([-10.0, 100.0]), np.array([0.0, 0.0]))
    mesh = build_mesh(0, 90, terrain, 0.5, 40, refine=3)
    rx = np.linspace(5, 85, 17)
    rz = -0.4 * rx
    print(f"{'start':>22} {'max error ms':>13}")
    for radius in (0.0, 1.0, 3.0, 6.0):
        f = solve_field(mesh, np.full(mesh.node_shape, 1e-3), 0.1, -0.05, source_radius=radius)
        err = np.max(np.abs(sample_field(mesh, f, rx, rz) - np.hypot(rx - 0.1, rz + 0.05) / 1000.0))
        label = "point" if radius == 0 else f"exact circle r={radius:g} h"
        print(f"{label:>22} {err * 1e3:13.4f}")


if __name__ == "__main__":
    main()
