"""`tomo resolve`: a resolution test of a run (checkerboard or hypothesised target)."""

from __future__ import annotations

from pathlib import Path

from . import note


def register(sub):
    from ..api import DEFAULT_AMPLITUDE_PCT, MAX_AMPLITUDE_PCT, SEMBLANCE_THRESHOLD

    p = sub.add_parser(
        "resolve", help="test what size of structure the line can resolve (checkerboard or a target)",
        description="Add a known perturbation to the run's final model (a checkerboard of alternating faster "
                    "and slower squares, or the bodies of a model file), compute synthetic picks at the run's "
                    "shots and geophones with each pick's noise, invert them with the run's settings from its "
                    "final model and score, cell by cell, how much of the perturbation came back (semblance "
                    f"over a window one checker wide; below {SEMBLANCE_THRESHOLD:g} a cell is not resolved). The "
                    "test is written into the run file (/resolution); tomo plot and the report then hatch "
                    "the cells the line cannot resolve.",
    )
    p.add_argument("run_file", metavar="RUN.h5", help="run file written by 'tomo invert' or 'tomo ensemble'")
    what = p.add_mutually_exclusive_group(required=True)
    what.add_argument("--checker", metavar="SIZE_M", type=float,
                      help="side of the checker squares, m (at least a model cell, at most the line; try "
                           "about four station spacings)")
    what.add_argument("--target", metavar="MODEL.toml",
                      help="model file whose [[body]] tables are the hypothesised feature (their velocity "
                           "against the file's layers is added to the final model)")
    p.add_argument("--amplitude", metavar="PCT", type=float,
                   help=f"checker amplitude, %% of velocity (default {DEFAULT_AMPLITUDE_PCT:g}; in (0, "
                        f"{MAX_AMPLITUDE_PCT:g}])")
    p.add_argument("--window", metavar="M", type=float,
                   help="side of the score window, m (default: the checker side, or the target's smallest body)")
    p.add_argument("--seed", type=int, default=0, help="seed of the pick noise (default 0)")
    p.add_argument("--workers", type=int, metavar="N", help="processes for the inversion (default: the run's)")
    p.add_argument("--out", metavar="OUT.h5",
                   help="write the tested run here instead of rewriting RUN.h5")
    p.add_argument("--figure", metavar="FIG.png",
                   help="resolution figure, PNG or PDF (default: <run>_resolution.png beside the run file written)")
    p.set_defaults(run=run)


def run(args):
    from .. import api
    from ..core.errors import InputError

    if args.workers is not None and args.workers < 1:
        raise InputError(f"--workers must be 1 or more, got {args.workers}", field="--workers")
    if args.target is not None and args.amplitude is not None:
        raise InputError("--amplitude applies to a checkerboard; a target's contrast comes from its model file",
                         field="--amplitude")
    out = Path(args.out or args.run_file)
    figure = Path(args.figure) if args.figure else out.with_name(f"{out.stem}_resolution.png")
    api.check_output_path(out)
    api.check_output_path(figure)
    run_ = api.read_run(args.run_file)
    amplitude = api.DEFAULT_AMPLITUDE_PCT if args.amplitude is None else args.amplitude
    tested = api.resolve(run_, checker_m=args.checker, amplitude_pct=amplitude, target=args.target, seed=args.seed,
                         window_m=args.window, workers=args.workers)
    tested.write(out)
    api.plot_resolution(tested, figure)
    for line in api.resolution_summary(tested):
        print(line)
    print(f"wrote {out} (/resolution) and {figure}")
    note("A resolution test shows what the line brings back of this pattern at this size and strength; it does "
         "not prove the model right, nor say anything of structure of another shape.")
    return 0
