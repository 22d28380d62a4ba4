"""`tomo ensemble`: many inversions of one line, and the depth band of its rock surface."""

from __future__ import annotations

import os
import sys

from . import note
from .line_options import add_line_options, read_survey_args


def register(sub):
    from ..api import STARTS

    p = sub.add_parser(
        "ensemble", help="invert the picks many times to see the range of depths they allow",
        description="An ensemble of inversions, each fitting the picks to their uncertainty, that differ "
                    "in what the picks cannot decide: the pick noise (picks redrawn within their sigma), "
                    "the starting model, the smoothing, the target misfit and the placement of the grid. "
                    "Members run as Dask tasks on local worker processes or on a Dask cluster. The file "
                    "is the central member's run file with every member added, rewritten after each "
                    "member (Ctrl-C keeps what finished; --resume completes it); tomo plot, report and "
                    "export read it like a run file and draw the depth band.",
    )
    p.add_argument("picks", metavar="PICKS.csv", help="pick file")
    p.add_argument("--terrain", metavar="T.csv", help="terrain file (x, z in m)")
    add_line_options(p)
    p.add_argument("--out", required=True, metavar="ENSEMBLE.h5", help="ensemble file to write")
    p.add_argument("--members", type=int, default=32, metavar="N",
                   help="members, the central one included (default 32; at least 2)")
    p.add_argument("--seed", type=int, default=0, help="seed of the members' draws (default 0): the same seed "
                                                       "gives the same ensemble on any number of workers")
    where = p.add_mutually_exclusive_group()
    where.add_argument("--workers", type=int, metavar="N",
                       help=f"local worker processes (default: the cores, {os.cpu_count() or 1} here)")
    where.add_argument("--scheduler", metavar="ADDRESS",
                       help="address of a running Dask scheduler (e.g. tcp://10.0.0.5:8786) to run the members on")
    p.add_argument("--resume", action="store_true", help="complete the interrupted ensemble in --out")
    p.add_argument("--start", choices=list(STARTS), default=STARTS[0],
                   help="starting model of the central member (the others mix both)")
    p.add_argument("--layers", metavar="layers.json", help="the layered interpretation to start from")
    p.add_argument("--mesh", metavar="MESH.toml", help="mesh spec (default: chosen from the survey)")
    p.add_argument("--contour", metavar="V", type=float,
                   help="velocity of the surface whose band is bounded and summarised, m/s (default: the mean of "
                        "the layer velocities above and below the deepest refractor)")
    p.add_argument("--bound-x", metavar="X", type=float, action="append", default=[],
                   help="also push the surface as deep and as shallow as the picks allow at X m (repeatable); "
                        "its deepest and shallowest points are always bounded")
    p.add_argument("--boreholes", metavar="B.csv",
                   help="boreholes (x or easting,northing, depth_m, optional sigma_m, label, interface) every "
                        "member honours: the --contour surface (default: the mean of the layer velocities above "
                        "and below each logged interface) passes through each within its sigma")
    p.add_argument("--no-bounds", action="store_true",
                   help="skip the extremal bounds (each costs about a dozen inversions)")
    p.add_argument("--sigma-ms", metavar="MS", type=float,
                   help="pick uncertainty where the pick file has no sigma_ms, ms")
    p.set_defaults(run=run)


def _progress(label):
    def show(done, total, elapsed, left):
        tail = "" if left is None else f", about {left:.0f} s left"
        text = f"{label}: {done}/{total} members ({elapsed:.0f} s{tail})"
        if sys.stderr.isatty():
            print(f"\r{text}", end="\n" if done == total else "", file=sys.stderr, flush=True)
        else:
            print(text, file=sys.stderr, flush=True)
    return show


def run(args):
    from .. import api

    if args.workers is not None and args.workers < 1:
        from ..core.errors import InputError

        raise InputError(f"--workers must be 1 or more, got {args.workers}", field="--workers")
    settings = {} if args.sigma_ms is None else {"default_sigma_ms": args.sigma_ms}
    survey = read_survey_args(args)
    api.check_output_path(args.out)
    run_ = api.ensemble(survey, members=args.members, seed=args.seed, workers=args.workers, scheduler=args.scheduler,
                        out=args.out, resume=args.resume, start=args.start, layers=args.layers, mesh=args.mesh,
                        progress=_progress("ensemble"), bounds=not args.no_bounds, bound_x=args.bound_x,
                        contour_m_s=args.contour, boreholes=args.boreholes, **settings)
    for line in api.ensemble_summary(run_, args.contour):
        print(line)
    note("The band is what these members allow under the method's assumptions (a smooth 2-D model, first "
         "arrivals with the stated sigmas); it is not a guarantee. Calibrate against boreholes.")
    return 0
