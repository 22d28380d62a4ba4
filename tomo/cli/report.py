"""`tomo report`: not built yet."""

from ..errors import TomoError


def register(sub):
    p = sub.add_parser("report", help="(not built yet)")
    p.set_defaults(run=run)


def run(args):
    raise TomoError("'tomo report' is not built yet")
