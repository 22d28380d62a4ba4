"""`tomo demo`: not built yet."""

from ..errors import TomoError


def register(sub):
    p = sub.add_parser("demo", help="(not built yet)")
    p.set_defaults(run=run)


def run(args):
    raise TomoError("'tomo demo' is not built yet")
