"""`tomo check`: pick QC summary (counts, spacing, reciprocal pairs, outliers, reversal)."""

from __future__ import annotations

from . import note
from .line_options import add_line_options, read_line_args


def register(sub):
    from ..layered.branches import DEFAULT_SIGMA_MS, OUTLIER_SIGMA
    from ..layered.qc import RECIPROCAL_TOL_MS, RECIPROCAL_TOL_PCT

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
    p.add_argument("--reciprocal-tol-ms", type=float, default=RECIPROCAL_TOL_MS, metavar="MS",
                   help=f"reciprocal tolerance, ms (default {RECIPROCAL_TOL_MS:g}; common practice: 1-2 ms)")
    p.add_argument("--reciprocal-tol-pct", type=float, default=RECIPROCAL_TOL_PCT, metavar="PCT",
                   help=f"reciprocal tolerance, %% of the time (default {RECIPROCAL_TOL_PCT:g}; the larger "
                        f"of the two tolerances applies)")
    p.add_argument("--outlier-sigma", type=float, default=OUTLIER_SIGMA, metavar="N",
                   help=f"outlier threshold in robust sigmas (default {OUTLIER_SIGMA:g})")
    p.add_argument("--sigma-ms", type=float, default=DEFAULT_SIGMA_MS, metavar="MS",
                   help=f"pick sigma when the file has no sigma_ms column, ms (default {DEFAULT_SIGMA_MS:g})")
    p.set_defaults(run=run)


def run(args):
    from ..core.errors import InputError
    from ..layered.qc import check_line

    for name in ("reciprocal_tol_ms", "reciprocal_tol_pct", "outlier_sigma", "sigma_ms"):
        if not getattr(args, name) > 0:
            raise InputError(f"--{name.replace('_', '-')} must be positive, got {getattr(args, name):g}")
    line = read_line_args(args)
    picks = line.picks
    for message in line.notices:
        note(message)
    report = check_line(picks, reciprocal_tol_ms=args.reciprocal_tol_ms, reciprocal_tol_pct=args.reciprocal_tol_pct,
                        outlier_sigma=args.outlier_sigma, sigma_ms=args.sigma_ms)
    for line in report.summary_lines():
        print(line)
    if args.figure:
        from ..figures.curves import qc_figure

        qc_figure(picks, report, args.figure)
        print(f"wrote {args.figure}")
    print(f"{report.n_warnings} warning(s)" if report.n_warnings else "no warnings")
    return 0
