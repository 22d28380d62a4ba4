"""`tomo layers`: branch fits, intercept-time layers, dips and delay-time refractor depths."""

from __future__ import annotations

import math

from ..core.notices import notice_lines
from . import note
from .line_options import add_line_options, read_survey_args


def register(sub):
    from ..api import LAYERS_DEFAULTS as d
    from ..api import MAX_BRANCHES

    p = sub.add_parser(
        "layers", help="layered interpretation (intercept times, dips, delay times)",
        description="Fit the travel-time branches of every shot side, derive a layer table "
                    "(intercept-time method, dipping layers from reversed shots) and refractor "
                    "depths under the geophones (plus-minus; GRM with --grm). Velocity is "
                    "assumed to increase with depth.",
    )
    p.add_argument("picks", metavar="PICKS.csv", help="pick file")
    p.add_argument("--terrain", metavar="T.csv", help="terrain file (x,z)")
    add_line_options(p)
    p.add_argument("--boreholes", metavar="B.csv",
                   help="boreholes (x or easting,northing, depth_m, optional sigma_m, label, interface): the "
                        "delay-time refractor is tied to them (the overburden velocity calibrated to the logged "
                        "depths, the mis-tie left at each spread to its neighbours)")
    p.add_argument("--out", metavar="layers.json", help="write the interpretation as JSON")
    p.add_argument("--profile", metavar="refractor.csv",
                   help="write refractor depths per geophone: refractor,x,surface_z,depth_m,elevation_m,"
                        "uncertainty_m,velocity_m_s (plus-minus; grm_* columns with --grm)")
    p.add_argument("--figure", metavar="curves.png", help="write the picks with the fitted branches")
    p.add_argument("--branches", type=int, metavar="N",
                   help=f"fit N branches on every side (1-{MAX_BRANCHES}; default: chosen by the BIC)")
    p.add_argument("--max-branches", type=int, default=MAX_BRANCHES, metavar="N",
                   help=f"most branches the criterion may choose (default {MAX_BRANCHES})")
    p.add_argument("--breaks", metavar="B1,B2,...", help="break offsets |x| (m) between branches on every side")
    p.add_argument("--side-branches", action="append", default=[], metavar="X:SIDE:N",
                   help="branch count for one side: shot x (m), left|right, N (repeatable; write "
                        "--side-branches=-5:right:3 for a negative x)")
    p.add_argument("--side-breaks", action="append", default=[], metavar="X:SIDE:B1,B2",
                   help="break offsets (m) for one side (repeatable)")
    p.add_argument("--sigma-ms", type=float, default=d["sigma_ms"], metavar="MS",
                   help=f"pick sigma when the file has no sigma_ms column, ms (default {d['sigma_ms']:g})")
    p.add_argument("--outlier-sigma", type=float, default=d["outlier_sigma"], metavar="N",
                   help="leave out picks this many robust sigmas from their branch and refit "
                        f"(default {d['outlier_sigma']:g}; 0 keeps all)")
    p.add_argument("--min-contrast-pct", type=float, default=100.0 * d["min_contrast"], metavar="PCT",
                   help="least velocity increase from one branch to the next, %% "
                        f"(default {100 * d['min_contrast']:g})")
    p.add_argument("--disagree-pct", type=float, default=d["velocity_disagreement_pct"], metavar="PCT",
                   help="warn when forward and reverse refractor velocities differ by more, %% "
                        f"(default {d['velocity_disagreement_pct']:g})")
    p.add_argument("--grm", action="store_true", help="also compute the generalized reciprocal method profile")
    p.add_argument("--grm-xy", type=float, metavar="M", help="GRM XY distance, m (default: the optimum)")
    p.add_argument("--no-delay", action="store_true", help="skip the delay-time (plus-minus) profile")
    p.set_defaults(run=run)


def _floats(text, option):
    from ..core.errors import InputError

    try:
        values = [float(v) for v in text.split(",") if v.strip()]
    except ValueError:
        raise InputError(f"{option}: expected numbers separated by commas, got {text!r}") from None
    if not values or any(not math.isfinite(v) or v <= 0 for v in values):
        raise InputError(f"{option}: expected positive offsets in m, got {text!r}")
    return values


def _side_key(text, option):
    from ..core.errors import InputError

    parts = text.split(":")
    if len(parts) != 3 or parts[1].lower() not in ("left", "right"):
        raise InputError(f"{option}: expected X:left|right:VALUE, got {text!r}")
    try:
        x = float(parts[0])
    except ValueError:
        raise InputError(f"{option}: shot x must be a number, got {parts[0]!r}") from None
    return (x, parts[1].lower()), parts[2]


def options_from_args(args):
    """Library keyword arguments from the parsed command line."""
    from ..api import check_branch_count
    from ..core.errors import InputError

    if args.branches is not None:
        check_branch_count(args.branches, "--branches")
    check_branch_count(args.max_branches, "--max-branches")
    if not args.sigma_ms > 0:
        raise InputError(f"--sigma-ms must be positive, got {args.sigma_ms:g}")
    if not args.disagree_pct > 0:
        raise InputError(f"--disagree-pct must be positive, got {args.disagree_pct:g}")
    if args.outlier_sigma < 0:
        raise InputError(f"--outlier-sigma must be >= 0, got {args.outlier_sigma:g}")
    if args.min_contrast_pct < 0:
        raise InputError(f"--min-contrast-pct must be >= 0, got {args.min_contrast_pct:g}")
    n_branches = args.branches
    if args.side_branches:
        table = {}
        for text in args.side_branches:
            key, value = _side_key(text, "--side-branches")
            try:
                table[key] = int(value)
            except ValueError:
                raise InputError(f"--side-branches: N must be an integer, got {value!r}") from None
            check_branch_count(table[key], "--side-branches N")
        n_branches = _DefaultDict(table, args.branches)
    breaks = _floats(args.breaks, "--breaks") if args.breaks else None
    if args.side_breaks:
        table = {}
        for text in args.side_breaks:
            key, value = _side_key(text, "--side-breaks")
            table[key] = _floats(value, "--side-breaks")
        breaks = _DefaultDict(table, breaks)
    if args.grm_xy is not None and args.grm_xy < 0:
        raise InputError(f"--grm-xy must be >= 0, got {args.grm_xy:g}")
    return {"n_branches": n_branches, "breaks_m": breaks, "sigma_ms": args.sigma_ms,
            "max_branches": args.max_branches, "min_contrast": args.min_contrast_pct / 100.0,
            "outlier_sigma": args.outlier_sigma or None,
            "velocity_disagreement_pct": args.disagree_pct, "delay_times": not args.no_delay,
            "grm": args.grm or args.grm_xy is not None, "grm_xy_m": args.grm_xy}


class _DefaultDict(dict):
    """Per-side values with a value for every other side (used by tomo.branches)."""

    def __init__(self, table, default):
        super().__init__(table)
        self.default = default


def tie_lines(result):
    """The borehole ties of a layered result as lines of text (none without boreholes)."""
    out = []
    for tie in result.ties:
        out.append(tie.summary())
        out.append("  borehole      x (m)  logged (m)  before (m)  velocity only (m)  own velocity (m/s)  in fit")
        for b in tie.boreholes:
            before = "-" if not b.tied else f"{b.depth_before_m:.2f}"
            after = "-" if not b.tied else f"{b.depth_velocity_m:.2f}"
            own = "-" if math.isnan(b.own_velocity_m_s) else f"{b.own_velocity_m_s:.0f}"
            out.append(f"  {b.label:<10} {b.x:8.1f}  {b.depth_m:5.1f} ± {b.sigma_m:3.1f}  {before:>10}  {after:>17}  "
                       f"{own:>18}  {'yes' if b.used else 'no':>6}{'  FLAGGED' if b.flagged else ''}")
    return out


def run(args):
    from .. import api

    options = options_from_args(args)
    survey = read_survey_args(args)
    for message in survey.notices:
        note(message)
    result = api.interpret_layers(survey, boreholes=args.boreholes, **options)
    for message in result.messages:
        note(message.message)
    # outputs first, so that a closed stdout cannot lose them
    written = []
    if args.out:
        api.write_layers(result, args.out)
        written.append(f"wrote {args.out}")
    if args.profile:
        if result.profile is None:
            note("no delay-time profile (no refractor reversed at common geophones); "
                 "the profile file has a header only")
        rows = api.write_profile(result, args.profile)
        written.append(f"wrote {args.profile} ({rows} rows)")
    if args.figure:
        api.plot_branches(result, args.figure, survey)
        written.append(f"wrote {args.figure}")
    print("layer  velocity (m/s)  thickness (m)  depth to top (m)  reversed")
    for k, lay in enumerate(result.layers, start=1):
        h = "-" if lay.thickness_m is None else f"{lay.thickness_m:.2f}"
        rev = {None: "-", True: "yes", False: "NO"}[lay.reversed]
        print(f"{k:5d}  {lay.velocity_m_s:14.0f}  {h:>13}  {lay.depth_top_m:16.2f}  {rev:>8}")
    for k in sorted({d.layer for d in result.dips}):
        pairs = [d for d in result.dips if d.layer == k]
        if len(pairs) == 1:
            d = pairs[0]
            print(f"layer {k} between shots {d.shot_left_x:g} and {d.shot_right_x:g} m: "
                  f"{d.velocity_m_s:.0f} m/s, dip {d.dip_deg:+.1f} deg (positive: deepening to larger x)")
        else:
            v = [d.velocity_m_s for d in pairs]
            dip = [d.dip_deg for d in pairs]
            print(f"layer {k} from {len(pairs)} reversed pairs: {min(v):.0f} to {max(v):.0f} m/s, dip "
                  f"{min(dip):+.1f} to {max(dip):+.1f} deg (positive: deepening to larger x; each pair in --out)")
    for j in result.refractors:
        line = result.refractor(j)
        print(f"refractor {j} (delay times): {line.x.size} geophones from {line.x.min():g} to {line.x.max():g} m, "
              f"depth {line.depth_m.min():.2f} to {line.depth_m.max():.2f} m")
    for line in tie_lines(result):
        print(line)
    # every notice, grouped: warnings to act on first and numbered, then the notes
    for line in notice_lines(result.warnings):
        print(line)
    for c in result.cautions:
        print(f"caution: {c}")
    for line in written:
        print(line)
    return 0

