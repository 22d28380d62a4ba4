"""A run's report: one self-contained HTML file to hand to a client.

Numbered sections: the project (from a small TOML file or options,
:mod:`tomo.survey.project`), the survey and its data, pick quality with every warning
and note of the layered interpretation, the settings in words with units, the layered
interpretation, the fit of the tomogram, the depth to the deepest refractor at stations
along the line with its range and where that range comes from, the boreholes, the figures (velocity,
coverage, ray paths, depth below ground, fits; station numbers on the sections), notes
from the run, and the interpretation cautions. Figures are embedded as base64 PNG; no
scripts, no external files and no folders of the machine that made it, so it opens
offline anywhere, and it prints on A4.
"""

from __future__ import annotations

import base64
import datetime as _dt
from pathlib import Path

from ..core.fileio import atomic_open
from ..core.notices import NOTE, WARNING
from ..core.version import __version__
from ..layered.result import layered_result
from .report_html import CSS, Sections, esc, figure_png, no_folders
from .report_sections import (
    boreholes_section,
    depth_section,
    input_summary,
    layered_section,
    misfit_section,
    notices_html,
    pick_qc,
    project_section,
    qc_section,
    settings_section,
)

__all__ = ["CAUTIONS", "LAYERED_START_NOTE", "pick_qc", "build_report", "write_report"]

#: Shown in every report; people act on these numbers.
CAUTIONS = (
    ("Non-uniqueness",
     "Many velocity models explain the same picks equally well. The tomogram is one smooth model "
     "that fits the picks to their uncertainty; sharp boundaries come out smeared, and features "
     "smaller than about the geophone spacing, or below the depth of investigation, are not resolved. "
     "Cells that no ray reaches show the starting model, not the ground."),
    ("Hidden layers and velocity inversions",
     "The layered methods assume velocity increases with depth. A layer that is thin or only slightly "
     "faster than the one above gives no first arrivals of its own (a hidden layer); a slower layer "
     "beneath a faster one gives none at all (a velocity inversion), and depths below it come out "
     "too deep. First-arrival tomography shares these blind spots."),
    ("Velocity is not rock type or rippability",
     "Velocity ranges of soils and rocks overlap widely: a velocity does not identify a material, its "
     "strength or whether it can be ripped or excavated. Read velocities as one piece of evidence."),
    ("Calibrate with boreholes",
     "Tie the interpreted surfaces to boreholes, trial pits or probes on the line before using "
     "depths; without calibration the depths are estimates with the uncertainty shown, at best."),
    ("Professional review",
     "This report is a geophysical interpretation, not a design. Any design that relies on it (a "
     "retaining wall, a foundation, an excavation) needs review by a licensed professional under the "
     "local codes."),
)

#: Said beside the comparison when the tomography started from the layered model.
LAYERED_START_NOTE = (
    "The tomography started from this layered model. Its objective keeps nothing of the start (it "
    "seeks the smoothest model that fits the picks), and on synthetic lines runs from the layered and "
    "from the 1-D gradient start put the rock surface within 0.06-0.16 m RMS of each other "
    "(benchmarks/starts.py), so the agreement below is no artefact of the start. Both methods still "
    "smooth what they cannot resolve: where they agree, calibrate against boreholes all the same. "
    "To see what the picks leave open, run tomo invert --start gradient and compare the two tomograms "
    "(tomo report RUN.h5 --versus OTHER.h5).")


def _figures(run, skip_note, figure_pngs, other, labels, contour_m_s, depth_range):
    """[(FigureSpec, base64 PNG)] of the run (drawn here unless ``figure_pngs`` has them),
    the comparison with ``other`` last; and the one-line comparison, or ""."""
    from ..figures import versus as vs
    from ..figures.bundle import FIGURES, FigureSpec, make_figures

    if figure_pngs is None:
        figs = [(spec, figure_png(fig)) for spec, fig in make_figures(run, skip_note, depth_range=depth_range)]
    else:
        figs = [(spec, base64.b64encode(figure_pngs[spec.name]).decode("ascii"))
                for spec in FIGURES if spec.name in figure_pngs]
    summary = ""
    if other is not None:
        summary = vs.versus_summary(vs.versus_table(run, other, contour_m_s, labels), labels)
        if figure_pngs is not None and "versus" in figure_pngs:
            data = base64.b64encode(figure_pngs["versus"]).decode("ascii")
        else:
            data = figure_png(vs.versus_figure(run, other, contour_m_s, labels))
        figs.append((FigureSpec("versus", vs.CAPTION, None), data))
    return figs, summary


def _figures_html(figs, summary):
    out = []
    for number, (spec, data) in enumerate(figs, start=1):
        if spec.name == "versus":
            out.append(f"<p>Against a second run of these picks (Figure {number}): {esc(no_folders(summary))}.</p>")
        out.append(f'<figure id="fig-{spec.name}"><img alt="{esc(spec.caption)}" '
                   f'src="data:image/png;base64,{data}"><figcaption><b>Figure {number}.</b> '
                   f"{esc(spec.caption)}</figcaption></figure>")
    if not any(spec.name == "compare" for spec, _ in figs):
        out.append('<p class="note">The layered against gridded comparison is left out: this run file holds '
                   "no layered refractor profile.</p>")
    return "\n".join(out)


def _sections(run, project, figs, summary, depth_value, depth_range, comparison_notes):
    s = Sections()
    s.add("project", "Project", project_section(project))
    s.add("inputs", "Survey and data", input_summary(run))
    layered = layered_result(run.layered)
    notices = [] if layered is None else layered.warnings
    s.add("qc", "Pick quality", qc_section(run))
    s.add_sub("Warnings from the layered interpretation",
              "<p>Each asks for a check of the picks, the shots or the settings.</p>" + notices_html(notices, WARNING))
    notes = notices_html(notices, NOTE)
    if notes:
        s.add_sub("Notes from the layered interpretation",
                  "<p>What the methods found in these picks and how they dealt with it; nothing to fix.</p>" + notes)
    s.add("settings", "Settings", settings_section(run))
    s.add("layered", "Layered interpretation", layered_section(run, LAYERED_START_NOTE))
    s.add("misfit", "Tomography: fit to the picks", misfit_section(run))
    if depth_value is None:
        body = ('<p class="note">No refractor surface to tabulate: the run holds no layered result to take its '
                "velocity from (tomo export RUN.h5 --contour V --surface S.csv writes any surface).</p>")
    else:
        body = depth_section(run, depth_value, depth_range)
    s.add("depth", "Depth to the deepest refractor",
          body + "".join(f'<p class="note">{esc(n)}</p>' for n in comparison_notes))
    if getattr(run, "ensemble", None) is not None:
        from .ensemble_text import ensemble_html

        s.add_sub("How sure the depth is: the ensemble", ensemble_html(run, depth_value, esc=esc, table=False))
    s.add_sub("Boreholes", boreholes_section(run))
    s.add("figures", "Figures", _figures_html(figs, summary))
    if run.notes:
        s.add("notes", "Notes from the run", "<ul>" + "".join(f"<li>{esc(no_folders(n))}</li>" for n in run.notes)
              + "</ul>")
    cautions = "".join(f"<li><b>{esc(head)}.</b> {esc(text)}</li>" for head, text in CAUTIONS)
    s.add("cautions", "Interpretation cautions", f"<ul>{cautions}</ul>")
    return s


def build_report(run, source=None, skip_note=None, figure_pngs=None, other=None, labels=None, contour_m_s=None,
                 project=None, depth_range=None):
    """The report HTML for a run (a str).

    Parameters
    ----------
    run : RunData
    source : str, optional
        The run file; only its name is shown.
    skip_note : callable, optional
        Told of figures left out.
    figure_pngs : dict, optional
        Figure name -> PNG bytes (names of :data:`tomo.figures.bundle.FIGURES`, plus
        ``"versus"``), reused instead of drawing them again.
    other : RunData, optional
        A second run of the same picks (refused otherwise): the comparison of the
        ``contour_m_s`` surface in both (:mod:`tomo.figures.versus`; ``labels`` name
        them), and the depth table's range unless ``depth_range`` is given.
    contour_m_s : float, optional
        Velocity of the surface in the depth table, m/s (default: the layered refractor's
        contour).
    project : ProjectInfo, optional
        Project details (:mod:`tomo.survey.project`).
    depth_range : DepthRange, optional
        The range of the surface's depth (e.g. an ensemble's 5-95 % band,
        :mod:`tomo.analysis.depth_range`); wins over the two-run range.
    """
    from ..analysis.digest import check_same_picks
    from ..figures import versus as vs
    from .report_depth import rock_surface

    created = _dt.datetime.now(_dt.UTC).replace(microsecond=0).isoformat()
    comparison_notes = []
    if other is not None:
        labels = tuple(labels or vs.LABELS)
        comparison_notes = check_same_picks(run, other, labels)
    depth_value, depth_range = rock_surface(run, contour_m_s, depth_range, other, labels)
    figs, summary = _figures(run, skip_note, figure_pngs, other, labels, contour_m_s, depth_range)
    sections = _sections(run, project, figs, summary, depth_value, depth_range, comparison_notes)
    known = [v for k, v in (run.settings or {}).items() if k.endswith("_file") and isinstance(v, str)]
    known += [str(source)] if source else []
    title = "Seismic refraction interpretation"
    heading = project.title if project is not None and project.title else ""
    name = Path(source).name if source else "(in memory)"
    revision = f", revision {esc(project.revision)}" if project is not None and project.revision else ""
    return f"""<!DOCTYPE html>
<html lang="en"><head><meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>{esc(title)}{f' - {esc(heading)}' if heading else ''}{f' - {esc(name)}' if source else ''}</title>
<style>{CSS}</style></head>
<body>
<h1>{esc(title)}</h1>
{f'<p><b>{esc(heading)}</b>{revision}</p>' if heading else ''}
<p class="meta">Run file {esc(name)}, made {esc(run.created or '?')} by tomo {esc(run.tomo_version)};
report made {created} by tomo {__version__}.</p>
<div class="box"><b>Read the cautions at the end before using these results.</b> The section is one of many
models that fit the picks; depths need calibration against boreholes, and designs need review by a licensed
professional under the local codes.</div>
{sections.contents()}
{no_folders(sections.html(), known, other_paths=False)}
</body></html>
"""


def write_report(path, run, source=None, skip_note=None, figure_pngs=None, other=None, labels=None,
                 contour_m_s=None, project=None, depth_range=None):
    """Build the report (see :func:`build_report`) and write it atomically to ``path``;
    returns the path."""
    from ..core.fileio import check_output_path

    check_output_path(path)
    text = build_report(run, source=source, skip_note=skip_note, figure_pngs=figure_pngs, other=other,
                        labels=labels, contour_m_s=contour_m_s, project=project, depth_range=depth_range)
    with atomic_open(path, "w", encoding="utf-8") as f:
        f.write(text)
    return Path(path)
