"""`tomo plot`: every figure of a run file, as PNG and PDF."""

from __future__ import annotations

from . import note


def register(sub):
    p = sub.add_parser(
        "plot", help="make the figures of a run file (PNG and PDF)",
        description="Draw the velocity section, ray coverage, travel-time fit, residuals, "
                    "misfit history and (when the run holds a layered result) the layered "
                    "against gridded comparison, each as PNG and PDF.",
    )
    p.add_argument("run_file", metavar="RUN.h5", help="run file written by 'tomo invert'")
    p.add_argument("--out", required=True, metavar="DIR", help="folder for the figures (created if needed)")
    p.add_argument("--format", dest="formats", action="append", choices=["png", "pdf", "svg"],
                   help="file format (repeatable; default png and pdf)")
    p.set_defaults(run=run)


def run(args):
    from ..figures.bundle import plot_run
    from ..runfile import read_run

    run_data = read_run(args.run_file)
    written = plot_run(run_data, args.out, formats=tuple(args.formats or ("png", "pdf")), skip_note=note)
    print(f"wrote {len(written)} figure files to {args.out}")
    for path in written:
        print(f"  {path}")
    return 0
