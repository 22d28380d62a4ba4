"""`tomo export`: not built yet."""

from ..errors import TomoError


def register(sub):
    p = sub.add_parser("export", help="(not built yet)")
    p.set_defaults(run=run)


def run(args):
    raise TomoError("'tomo export' is not built yet")
