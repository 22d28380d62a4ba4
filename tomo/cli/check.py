"""`tomo check`: not built yet."""

from ..errors import TomoError


def register(sub):
    p = sub.add_parser("check", help="(not built yet)")
    p.set_defaults(run=run)


def run(args):
    raise TomoError("'tomo check' is not built yet")
