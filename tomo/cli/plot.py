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
    p.add_argument("--versus", metavar="OTHER.h5",
                   help="another run of the same line (e.g. from the other starting model): also draw "
                        "versus.png, the same iso-velocity surface in both and their difference")
    p.add_argument("--contour", metavar="V", type=float,
                   help="velocity of that surface, m/s (default: the mean of the layer velocities above "
                        "and below the deepest refractor of the layered result)")
    p.set_defaults(run=run)


def _label(path, run_data):
    from pathlib import Path

    start = (run_data.settings or {}).get("start")
    return f"{Path(path).name} ({start} start)" if start else Path(path).name


def run(args):
    from ..errors import InputError
    from ..figures.bundle import plot_run
    from ..figures.versus import versus_figure, versus_summary, versus_table
    from ..runfile import read_run

    if args.contour is not None and args.versus is None:
        raise InputError("--contour is the velocity of the surface compared with --versus; give --versus OTHER.h5",
                         field="--contour")
    run_data = read_run(args.run_file)
    extra, summary = [], None
    if args.versus is not None:
        other = read_run(args.versus)
        labels = (_label(args.run_file, run_data), _label(args.versus, other))
        if labels[0] == labels[1]:
            labels = (args.run_file, args.versus)
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
