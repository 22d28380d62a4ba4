"""HTML pieces of the report: the style sheet (screen and A4 print), escaping, tables,
embedded figures and numbered sections. Plain HTML and CSS, no scripts and no
external files, so a report opens offline anywhere and prints on A4."""

from __future__ import annotations

import base64
import html
import io
import re
from pathlib import PurePath

__all__ = ["CSS", "esc", "Raw", "table", "figure_png", "no_folders", "Sections"]

CSS = """
body { font-family: "DejaVu Sans", "Helvetica Neue", Arial, sans-serif; color: #1d2430;
       max-width: 48em; margin: 2em auto; padding: 0 1em; line-height: 1.45; font-size: 15px; }
h1 { font-size: 1.55em; margin-bottom: 0.1em; }
h2 { font-size: 1.2em; border-bottom: 2px solid #0072B2; padding-bottom: 0.15em; margin-top: 1.8em; }
h3 { font-size: 1.0em; margin-bottom: 0.3em; }
.meta { color: #555; font-size: 0.9em; }
table { border-collapse: collapse; margin: 0.6em 0 1em 0; font-size: 0.9em; }
th, td { border-bottom: 1px solid #ccd; padding: 0.2em 0.7em; text-align: left; vertical-align: top; }
th { background: #eef2f7; }
td.num { text-align: right; font-variant-numeric: tabular-nums; white-space: nowrap; }
td.group { font-weight: bold; background: #f6f8fb; }
.flag { color: #a33d00; font-weight: bold; }
.box { border-left: 5px solid #D55E00; background: #fdf3ec; padding: 0.5em 1em; margin: 1em 0; }
figure { margin: 1.2em 0; page-break-inside: avoid; break-inside: avoid; }
figure img { width: 100%; height: auto; border: 1px solid #dde; }
figcaption { font-size: 0.88em; color: #333; margin-top: 0.3em; }
.note { color: #555; font-style: italic; }
code { font-size: 0.92em; }
ol.notices { list-style: none; padding-left: 0.5em; }
ol.notices > li { margin-bottom: 0.4em; }
nav ol { columns: 2; font-size: 0.9em; }
@page { size: A4; margin: 16mm 14mm 18mm 14mm; }
@media print {
  body { max-width: none; margin: 0; padding: 0; font-size: 10pt; }
  h2 { page-break-after: avoid; break-after: avoid; }
  tr, li { page-break-inside: avoid; break-inside: avoid; }
  table { font-size: 8.5pt; }
  nav { display: none; }
  a { color: inherit; text-decoration: none; }
}
"""


_NUM = ' class="num"'


class Raw(str):
    """HTML that is already escaped."""


def esc(value):
    """``value`` as HTML text."""
    return value if isinstance(value, Raw) else html.escape(str(value), quote=True)


def table(header, rows, numeric=(), groups=False):
    """An HTML table; ``numeric`` columns are right-aligned. With ``groups``, the first
    item of each row is a group name shown once, as a row of its own, when it changes."""
    out = ["<table>"]
    if any(header):
        out.append("<tr>" + "".join(f"<th>{esc(h)}</th>" for h in header) + "</tr>")
    current = None
    for row in rows:
        if groups:
            if row[0] != current:
                current = row[0]
                out.append(f'<tr><td class="group" colspan="{len(row) - 1}">{esc(current)}</td></tr>')
            row = row[1:]
        cells = "".join(f"<td{_NUM if k in numeric else ''}>{esc(v)}</td>" for k, v in enumerate(row))
        out.append(f"<tr>{cells}</tr>")
    out.append("</table>")
    return "\n".join(out)


def figure_png(fig, dpi=130):
    """A matplotlib figure as base64 PNG text (the figure is closed)."""
    from ..figures import style

    buffer = io.BytesIO()
    fig.savefig(buffer, format="png", dpi=dpi, bbox_inches="tight")
    style.plt.close(fig)
    return base64.b64encode(buffer.getvalue()).decode("ascii")


#: An absolute or relative path of at least two parts (a folder and a name); "m/s" and
#: "1/s" are one character after the slash and never followed by another, so they stay.
_PATH = re.compile(r"(?:[A-Za-z]:)?(?:[.~]{0,2}[\\/])?(?:[\w.~-]+[\\/])+([\w.-]+\.[A-Za-z]\w*)")


def no_folders(text, known_paths=(), other_paths=True):
    """``text`` with file paths cut to their file names: a report goes to a client and
    says nothing of the folders on the machine that made it. ``known_paths`` (e.g. the
    input files a run names, which may hold spaces) are cut first, whole; then, with
    ``other_paths``, any other path of two or more parts ending in a file name (for text
    that came from the run, not the report's own sentences)."""
    text = str(text)
    for path in sorted((str(p) for p in known_paths if p), key=len, reverse=True):
        name = PurePath(path).name
        text = text.replace(path, name).replace(html.escape(path, quote=True), html.escape(name, quote=True))
    return _PATH.sub(r"\1", text) if other_paths else text


class Sections:
    """Numbered sections (1, 2, ...) with numbered subsections (2.1, 2.2, ...)."""

    def __init__(self):
        self.parts, self.toc, self.number, self.sub = [], [], 0, 0

    def add(self, anchor, title, body):
        self.number, self.sub = self.number + 1, 0
        self.toc.append((anchor, f"{self.number}. {title}"))
        self.parts.append(f'<h2 id="{anchor}">{self.number}. {esc(title)}</h2>\n{body}')

    def add_sub(self, title, body):
        self.sub += 1
        self.parts.append(f"<h3>{self.number}.{self.sub} {esc(title)}</h3>\n{body}")

    def contents(self):
        items = "".join(f'<li><a href="#{a}">{esc(t)}</a></li>' for a, t in self.toc)
        return f"<nav><b>Contents</b><ol style=\"list-style: none\">{items}</ol></nav>"

    def html(self):
        return "\n".join(self.parts)
