"""`tomo pick`: automatic first breaks of SEG-2 / SEG-Y shot records, with their sigma."""

from __future__ import annotations

from . import note, progress_printer


def register(sub):
    from ..api import PickSettings

    defaults = PickSettings()
    p = sub.add_parser(
        "pick", help="pick first breaks on shot records (SEG-2, SEG-Y)",
        description="Read shot records, pick the first break of every trace with its own "
                    "uncertainty (sigma_ms from the trace's signal-to-noise ratio and the "
                    "sharpness of its onset), check each pick against its neighbours and write "
                    "a pick file for check, layers and invert. Traces without a clear onset get "
                    "no pick; the file says which and why. Edit the pick file (or give "
                    "--corrections) and run again: edited picks are kept.",
    )
    p.add_argument("records", nargs="+", metavar="RECORD", help="record files (SEG-2 or SEG-Y), one shot each")
    p.add_argument("--out", required=True, metavar="PICKS.csv",
                   help="pick file to write (its trace table, PICKS.traces.csv, goes beside it)")
    p.add_argument("--layout", metavar="LAYOUT.csv",
                   help="record,channel,source_x,receiver_x[,source_z,receiver_z,polarity,dead,delay_ms] "
                        "for records whose headers lack the positions (wins over the headers)")
    p.add_argument("--corrections", metavar="FIX.csv",
                   help="source_x,receiver_x,time_ms (ms or 'drop')[,sigma_ms]: picks to set or drop")
    p.add_argument("--figure-dir", metavar="DIR", help="write a gather figure per shot and a figure of all picks")
    p.add_argument("--highcut-hz", type=float, default=defaults.highcut_hz, metavar="HZ",
                   help="low-pass cut-off before picking, Hz (default: 4 times each gather's dominant "
                        "frequency; 0: none)")
    p.add_argument("--min-snr", type=float, default=defaults.min_snr, metavar="R",
                   help=f"no pick below this signal-to-noise ratio (default {defaults.min_snr:g})")
    p.add_argument("--check-sigma", type=float, default=defaults.consistency_sigmas, metavar="N",
                   help=f"re-pick or drop picks this many sigmas off their neighbours' trend "
                        f"(default {defaults.consistency_sigmas:g})")
    p.add_argument("--no-stack", action="store_true",
                   help="pick every record on its own (default: records of one shot and spread are summed)")
    p.set_defaults(run=run)


def run(args):
    from pathlib import Path

    from .. import api
    from ..core.errors import InputError

    settings = api.PickSettings(highcut_hz=args.highcut_hz, min_snr=args.min_snr,
                            consistency_sigmas=args.check_sigma)
    if args.figure_dir and not Path(args.figure_dir).is_dir():
        raise InputError("figure folder does not exist", path=args.figure_dir)
    result = api.pick_records(args.records, args.out, layout=args.layout, corrections=args.corrections,
                              settings=settings, stack=not args.no_stack, progress=progress_printer("gathers"))
    for message in result.notes:
        note(message)
    unpicked = [row for row in result.rows if not row.picked]
    for row in unpicked[:20]:
        note(f"no pick: {row.record} channel {row.channel} (receiver_x {row.receiver_x:g} m): {row.reason}")
    if len(unpicked) > 20:
        note(f"... and {len(unpicked) - 20} more traces without a pick (listed in {result.out_path})")
    counts = result.counts()
    picked = sum(counts[s] for s in ("picked", "re-picked", "edited", "added", "corrected"))
    print(f"wrote {picked} picks of {len(result.rows)} traces from {len(result.gathers)} shots to {result.out_path} "
          f"(" + ", ".join(f"{n} {s}" for s, n in sorted(counts.items())) + ")")
    print(f"trace table: {result.table_path}")
    if args.figure_dir:
        for path in api.plot_gathers(result, args.figure_dir):
            print(f"wrote {path}")
    return 0
