"""`tomo check`: pick QC summary (counts, spacing, reciprocal pairs, outliers, reversal)."""

from __future__ import annotations

from . import note
from .line_options import add_line_options, read_survey_args


def register(sub):
    from ..api import QC_DEFAULTS

    d = QC_DEFAULTS

    p = sub.add_parser(
        "check", help="quality-control a pick file",
        description="Summarise a pick file: counts, geophone spacing, reciprocal pairs with "
                    "their differences, picks that break from their branch, shots without a "
                    "reversed partner. Exit status 0 even with warnings; 2 for unusable input.",
    )
    p.add_argument("picks", metavar="PICKS.csv", help="pick file")
    p.add_argument("--terrain", metavar="T.csv", help="terrain file (x,z)")
    add_line_options(p)
    p.add_argument("--figure", metavar="qc.png", help="write the travel-time curves with flagged picks")
    p.add_argument("--reciprocal-tol-ms", type=float, default=d['reciprocal_tol_ms'], metavar="MS",
                   help=f"reciprocal tolerance, ms (default {d['reciprocal_tol_ms']:g}; common practice: 1-2 ms)")
    p.add_argument("--reciprocal-tol-pct", type=float, default=d['reciprocal_tol_pct'], metavar="PCT",
                   help=f"reciprocal tolerance, %% of the time (default {d['reciprocal_tol_pct']:g}; the larger "
                        f"of the two tolerances applies)")
    p.add_argument("--outlier-sigma", type=float, default=d['outlier_sigma'], metavar="N",
                   help=f"outlier threshold in robust sigmas (default {d['outlier_sigma']:g})")
    p.add_argument("--sigma-ms", type=float, default=d['sigma_ms'], metavar="MS",
                   help=f"pick sigma when the file has no sigma_ms column, ms (default {d['sigma_ms']:g})")
    p.set_defaults(run=run)


def run(args):
    from .. import api
    from ..core.errors import InputError

    for name in ("reciprocal_tol_ms", "reciprocal_tol_pct", "outlier_sigma", "sigma_ms"):
        if not getattr(args, name) > 0:
            raise InputError(f"--{name.replace('_', '-')} must be positive, got {getattr(args, name):g}")
    survey = read_survey_args(args)
    for message in survey.notices:
        note(message)
    report = api.check_survey(survey, reciprocal_tol_ms=args.reciprocal_tol_ms,
                              reciprocal_tol_pct=args.reciprocal_tol_pct, outlier_sigma=args.outlier_sigma,
                              sigma_ms=args.sigma_ms)
    for line in report.summary_lines():
        print(line)
    if args.figure:
        api.plot_qc(survey, report, args.figure)
        print(f"wrote {args.figure}")
    print(f"{report.n_warnings} warning(s)" if report.n_warnings else "no warnings")
    return 0
