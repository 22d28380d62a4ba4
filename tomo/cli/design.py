"""`tomo design`: candidate layouts tried on a model of the site, before the field work."""

from __future__ import annotations

import os
import sys


def register(sub):
    from ..api import DEFAULT_NOISE_MS, DEFAULT_TOLERANCE_M, DESIGN_MEMBERS

    p = sub.add_parser(
        "design", help="try candidate layouts on a model of the site and pick the cheapest that resolves it",
        description="For each layout file (a pick file without times: shot and geophone positions): synthetic "
                    "picks through the model (on a grid twice as fine as the inversion's) with noise, an "
                    "inversion and a small ensemble; then the depth of investigation, the target surface's "
                    "error against the model and its band. Prints a table and names the cheapest layout "
                    "(fewest shots x geophones) that resolves the target within the tolerance, or says that "
                    "none does. Writes design.csv, design.png and each layout's ensemble file into --out.",
    )
    p.add_argument("model", metavar="MODEL.toml", help="model of the site (layers, bodies, terrain)")
    p.add_argument("--layout", dest="layouts", action="append", required=True, metavar="LAYOUT.csv",
                   help="a candidate layout (repeat for each)")
    p.add_argument("--out", required=True, metavar="DIR", help="folder for the table, figure and ensemble files")
    p.add_argument("--noise-ms", type=float, default=DEFAULT_NOISE_MS, metavar="MS",
                   help=f"pick noise, ms (one sigma; default {DEFAULT_NOISE_MS:g})")
    p.add_argument("--contour", type=float, metavar="V",
                   help="velocity of the target surface, m/s (default: the middle of the velocity step at the "
                        "model's deepest interface)")
    p.add_argument("--tolerance-m", type=float, default=DEFAULT_TOLERANCE_M, metavar="T",
                   help=f"depth tolerance on the target, m (default {DEFAULT_TOLERANCE_M:g})")
    p.add_argument("--members", type=int, default=DESIGN_MEMBERS, metavar="N",
                   help=f"members of each layout's ensemble (default {DESIGN_MEMBERS})")
    p.add_argument("--seed", type=int, default=0, help="seed of the noise and the ensembles (default 0)")
    p.add_argument("--workers", type=int, metavar="N",
                   help=f"local worker processes (default: the cores, {os.cpu_count() or 1} here)")
    p.set_defaults(run=run)


def _progress(name, done, total):
    text = f"design: {name}: {done}/{total} members"
    if sys.stderr.isatty():
        print(f"\r{text}", end="\n" if done == total else "", file=sys.stderr, flush=True)
    elif done == total:
        print(text, file=sys.stderr, flush=True)


def run(args):
    from .. import api
    from ..core.errors import InputError

    if args.workers is not None and args.workers < 1:
        raise InputError(f"--workers must be 1 or more, got {args.workers}", field="--workers")
    api.prepare_folder(args.out)
    result = api.design(args.model, args.layouts, noise_ms=args.noise_ms, contour_m_s=args.contour,
                        tolerance_m=args.tolerance_m, members=args.members, seed=args.seed, workers=args.workers,
                        out=args.out, progress=_progress)
    written = api.write_design(result, args.out)
    for line in api.design_table_lines(result) + [""] + result.summary():
        print(line)
    print(f"wrote {', '.join(str(p) for p in written)} and {len(result.layouts)} ensemble file(s) in {args.out}")
    print("A design is only as good as the model it is tried on: real ground may hold hidden layers, velocity "
          "inversions and lateral changes the model lacks.", file=sys.stderr)
    return 0
