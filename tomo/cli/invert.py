"""`tomo invert`: travel-time tomography of a pick file into a run file (HDF5)."""

from __future__ import annotations

import sys

from . import note
from .line_options import add_line_options, read_survey_args

#: Inversion settings the command line sets: option dest -> InversionSettings field.
#: Options left out take the library's default (shown in --help from the same place).
SETTINGS = {"max_iterations": "max_iterations", "chi2_target": "chi2_target", "sigma_ms": "default_sigma_ms",
            "parameter": "parameter", "smooth_x": "smooth_x", "smooth_z": "smooth_z", "damping": "damping",
            "v_min": "v_min_m_s", "v_max": "v_max_m_s", "workers": "workers"}


def register(sub):
    from ..api import START_SMOOTHING_CELLS, STARTS, default_settings

    d = default_settings()
    p = sub.add_parser(
        "invert", help="invert first-arrival picks for a gridded velocity section",
        description="Travel-time tomography: the smoothest velocity model that fits the picks to "
                    "their uncertainty (chi-squared about 1), by regularised least-squares updates "
                    "from a starting model. "
                    "The run file is rewritten after every finished iteration, so Ctrl-C keeps "
                    "the last finished one. A tomogram is one of many models that fit the picks: "
                    "velocities do not identify materials; calibrate against boreholes.",
    )
    p.add_argument("picks", metavar="PICKS.csv", help="pick file")
    p.add_argument("--terrain", metavar="T.csv", help="terrain file (x, z in m)")
    add_line_options(p)
    p.add_argument("--mesh", metavar="MESH.toml",
                   help="mesh spec (default: cells of half the station spacing, and a depth that holds the "
                        "starting model's deepest ray with room to spare)")
    p.add_argument("--start", choices=list(STARTS), default=STARTS[0],
                   help="starting model: the layered interpretation (default) or a 1-D "
                        "velocity-depth gradient fitted to the picks")
    p.add_argument("--branches", type=int, metavar="N",
                   help="travel-time branches on every side for the layered start, as in "
                        "'tomo layers --branches' (default: chosen by the BIC)")
    p.add_argument("--layers", metavar="layers.json",
                   help="start from this layered interpretation of the same picks ('tomo layers --out') "
                        "instead of interpreting them again")
    p.add_argument("--start-smoothing", type=float, metavar="CELLS",
                   help="Gaussian smoothing of the layered start, in model cells (default "
                        f"{START_SMOOTHING_CELLS:g}, about one station spacing; 0 keeps the sharp layers, "
                        "which the tomography moves poorly)")
    p.add_argument("--boreholes", metavar="B.csv",
                   help="boreholes (x or easting,northing, depth_m, optional sigma_m, label, interface) the "
                        "iso-velocity surface must pass through within their sigma; the run is made without and "
                        "with them, and a borehole the picks resist is flagged")
    p.add_argument("--contour", type=float, metavar="V",
                   help="velocity of the surface the boreholes lie on, m/s (default: the mean of the layer "
                        "velocities above and below the refractor each logged, the deepest by default)")
    p.add_argument("--out", default="run.h5", metavar="RUN.h5", help="run file to write (default run.h5)")
    g = p.add_argument_group("inversion settings (defaults suit a typical line)")
    g.add_argument("--max-iterations", metavar="N", type=int, help=f"most iterations (default {d.max_iterations})")
    g.add_argument("--chi2-target", metavar="X", type=float,
                   help=f"target of mean((residual/sigma)^2) (default {d.chi2_target:g})")
    g.add_argument("--sigma-ms", metavar="MS", type=float,
                   help=f"pick uncertainty where the pick file has no sigma_ms, ms (default {d.default_sigma_ms:g})")
    g.add_argument("--parameter", choices=["logv", "slowness"],
                   help=f"model parameter (default {d.parameter})")
    g.add_argument("--smooth-x", metavar="W", type=float,
                   help=f"weight of horizontal smoothing (default {d.smooth_x:g})")
    g.add_argument("--smooth-z", metavar="W", type=float,
                   help=f"weight of vertical smoothing (default {d.smooth_z:g})")
    g.add_argument("--damping", metavar="W", type=float,
                   help="weight of damping toward the starting model, relative to the smoothing "
                        f"(default {d.damping:g}: off, so the start leaves nothing of itself where the "
                        "picks are silent)")
    g.add_argument("--v-min", type=float, metavar="M_S",
                   help="lowest velocity allowed, m/s (default: min(150, half the starting minimum))")
    g.add_argument("--v-max", type=float, metavar="M_S",
                   help="highest velocity allowed, m/s (default: max(7000, twice the starting maximum))")
    g.add_argument("--workers", metavar="N", type=int,
                   help=f"processes for forward solves and rays, at most the cores (default {d.workers})")
    p.set_defaults(run=run)


def _print_progress(info):
    """One progress line per iteration on stderr."""
    note(str(info))


def _print_plan(plan):
    """The grid, its depth and the estimate, before the first iteration."""
    note(f"grid: {plan.mesh}")
    note(f"grid depth: {plan.depth}")
    note(plan.estimate.describe())


def run(args):
    from .. import api
    from ..api import InversionInterrupted
    from .bars import IterationBars

    settings = {field: getattr(args, dest) for dest, field in SETTINGS.items() if getattr(args, dest) is not None}
    survey = read_survey_args(args)
    bars = IterationBars()

    def iteration_line(info):
        bars.close()  # the iteration's bar makes way for its line
        _print_progress(info)

    try:
        result = api.invert(survey, start=args.start, layers=args.layers, mesh=args.mesh, out=args.out,
                            progress=iteration_line, branches=args.branches, start_smoothing=args.start_smoothing,
                            boreholes=args.boreholes, contour_m_s=args.contour, pass_progress=bars.passes,
                            on_plan=_print_plan, **settings)
    except InversionInterrupted as exc:
        bars.close()
        print(f"tomo invert: {exc.message}", file=sys.stderr)
        return 130
    finally:
        bars.close()
    for message in result.notes:
        if not message.startswith("grid depth "):  # told before the run (_print_plan); kept in the run file
            note(message)
    print(f"wrote {args.out}: {result.iterations} iteration(s), chi2 {result.chi2:.3f}, "
          f"RMS {result.rms_ms:.3f} ms; stopped: {result.stop_reason}")
    if result.borehole_fit is not None:
        for line in result.borehole_fit.lines():
            print(line)
    note("A tomogram is one of many models that fit the picks; velocities do not identify "
         "materials; calibrate against boreholes; designs need review by a licensed professional.")
    if not result.converged:
        note("the picks are not fitted to their uncertainty (chi2 above target): "
             "see the residuals before using the section")
        if result.settings.get("start") == "layered":
            # a wrong layer in the start (e.g. curved branches of an undulating
            # refractor read as extra layers) can trap the iterations far from the fit
            note("check the layered start ('tomo layers', and --branches N to fix the number of layers) "
                 "and compare a run with --start gradient")
    elif result.settings.get("start") == "layered":
        # the smoothest model that fits hardly depends on the start (README, Two starting
        # models), but where the two differ the picks do not decide: the cheap check
        note(f"to see what the picks leave open, invert them again with --start gradient and compare: "
             f"tomo plot {args.out} --out FIGURES --versus OTHER.h5")
    return 0
