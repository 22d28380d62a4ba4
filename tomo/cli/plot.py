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
    from ..figures.bundle import plot_run
    from ..figures.versus import versus_figure, versus_summary, versus_table

    run_data, other, labels = read_versus(args)
    run_data = with_boreholes(run_data, args.boreholes)
    extra, summary = [], None
    if other is not None:
        summary = versus_summary(versus_table(run_data, other, args.contour, labels), labels)
        extra.append(("versus", versus_figure(run_data, other, args.contour, labels)))
    written = plot_run(run_data, args.out, formats=tuple(args.formats or ("png", "pdf")), skip_note=note,
                       extra=extra)
    if summary:
        print(summary)
    print(f"wrote {len(written)} figure files to {args.out}")
    for path in written:
        print(f"  {path}")
    return 0
