"""`tomo invert`: not built yet."""

from ..errors import TomoError


def register(sub):
    p = sub.add_parser("invert", help="(not built yet)")
    p.set_defaults(run=run)


def run(args):
    raise TomoError("'tomo invert' is not built yet")
