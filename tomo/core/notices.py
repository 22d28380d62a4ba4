"""Notices: warnings and messages about an interpretation as records, not bare text.

A :class:`Notice` carries a stable ``code`` that code and tests compare, the sentence
a person reads (``message``), what it concerns (the layer counted from 1 at the top,
the branch counted from 1 at the shot, the shot side), a short ``hint`` on what to
do about it, its ``level`` and the ``topic`` that names a group of its kind.

Two levels: a *warning* asks the user to act (check picks, shots or settings); a
*note* says what the method found and did about it (a refractor that changes along
the line, an end shot, a velocity taken from the minus times). A clean line should
give few warnings, so that each one is read. :func:`group_notices` collates repeats
of one kind (same code and layer) under one entry and :func:`notice_lines` prints
them all, warnings first and numbered: grouped, never cut.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass

__all__ = ["Notice", "NoticeGroup", "notice_from_value", "notices_from_values", "group_notices", "notice_lines",
           "UNCLASSIFIED", "WARNING", "NOTE"]

#: Code of a notice read from an older file that kept only the text.
UNCLASSIFIED = "unclassified"
#: Levels: something to act on, or information on what the method found and did.
WARNING, NOTE = "warning", "note"


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
    level : {"warning", "note"}
        :data:`WARNING` (act on it) or :data:`NOTE` (information).
    topic : str
        A few words naming the kind, the heading of a group of repeats ("" : the code).
    """

    code: str
    message: str
    layer: int | None = None
    branch: int | None = None
    shot_x: float | None = None
    side: str | None = None
    hint: str = ""
    level: str = WARNING
    topic: str = ""

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
                   side=d.get("side"), hint=str(d.get("hint") or ""),
                   level=NOTE if d.get("level") == NOTE else WARNING, topic=str(d.get("topic") or ""))


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


@dataclass(frozen=True)
class NoticeGroup:
    """Notices of one kind (same code and layer), in the order they were made.

    Attributes
    ----------
    notices : tuple of Notice
    """

    notices: tuple

    @property
    def first(self):
        return self.notices[0]

    @property
    def level(self):
        return self.first.level

    @property
    def hint(self):
        return self.first.hint

    def heading(self):
        """One line: the message of a single notice, or the kind and the count of several."""
        if len(self.notices) == 1:
            return self.first.message
        topic = self.first.topic or self.first.code.replace("-", " ")
        layer = f"layer {self.first.layer}: " if self.first.layer is not None else ""
        return f"{layer}{topic} ({len(self.notices)} times)"

    def members(self):
        """The messages under the heading (none for a single notice)."""
        return [] if len(self.notices) == 1 else [n.message for n in self.notices]


def group_notices(notices):
    """Notices collated by (code, layer) in order of first appearance; warnings first."""
    groups = {}
    for n in notices:
        n = notice_from_value(n)
        groups.setdefault((n.code, n.layer, n.code == UNCLASSIFIED and n.message), []).append(n)
    ordered = [NoticeGroup(tuple(v)) for v in groups.values()]
    return [g for g in ordered if g.level == WARNING] + [g for g in ordered if g.level == NOTE]


def notice_lines(notices, indent="  "):
    """Every notice as text lines: a count line, then warnings numbered W1, W2, ... and
    notes N1, N2, ..., each group's members indented under it with what to do."""
    groups = group_notices(notices)
    n_warn = sum(g.level == WARNING for g in groups)
    lines = [f"{n_warn} warning(s) to act on, {len(groups) - n_warn} note(s) on what the method found"]
    counts = {WARNING: 0, NOTE: 0}
    for g in groups:
        counts[g.level] += 1
        tag = ("W" if g.level == WARNING else "N") + str(counts[g.level])
        lines.append(f"{g.level} {tag}: {g.heading()}")
        lines += [f"{indent}- {m}" for m in g.members()]
        if g.hint:
            lines.append(f"{indent}what to do: {g.hint}")
    return lines
