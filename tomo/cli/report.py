"""`tomo report`: one self-contained HTML report of a run file."""

from __future__ import annotations

from . import add_versus_options, note, read_versus
from .line_options import add_boreholes_option, with_boreholes


def register(sub):
    p = sub.add_parser(
        "report", help="write a self-contained HTML report of a run file",
        description="Write one HTML file (figures embedded; opens offline, prints on A4) with the project, "
                    "the survey and its data, pick QC with every warning, the settings in words, the layered "
                    "interpretation, the fit, the depth to the deepest refractor at stations with its range, the "
                    "boreholes, the figures and the interpretation cautions.",
    )
    p.add_argument("run_file", metavar="RUN.h5", help="run file written by 'tomo invert'")
    p.add_argument("--out", required=True, metavar="REPORT.html", help="HTML file to write")
    p.add_argument("--project", metavar="PROJECT.toml",
                   help="project details: project, site, line, client, survey_date, crew, equipment, "
                        "coordinate_system, line_direction, author, checked_by, revision, report_date, notes")
    p.add_argument("--info", metavar="KEY=VALUE", action="append", default=[],
                   help="one project detail (repeatable; wins over --project), e.g. --info revision=B")
    add_boreholes_option(p)
    add_versus_options(p, "add the comparison of one iso-velocity surface in both, and the range of its "
                          "depth between them")
    p.set_defaults(run=run)


def run(args):
    from .. import api

    project = api.read_project(args.project, _info(args.info))
    run_data, other, labels = read_versus(args)
    run_data = with_boreholes(run_data, args.boreholes)
    path = api.write_report(run_data, args.out, source=args.run_file, skip_note=note, other=other, labels=labels,
                            contour_m_s=args.contour, project=project)
    size_kb = path.stat().st_size / 1024
    print(f"wrote the report to {path} ({size_kb:.0f} kB)")
    return 0


def _info(items):
    """``KEY=VALUE`` options as a dict; InputError naming a malformed one."""
    from ..core.errors import InputError

    out = {}
    for item in items:
        key, sep, value = item.partition("=")
        if not sep or not key.strip():
            raise InputError(f"expected KEY=VALUE, got {item!r}", field="--info")
        out[key.strip()] = value.strip()
    return out
