"""`tomo layers`: not built yet."""

from ..errors import TomoError


def register(sub):
    p = sub.add_parser("layers", help="(not built yet)")
    p.set_defaults(run=run)


def run(args):
    raise TomoError("'tomo layers' is not built yet")
