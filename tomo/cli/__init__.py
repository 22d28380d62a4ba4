"""The ``tomo`` command line: parses arguments and calls the library's API.

Each subcommand lives in its own module of this package with two functions:
``register(subparsers)`` adds its parser and ``run(args)`` calls :mod:`tomo.api`, prints
what it did and returns the exit status (the package imports nothing else of tomo but
:mod:`tomo.core`; ``tests/test_architecture.py`` checks it). Errors a user can cause
(:class:`tomo.TomoError`) become one line on stderr and exit status 2; Ctrl-C gives
status 130.
"""

from __future__ import annotations

import argparse
import importlib
import sys

from ..core.errors import TomoError
from ..core.version import __version__

#: Subcommands in the order a user meets them, and the module that implements each.
COMMANDS = ["synth", "pick", "check", "layers", "invert", "ensemble", "resolve", "design", "plot", "export", "report",
            "demo"]


def build_parser():
    parser = argparse.ArgumentParser(
        prog="tomo",
        description="Shallow seismic refraction interpretation: pick QC, layered "
                    "(intercept-time, delay-time) methods and travel-time tomography.",
    )
    parser.add_argument("--version", action="version", version=f"tomo {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    sub.required = True
    for name in COMMANDS:
        module = importlib.import_module(f"{__name__}.{name}")
        module.register(sub)
    return parser


def main(argv=None):
    """Run the command line; returns the exit status (also usable from tests)."""
    parser = build_parser()
    args = parser.parse_args(argv)
    try:
        return int(args.run(args) or 0)
    except TomoError as exc:
        print(f"tomo {args.command}: error: {exc}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print(f"tomo {args.command}: interrupted", file=sys.stderr)
        return 130


def progress_printer(label):
    """A ``progress(done, total)`` callback that keeps one updating line on a terminal
    and prints only the last count elsewhere (logs stay short)."""
    import time

    start = time.perf_counter()

    def progress(done, total):
        elapsed = time.perf_counter() - start
        left = elapsed / done * (total - done) if done else 0.0
        text = f"{label}: {done}/{total} ({elapsed:.0f} s, about {left:.0f} s left)"
        if sys.stderr.isatty():
            end = "\n" if done == total else ""
            print(f"\r{text}", end=end, file=sys.stderr, flush=True)
        elif done == total:
            print(text, file=sys.stderr, flush=True)

    return progress


def note(message):
    """Print a notice for the user on stderr (stdout stays for results)."""
    print(message, file=sys.stderr, flush=True)


def add_versus_options(parser, what):
    """``--versus OTHER.h5`` and ``--contour V`` for the commands that compare two runs."""
    parser.add_argument("--versus", metavar="OTHER.h5",
                        help="another run of the same picks (e.g. from the other starting model): " + what)
    parser.add_argument("--contour", metavar="V", type=float,
                        help="velocity of the compared surface, m/s (default: the mean of the layer "
                             "velocities above and below the deepest refractor of the layered result)")


def read_versus(args):
    """The run files of ``args.run_file`` and ``--versus``: (run, other or None, labels or None)."""
    from .. import api
    from ..core.errors import InputError

    if args.contour is not None and args.versus is None:
        raise InputError("--contour is the velocity of the surface compared with --versus; give --versus OTHER.h5",
                         field="--contour")
    run = api.read_run(args.run_file)
    if args.versus is None:
        return run, None, None
    other = api.read_run(args.versus)
    labels = api.run_labels(args.run_file, run, args.versus, other)
    # two runs of different picks are refused here, before anything is drawn or written
    for message in api.check_same_picks(run, other, labels):
        note(message)
    return run, other, labels
