"""Notices: warnings and messages about an interpretation as records, not bare text.

A :class:`Notice` carries a stable ``code`` that code and tests compare, the sentence
a person reads (``message``), what it concerns (the layer counted from 1 at the top,
the branch counted from 1 at the shot, the shot side) and a short ``hint`` on what to
do about it. Printing and grouping belong to the reader: repeats of one code can be
counted, and layers numbered as the tables number them, from the fields alone.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass

__all__ = ["Notice", "notice_from_value", "notices_from_values", "UNCLASSIFIED"]

#: Code of a notice read from an older file that kept only the text.
UNCLASSIFIED = "unclassified"


@dataclass(frozen=True)
class Notice:
    """One warning or message.

    Attributes
    ----------
    code : str
        Stable identifier of the kind of notice, e.g. ``"layer-not-reversed"``; never
        reworded once released (files and tests compare it).
    message : str
        The full sentence shown to the user.
    layer : int or None
        Layer concerned, 1 for the top layer; for a refractor, the layer whose top it is.
    branch : int or None
        Travel-time branch concerned, 1 for the branch nearest the shot.
    shot_x : float or None
        Position of the shot concerned, m.
    side : str or None
        ``"left"`` or ``"right"``: the shot side concerned.
    hint : str
        What to do about it, in a few words ("" when nothing is to be done).
    """

    code: str
    message: str
    layer: int | None = None
    branch: int | None = None
    shot_x: float | None = None
    side: str | None = None
    hint: str = ""

    def __str__(self):
        return self.message

    def to_dict(self):
        """JSON-ready record (the message first, for a person reading the file)."""
        d = asdict(self)
        return {"message": d.pop("message"), **d}

    @classmethod
    def from_dict(cls, d):
        return cls(code=str(d.get("code") or UNCLASSIFIED), message=str(d.get("message", "")),
                   layer=None if d.get("layer") is None else int(d["layer"]),
                   branch=None if d.get("branch") is None else int(d["branch"]),
                   shot_x=None if d.get("shot_x") is None else float(d["shot_x"]),
                   side=d.get("side"), hint=str(d.get("hint") or ""))


def notice_from_value(value):
    """A :class:`Notice` from a record (dict), a notice, or bare text (older files)."""
    if isinstance(value, Notice):
        return value
    if isinstance(value, dict):
        return Notice.from_dict(value)
    return Notice(UNCLASSIFIED, str(value))


def notices_from_values(records, texts=()):
    """Notices from a list of records when there is one, else from a list of texts."""
    return [notice_from_value(v) for v in (records if records else texts)]
