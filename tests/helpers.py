"""Small builders shared by the tests (survey geometry only; no reference values here)."""

import numpy as np

from tomo.survey import Picks


def line_picks(terrain, receiver_x, source_x, min_offset=0.0):
    """Every shot to every geophone, stations on the terrain, as a layout (no times)."""
    sx, rx = np.meshgrid(np.asarray(source_x, float), np.asarray(receiver_x, float), indexing="ij")
    sx, rx = sx.ravel(), rx.ravel()
    keep = np.abs(rx - sx) > max(min_offset, 1e-9)
    sx, rx = sx[keep], rx[keep]
    return Picks(sx, terrain.elevation(sx), rx, terrain.elevation(rx))


def pairs(shots, geophones):
    """Every shot with every geophone not on it: arrays (source_x, receiver_x), m."""
    sx, rx = np.meshgrid(np.asarray(shots, float), np.asarray(geophones, float), indexing="ij")
    sx, rx = sx.ravel(), rx.ravel()
    keep = np.abs(rx - sx) > 1e-9
    return sx[keep], rx[keep]
