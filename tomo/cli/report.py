"""`tomo report`: one self-contained HTML report of a run file."""

from __future__ import annotations

from . import add_versus_options, note, read_versus
from .line_options import add_boreholes_option, with_boreholes


def register(sub):
    p = sub.add_parser(
        "report", help="write a self-contained HTML report of a run file",
        description="Write one HTML file (figures embedded) with the input summary, pick QC, "
                    "settings, layered table, final misfit, figures and interpretation cautions.",
    )
    p.add_argument("run_file", metavar="RUN.h5", help="run file written by 'tomo invert'")
    p.add_argument("--out", required=True, metavar="REPORT.html", help="HTML file to write")
    add_boreholes_option(p)
    add_versus_options(p, "add the comparison of one iso-velocity surface in both")
    p.set_defaults(run=run)


def run(args):
    from .. import api

    run_data, other, labels = read_versus(args)
    run_data = with_boreholes(run_data, args.boreholes)
    path = api.write_report(run_data, args.out, source=args.run_file, skip_note=note, other=other, labels=labels,
                            contour_m_s=args.contour)
    size_kb = path.stat().st_size / 1024
    print(f"wrote the report to {path} ({size_kb:.0f} kB)")
    return 0
