"""The project details of a line, for the report: a small TOML file or options.

Project file (TOML, UTF-8; every key optional, all text unless said)::

    project = "Retaining wall, ground investigation"
    site = "Hillside east of the works yard"
    line = "Line 1"
    client = "..."
    survey_date = 2026-05-12          # a TOML date or text
    crew = "..."
    equipment = "48-channel seismograph, 14 Hz geophones, 8 kg hammer"
    coordinate_system = "EPSG:32633 (WGS 84 / UTM zone 33N)"
    line_direction = "x increases towards the north-east (bearing 60 degrees)"
    author = "..."
    checked_by = "..."
    revision = "A"
    report_date = 2026-06-01
    notes = "..."

An unknown key is an error naming it (a misspelt key would otherwise vanish from a
report that goes to a client).
"""

from __future__ import annotations

import datetime as _dt
from dataclasses import dataclass, fields, replace

from ..core.errors import InputError
from ..core.fileio import read_toml

__all__ = ["ProjectInfo", "read_project", "PROJECT_FIELDS"]


@dataclass(frozen=True)
class ProjectInfo:
    """Who, where, when and with what a line was surveyed and interpreted (text; "" unknown).

    Attributes
    ----------
    project, site, line, client : str
    survey_date : str
        ISO 8601 date (or free text).
    crew, equipment : str
    coordinate_system : str
        Of the positions and elevations (e.g. an EPSG code and its name; the vertical datum).
    line_direction : str
        Which way x increases on the ground (bearing or landmarks).
    author, checked_by, revision, report_date, notes : str
    """

    project: str = ""
    site: str = ""
    line: str = ""
    client: str = ""
    survey_date: str = ""
    crew: str = ""
    equipment: str = ""
    coordinate_system: str = ""
    line_direction: str = ""
    author: str = ""
    checked_by: str = ""
    revision: str = ""
    report_date: str = ""
    notes: str = ""

    def rows(self):
        """(label, value) for the fields that are set, in the order of :data:`PROJECT_FIELDS`."""
        return [(label, getattr(self, name)) for name, label in PROJECT_FIELDS.items() if getattr(self, name)]

    def updated(self, values, source=None):
        """A copy with ``values`` (name -> text) set; InputError naming an unknown name."""
        return replace(self, **_checked(values, source))

    @property
    def title(self):
        """``project - line`` from what is set ("" when neither is)."""
        return " - ".join(v for v in (self.project, self.line) if v)


#: Field name -> label in the report.
PROJECT_FIELDS = {
    "project": "Project", "site": "Site", "line": "Line", "client": "Client", "survey_date": "Survey date",
    "crew": "Field crew", "equipment": "Equipment", "coordinate_system": "Coordinate system",
    "line_direction": "Line direction", "author": "Interpreted by", "checked_by": "Checked by",
    "revision": "Revision", "report_date": "Report date", "notes": "Notes",
}
assert set(PROJECT_FIELDS) == {f.name for f in fields(ProjectInfo)}


def _checked(values, source=None):
    out = {}
    for name, value in values.items():
        if name not in PROJECT_FIELDS:
            raise InputError(f"unknown project field (expected one of {', '.join(PROJECT_FIELDS)})", path=source,
                             field=name)
        if isinstance(value, (_dt.date, _dt.datetime)):
            value = value.isoformat()
        elif isinstance(value, (int, float)) and not isinstance(value, bool):
            value = f"{value:g}"
        elif not isinstance(value, str):
            raise InputError(f"expected text, got {value!r}", path=source, field=name)
        out[name] = value.strip()
    return out


def read_project(path=None, values=None):
    """Project details from a TOML file and/or ``values`` (name -> text, which win).

    Raises
    ------
    InputError
        For a missing or malformed file, an unknown key or a value that is not text,
        a date or a number.
    """
    info = ProjectInfo()
    if path is not None:
        info = info.updated(read_toml(path), source=str(path))
    return info.updated(values or {}, source=None)
