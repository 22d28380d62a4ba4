"""Small builders shared by the tests (survey geometry only; no reference values here)."""

import numpy as np

from tomo.survey.picks import Picks


def line_picks(terrain, receiver_x, source_x, min_offset=0.0):
    """Every shot to every geophone, stations on the terrain, as a layout (no times)."""
    sx, rx = pairs(source_x, receiver_x, min_offset)
    return Picks(sx, terrain.elevation(sx), rx, terrain.elevation(rx))


def pairs(shots, geophones, min_offset=0.0):
    """Every shot with every geophone farther than ``min_offset`` from it (never on it):
    arrays (source_x, receiver_x), m."""
    sx, rx = np.meshgrid(np.asarray(shots, float), np.asarray(geophones, float), indexing="ij")
    sx, rx = sx.ravel(), rx.ravel()
    keep = np.abs(rx - sx) > max(min_offset, 1e-9)
    return sx[keep], rx[keep]


def head_wave_times(offset, velocities, thicknesses):
    """First arrival over horizontal layers: the earliest of the direct wave and each head
    wave t_n = x / V_n + sum_{i<n} 2 h_i sqrt(V_n^2 - V_i^2) / (V_i V_n)
    (Telford, Geldart & Sheriff 1990, Applied Geophysics, 2nd ed., sec. 4.3, the n-layer
    head-wave equation). Velocities m/s top to bottom, thicknesses m, offsets m; s."""
    x = np.abs(np.asarray(offset, float))
    times = [x / velocities[0]]
    for n in range(1, len(velocities)):
        vn = velocities[n]
        delay = sum(2 * thicknesses[i] * np.sqrt(vn**2 - velocities[i] ** 2) / (velocities[i] * vn) for i in range(n))
        times.append(x / vn + delay)
    return np.min(times, axis=0)
