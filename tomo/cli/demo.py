"""`tomo demo`: the whole workflow on the invented demo line, in one go."""

from __future__ import annotations

from . import note


def register(sub):
    p = sub.add_parser(
        "demo", help="run check, layers, invert, plot and report on the built-in demo line",
        description="Run the whole workflow (pick QC, layered interpretation, tomography from "
                    "the layered and from the gradient start, figures, report) on the invented "
                    "hillside line shipped with tomo (its folder: tomo.demo_dir()), and say where the report is.",
    )
    p.add_argument("--out", default="tomo-demo", metavar="DIR",
                   help="folder for the outputs (default: ./tomo-demo, created if needed)")
    p.add_argument("--workers", type=int, default=2, help="processes for the inversion (default 2)")
    p.add_argument("--members", type=int, default=8, metavar="N",
                   help="members of the demo's ensemble (default 8; a client's report would use 32)")
    p.set_defaults(run=run)


def run(args):
    from ..core.errors import InputError
    from .workflow_demo import run_demo

    if args.workers < 1:
        raise InputError(f"--workers must be >= 1, got {args.workers}")
    result = run_demo(args.out, progress=note, workers=args.workers, members=args.members)
    total = sum(result.timings.values())
    steps = ", ".join(f"{k} {v:.0f} s" for k, v in result.timings.items())
    print(f"demo finished in {total:.0f} s ({steps}); {len(result.files)} files in {result.out_dir}")
    print(f"report: {result.report.resolve()}")
    return 0
