"""Exceptions raised by tomo.

Every error a user can cause derives from :class:`TomoError`, so the command line can
turn it into one line on stderr and a non-zero exit status instead of a traceback.
"""

from __future__ import annotations

__all__ = ["TomoError", "InputError", "SolverError", "format_location"]


def format_location(path=None, line=None, field=None) -> str:
    """Return ``"file:line: field 'name'"`` with whichever parts are known."""
    parts = []
    if path is not None:
        where = str(path)
        if line is not None:
            where += f":{line}"
        parts.append(where)
    elif line is not None:
        parts.append(f"line {line}")
    if field is not None:
        parts.append(f"field '{field}'")
    return ": ".join(parts)


class TomoError(Exception):
    """Raised when tomo cannot do what was asked; the message is meant for the user."""


class InputError(TomoError, ValueError):
    """Raised when an input file or argument is missing, malformed or inconsistent.

    Parameters
    ----------
    message : str
        What is wrong, with the expected and the received value where that helps.
    path, line, field : optional
        Where the problem is; they prefix the message as ``file:line: field 'x': ...``.
    """

    def __init__(self, message, path=None, line=None, field=None):
        self.path, self.line, self.field = path, line, field
        where = format_location(path, line, field)
        super().__init__(f"{where}: {message}" if where else message)


class SolverError(TomoError, RuntimeError):
    """Raised when a numerical stage fails in a way the user must act on."""
