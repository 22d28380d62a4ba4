"""`tomo plot`: not built yet."""

from ..errors import TomoError


def register(sub):
    p = sub.add_parser("plot", help="(not built yet)")
    p.set_defaults(run=run)


def run(args):
    raise TomoError("'tomo plot' is not built yet")
