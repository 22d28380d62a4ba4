"""A synthetic channel line shared by the borehole tests (issue 14, part 1).

9 m of cover (600 m/s at the ground, +20 m/s per m: 780 m/s at 9 m) over 2500 m/s
bedrock, cut by a channel 8 m deeper (17 m): 15 m wide at half its depth (20 m at the
cover's base, a flat bottom 10 m wide, sides of 58 degrees). 32 geophones at 2.5 m (0 to 77.5 m),
nine shots (two off each end, five inside). First arrivals are forward-modelled on a
grid of 0.5 m cells refined 3 times (nodes at 1/6 m): four times finer than the
inversion's (2 m cells refined 3 times, nodes at 2/3 m), so the inversion never sees its
own discretisation; Gaussian noise of 0.5 ms, seeded.

Two boreholes logged the bedrock: AXIS at the channel's axis (17 m) and SHOULDER 14 m
to its left on the cover's flat base (9 m), both to 0.3 m.
"""

from __future__ import annotations

import numpy as np
from helpers import line_picks

from tomo.survey.boreholes import Boreholes
from tomo.survey.meshspec import MeshSpec
from tomo.survey.model import Layer, Model
from tomo.survey.survey import Survey
from tomo.survey.terrain import flat_terrain
from tomo.tomography.mesh import build_mesh
from tomo.tomography.synth import synthetic_times

TERRAIN = flat_terrain(-40.0, 120.0)
GEOPHONES = np.arange(32) * 2.5
AXIS_X = 38.75
SHOTS = [-10.0, -1.0, *np.linspace(0.0, 77.5, 7)[1:-1], 78.5, 87.5]
COVER_M, CHANNEL_M = 9.0, 17.0
BASE = np.array([[-40.0, COVER_M], [AXIS_X - 10.0, COVER_M], [AXIS_X - 5.0, CHANNEL_M], [AXIS_X + 5.0, CHANNEL_M],
                 [AXIS_X + 10.0, COVER_M], [120.0, COVER_M]])
MODEL = Model((Layer(600.0, 20.0, BASE), Layer(2500.0)), terrain=TERRAIN)
#: The inversion's grid: 2 m cells to 26 m depth (the default would be 1.25 m cells).
MESH = MeshSpec(cell_m=2.0, depth_m=26.0)
SIGMA_S = 0.5e-3
LABELS = ("AXIS", "SHOULDER")
BOREHOLE_X = np.array([AXIS_X, AXIS_X - 14.0])


def true_depth(x):
    """Depth (m) of the bedrock under x (m) in :data:`MODEL`."""
    return np.interp(x, BASE[:, 0], BASE[:, 1])


def channel_survey(seed=1):
    """The line's picks with 0.5 ms of noise (module docstring) as a :class:`Survey`."""
    layout = line_picks(TERRAIN, GEOPHONES, SHOTS)
    fine = build_mesh(-14.0, 91.5, TERRAIN, 0.5, 28.0, refine=3, padding=2.0)
    t = synthetic_times(MODEL, layout, fine).time_s
    rng = np.random.default_rng(seed)
    picks = layout.with_times(t + rng.normal(0.0, SIGMA_S, t.size), np.full(t.size, SIGMA_S))
    return Survey(picks=picks, terrain=TERRAIN)


def boreholes(depth_m=None, sigma_m=0.3):
    """AXIS and SHOULDER at the true bedrock depth (or ``depth_m``), placed by x."""
    depth = true_depth(BOREHOLE_X) if depth_m is None else np.asarray(depth_m, float)
    n = depth.size
    return Boreholes(x=BOREHOLE_X.copy(), depth_m=depth, sigma_m=np.full(n, sigma_m), label=LABELS,
                     interface=np.zeros(n, int), easting=np.full(n, np.nan), northing=np.full(n, np.nan),
                     offset_m=np.zeros(n), line=np.arange(2, n + 2))


def borehole_file(path, depth_m=None, sigma_m=0.3):
    """The boreholes as a borehole file (``label,x,depth_m,sigma_m``)."""
    depth = true_depth(BOREHOLE_X) if depth_m is None else np.asarray(depth_m, float)
    rows = "".join(f"{label},{x:g},{d:g},{sigma_m:g}\n" for label, x, d in zip(LABELS, BOREHOLE_X, depth))
    path.write_text("label,x,depth_m,sigma_m\n" + rows, encoding="utf-8")
    return path
