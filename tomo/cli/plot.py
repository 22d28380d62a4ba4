"""`tomo plot`: every figure of a run file, as PNG and PDF."""

from __future__ import annotations

from . import add_versus_options, note, read_versus
from .line_options import add_boreholes_option, with_boreholes


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
    add_boreholes_option(p)
    add_versus_options(p, "also draw the 'versus' figure: the same iso-velocity surface in both and their difference")
    p.set_defaults(run=run)


def run(args):
    from .. import api

    run_data, other, labels = read_versus(args)
    run_data = with_boreholes(run_data, args.boreholes)
    summary = None if other is None else api.compare_runs(run_data, other, args.contour, labels)
    written = api.plot_run(run_data, args.out, formats=tuple(args.formats or ("png", "pdf")), other=other,
                           contour_m_s=args.contour, labels=labels, skip_note=note)
    if summary:
        print(summary)
    print(f"wrote {len(written)} figure files to {args.out}")
    for path in written:
        print(f"  {path}")
    return 0
