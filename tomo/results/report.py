"""A run's report: one self-contained HTML file (figures embedded as base64 PNG).

Sections: input summary, pick QC (reciprocal times, residual outliers, the layered
interpretation's warnings), settings, the layered table, the final misfit, every run
figure, and the interpretation cautions. Plain HTML and CSS, no scripts, no external
files, so it opens anywhere and prints on A4.
"""

from __future__ import annotations

import base64
import datetime as _dt
import html
import io
import json
from pathlib import Path

import numpy as np

from ..core.fileio import atomic_open
from ..core.version import __version__
from ..layered.result import layered_result

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

_CSS = """
body { font-family: "DejaVu Sans", "Helvetica Neue", Arial, sans-serif; color: #1d2430;
       max-width: 48em; margin: 2em auto; padding: 0 1em; line-height: 1.45; font-size: 15px; }
h1 { font-size: 1.55em; margin-bottom: 0.1em; }
h2 { font-size: 1.2em; border-bottom: 2px solid #0072B2; padding-bottom: 0.15em; margin-top: 1.8em; }
h3 { font-size: 1.0em; margin-bottom: 0.3em; }
.meta { color: #555; font-size: 0.9em; }
table { border-collapse: collapse; margin: 0.6em 0 1em 0; font-size: 0.9em; }
th, td { border-bottom: 1px solid #ccd; padding: 0.2em 0.7em; text-align: left; vertical-align: top; }
th { background: #eef2f7; }
td.num { text-align: right; font-variant-numeric: tabular-nums; }
.flag { color: #a33d00; font-weight: bold; }
.box { border-left: 5px solid #D55E00; background: #fdf3ec; padding: 0.5em 1em; margin: 1em 0; }
figure { margin: 1.2em 0; page-break-inside: avoid; break-inside: avoid; }
figure img { width: 100%; height: auto; border: 1px solid #dde; }
figcaption { font-size: 0.88em; color: #333; margin-top: 0.3em; }
.note { color: #555; font-style: italic; }
code { font-size: 0.92em; }
ol.notices { list-style: none; padding-left: 0.5em; }
ol.notices > li { margin-bottom: 0.4em; }
@media print { body { max-width: none; margin: 0; font-size: 11pt; } h2 { page-break-after: avoid; } }
"""


def _esc(value):
    return html.escape(str(value), quote=True)


def _table(header, rows, numeric=()):
    out = ["<table>"]
    if any(header):
        out.append("<tr>" + "".join(f"<th>{_esc(h)}</th>" for h in header) + "</tr>")
    for row in rows:
        cells = []
        for k, value in enumerate(row):
            cls = ' class="num"' if k in numeric else ""
            cells.append(f"<td{cls}>{value if isinstance(value, _Raw) else _esc(value)}</td>")
        out.append("<tr>" + "".join(cells) + "</tr>")
    out.append("</table>")
    return "\n".join(out)


class _Raw(str):
    """HTML that is already escaped."""


def pick_qc(run):
    """The pick QC of ``tomo check`` (:func:`tomo.qc.check_line`) on the run's picks."""
    from ..layered.qc import check_line
    from ..survey.picks import Picks

    p = run.picks
    sigma = np.asarray(p["sigma_ms"], float)
    picks = Picks(p["source_x"], p["source_z"], p["receiver_x"], p["receiver_z"],
                  time_s=np.asarray(p["observed_ms"], float) * 1e-3,
                  sigma_s=sigma * 1e-3 if np.all(np.isfinite(sigma) & (sigma > 0)) else None)
    return check_line(picks)


def _figure_png(fig, dpi=130):
    from ..figures import style

    buffer = io.BytesIO()
    fig.savefig(buffer, format="png", dpi=dpi, bbox_inches="tight")
    style.plt.close(fig)
    return base64.b64encode(buffer.getvalue()).decode("ascii")


def _input_summary(run):
    p = run.picks
    shots = np.unique(np.round(p["source_x"], 3))
    geos = np.unique(np.round(p["receiver_x"], 3))
    spacing = float(np.median(np.diff(geos))) if geos.size > 1 else float("nan")
    sigma = np.asarray(p["sigma_ms"], float)
    offset = np.abs(p["receiver_x"] - p["source_x"])
    rows = [
        ("Picks", f"{p['observed_ms'].size}"),
        ("Shots", f"{shots.size} (x = {shots.min():g} to {shots.max():g} m)"),
        ("Geophones", f"{geos.size} (x = {geos.min():g} to {geos.max():g} m, median spacing {spacing:g} m)"),
        ("Offsets", f"{offset.min():.1f} to {offset.max():.1f} m"),
        ("First-arrival times", f"{np.min(p['observed_ms']):.2f} to {np.max(p['observed_ms']):.2f} ms"),
        ("Pick uncertainty (sigma)", _value_range(sigma, "ms") if np.any(np.isfinite(sigma)) else "not given"),
        ("Ground elevation", f"{np.min(run.terrain_z):.1f} to {np.max(run.terrain_z):.1f} m "
                             f"({len(run.terrain_x)} terrain points)"),
        ("Model grid", _mesh_text(run)),
    ]
    if run.stations is not None:
        st = run.stations
        side = st.sideways()
        rows.append(("Line on the map", f"{len(st)} surveyed stations, {st.spread_m:.1f} m along the line, "
                                        f"{st.crs if st.crs else 'no coordinate system given'}; largest sideways "
                                        f"departure {side.max_m:.2f} m ({100 * side.fraction:.1f} % of the spread)"
                                        + ("; a 2-D section misplaces depths" if side.warn else "")))
    if run.boreholes is not None and len(run.boreholes):
        rows.append(("Boreholes", f"{len(run.boreholes)} (section 4)"))
    return _table(["", ""], rows)


def _mesh_text(run):
    nz, nx = run.velocity.shape
    cell = abs(run.x[1] - run.x[0]) if run.x.size > 1 else float("nan")
    return (f"{nx} x {nz} cells of {cell:g} m, x {run.x[0] - cell / 2:g} to {run.x[-1] + cell / 2:g} m, "
            f"elevation {run.z[-1] - cell / 2:g} to {run.z[0] + cell / 2:g} m")


def _qc_section(run):
    parts = []
    qc = pick_qc(run)
    tol = qc.settings
    pairs = qc.reciprocal_pairs
    if pairs:
        flagged = qc.n_flagged_reciprocals
        parts.append(f"<p>{len(pairs)} reciprocal pair(s); {flagged} differ by more than the tolerance "
                     f"({tol['reciprocal_tol_ms']:g} ms or {tol['reciprocal_tol_pct']:g} % of the time, whichever is "
                     "larger; common practice), as <code>tomo check</code> reports them.</p>")
        rows = []
        for p in pairs:
            mark = _Raw('<span class="flag">check</span>') if p["flagged"] else "ok"
            rows.append((f"{p['shot_a_x']:g}", f"{p['shot_b_x']:g}", f"{p['time_ab_ms']:.2f}", f"{p['time_ba_ms']:.2f}",
                         f"{p['difference_ms']:+.2f}", f"{p['tolerance_ms']:.2f}", mark))
        parts.append(_table(["shot A x (m)", "shot B x (m)", "A to B (ms)", "B to A (ms)", "difference (ms)",
                             "tolerance (ms)", ""], rows, numeric=(0, 1, 2, 3, 4, 5)))
    else:
        parts.append('<p class="note">No reciprocal pairs: no shot was recorded at another shot\'s position.</p>')
    parts.append(f"<p>Picks that break from their shot's branch (more than {tol['outlier_sigma']:g} robust sigmas): "
                 f"{len(qc.outliers)}."
                 + (" Shots with no reversed partner: " + ", ".join(f"{x:g} m" for x in qc.unreversed_shots) + "."
                    if qc.unreversed_shots else " Every shot has a reversed partner.") + "</p>")
    if qc.outliers:
        rows = [(f"{o['shot_x']:g}", f"{o['receiver_x']:g}", f"{o['time_ms']:.2f}", f"{o['residual_ms']:+.2f}")
                for o in qc.outliers[:20]]
        parts.append(_table(["shot x (m)", "geophone x (m)", "time (ms)", "from branch (ms)"], rows,
                            numeric=(0, 1, 2, 3)))
    r = run.residual_ms
    sigma = np.asarray(run.picks["sigma_ms"], float)
    out = np.flatnonzero(np.abs(r) > 3 * sigma)
    parts.append(f"<p>Residuals beyond three pick sigmas in the final model: {out.size} of {r.size}.</p>")
    if out.size:
        rows = [(f"{run.picks['source_x'][k]:g}", f"{run.picks['receiver_x'][k]:g}",
                 f"{run.picks['observed_ms'][k]:.2f}", f"{run.picks['computed_ms'][k]:.2f}", f"{r[k]:+.2f}")
                for k in out[np.argsort(-np.abs(r[out]))][:20]]
        parts.append(_table(["shot x (m)", "geophone x (m)", "observed (ms)", "computed (ms)", "residual (ms)"],
                            rows, numeric=(0, 1, 2, 3, 4)))
        if out.size > 20:
            parts.append(f'<p class="note">(largest 20 of {out.size} shown)</p>')
    layered = layered_result(run.layered)
    if layered is not None and layered.warnings:
        parts.append(_notices_html(layered.warnings))
    return "\n".join(parts)


def _notices_html(notices):
    """Every notice of the layered interpretation, grouped: the warnings numbered W1, W2, ...
    with what to do, then the notes N1, N2, ...; nothing is cut."""
    from ..core.notices import WARNING, group_notices

    groups = group_notices(notices)
    out = []
    for level, title, tag, intro in (
            (WARNING, "Warnings from the layered interpretation", "W",
             "Each asks for a check of the picks, the shots or the settings."),
            ("note", "Notes from the layered interpretation", "N",
             "What the methods found in these picks and how they dealt with it; nothing to fix.")):
        chosen = [g for g in groups if g.level == level]
        if not chosen:
            if level == WARNING:
                out.append("<h3>Warnings from the layered interpretation (none)</h3>")
            continue
        out.append(f"<h3>{title} ({len(chosen)})</h3><p>{intro}</p><ol class=\"notices\">")
        for k, g in enumerate(chosen, start=1):
            members = "".join(f"<li>{_esc(m)}</li>" for m in g.members())
            out.append(f"<li><b>{tag}{k}.</b> {_esc(g.heading())}" + (f"<ul>{members}</ul>" if members else "")
                       + (f"<br><i>What to do:</i> {_esc(g.hint)}" if g.hint else "") + "</li>")
        out.append("</ol>")
    return "\n".join(out)


def _settings_section(run):
    rows = [(k, json.dumps(v) if not isinstance(v, str) else v) for k, v in sorted(run.settings.items())]
    text = _table(["setting", "value"], rows) if rows else '<p class="note">No settings recorded.</p>'
    return text


def _layered_section(run):
    from ..figures.compare import compare_tables

    layered = layered_result(run.layered)
    if layered is None:
        return ('<p class="note">This run file holds no layered interpretation; the table and the comparison '
                'figure are left out.</p>')
    rows = []
    top = 0.0
    for k, layer in enumerate(layered.layers, start=1):
        thick, v = layer.thickness_m, layer.velocity_m_s
        depth_text = f"{top:.1f} to {top + thick:.1f}" if thick is not None else f"below {top:.1f}"
        dv, dh = layer.velocity_sigma_m_s, layer.thickness_sigma_m
        v_text = f"{v:.0f}" + (f" ± {dv:.0f}" if dv is not None else "")
        h_text = "-" if thick is None else f"{thick:.1f}" + (f" ± {dh:.1f}" if dh is not None else "")
        rows.append((str(k), v_text, h_text, depth_text))
        if thick is not None:
            top += thick
    parts = ["<p>Velocities assumed to increase with depth. Thicknesses and depths are for the line as a whole "
             "(intercept-time method); the delay-time refractor below varies along the line.</p>",
             _table(["layer", "velocity (m/s)", "thickness (m)", "depth range (m)"], rows, numeric=(0, 1, 2))]
    tables = compare_tables(run)
    for table in tables:
        ok = table["constrained"] & np.isfinite(table["difference_m"])
        prof = table["profile"]
        text = (f"<p>Delay-time refractor {table['refractor']}: depth {np.nanmin(prof['depth_m']):.1f} to "
                f"{np.nanmax(prof['depth_m']):.1f} m below ground at {prof['x'].size} geophones "
                f"(x = {prof['x'].min():g} to {prof['x'].max():g} m). The tomogram's {table['contour_m_s']:.0f} m/s "
                "contour (the mean of the layer velocities above and below) ")
        if ok.any():
            d = table["difference_m"][ok]
            text += (f"lies on average {np.mean(d):+.2f} m from it (RMS {np.sqrt(np.mean(d ** 2)):.2f} m) at the "
                     f"{ok.sum()} of these geophones where it is above the depth of investigation.</p>")
        else:
            text += "lies below the depth of investigation there.</p>"
        parts.append(text)
    if tables and (run.settings or {}).get("start") == "layered":
        parts.append(f'<p class="note">{LAYERED_START_NOTE}</p>')
    if tables:
        parts.append(_surface_table(run, tables[-1]["contour_m_s"]))
    if not tables and len(layered.layers) >= 2:
        parts.append('<p class="note">The layered result holds no delay-time refractor profile to compare.</p>')
    return "\n".join(parts)


def _boreholes_section(run):
    """The boreholes beside both interpretations (:mod:`tomo.results.borehole_ties`)."""
    from .borehole_ties import borehole_ties

    ties = borehole_ties(run)
    if not ties:
        return ('<p class="note">No boreholes were given: the depths above are not calibrated. Tie them to '
                "boreholes, trial pits or probes on the line (tomo plot/report/export --boreholes B.csv).</p>")

    def depth(value, error):
        return "-" if not np.isfinite(value) else f"{value:.1f} ({error:+.1f})"

    rows = [(t.label, f"{t.x:.1f}", f"{t.offset_m:.1f}", f"{t.ground_z:.1f}", f"{t.depth_m:.1f} ± {t.sigma_m:.1f}",
             "fastest" if t.interface == 0 else str(t.interface),
             depth(t.layered_depth_m, t.layered_error_m),
             "-" if not np.isfinite(t.contour_m_s) else f"{t.contour_m_s:.0f}",
             depth(t.tomogram_depth_m, t.tomogram_error_m)
             if t.constrained or not np.isfinite(t.tomogram_depth_m)
             else _Raw(f'{_esc(depth(t.tomogram_depth_m, t.tomogram_error_m))} <span class="flag">below DOI</span>'))
            for t in ties]
    return ("<h3>Boreholes</h3><p>Each logged interface beside the layered delay-time refractor and the "
            "tomogram's contour for that interface at the borehole (in brackets: minus the logged depth; positive "
            "is deeper). The boreholes were not used by either interpretation here; a difference larger than "
            "the uncertainties calls for a look at both the borehole and the picks.</p>"
            + _table(["borehole", "x (m)", "off line (m)", "ground (m)", "logged depth (m)", "interface",
                      "layered depth (m)", "contour (m/s)", "tomogram depth (m)"], rows,
                     numeric=(1, 2, 3, 4, 6, 7, 8)))


def _surface_table(run, velocity_m_s, step_m=10.0):
    """Depth to an iso-velocity surface at round distances along the spread."""
    from ..analysis.surface import contour_surface

    surface = contour_surface(run, velocity_m_s)
    geos = np.unique(np.round(run.picks["receiver_x"], 3))
    xs = np.arange(np.ceil(geos.min() / step_m) * step_m, geos.max() + 1e-9, step_m)
    rows = []
    sx, good = surface.x, np.isfinite(surface.elevation_m)
    for x in xs:
        j = int(np.argmin(np.abs(sx - x)))
        # linear between the two columns around x; a column that never reaches the
        # velocity leaves the value out
        near = slice(max(j - 1, 0), j + 2)
        ground = float(np.interp(x, run.terrain_x, run.terrain_z))
        z = float(np.interp(x, sx[good], surface.elevation_m[good])) if good[near].all() else float("nan")
        rows.append((f"{x:g}", f"{ground:.1f}", "-" if not np.isfinite(z) else f"{ground - z:.1f}",
                     "-" if not np.isfinite(z) else f"{z:.1f}",
                     "yes" if surface.constrained[j] else _Raw('<span class="flag">no</span>')))
    return (f"<h3>Depth to the {velocity_m_s:.0f} m/s surface of the tomogram</h3>"
            "<p>Every " + f"{step_m:g} m along the spread; <i>constrained</i> says whether the surface lies above the "
            "depth of investigation there. The full profile: <code>tomo export RUN.h5 --contour "
            f"{velocity_m_s:.0f} --surface surface.csv</code>.</p>"
            + _table(["x (m)", "ground (m)", "depth (m)", "elevation (m)", "constrained"], rows, numeric=(0, 1, 2, 3)))


def _ensemble_section(run, contour_m_s=None):
    """The depth band of an ensemble's rock surface ('' for a single run)."""
    from .ensemble_text import ensemble_html

    html_ = ensemble_html(run, contour_m_s, esc=_esc)
    return f'<h3 id="band">How sure the depth is: the ensemble</h3>{html_}' if html_ else ""


def _misfit_section(run):
    chi2 = np.asarray(run.history.get("chi2", []), float)
    rms = np.asarray(run.history.get("rms_ms", []), float)
    lam = np.asarray(run.history.get("lambda", []), float)
    parts = [f"<p>Final chi-squared <b>{run.chi2:.2f}</b> (target 1: the picks explained to their uncertainty), "
             f"RMS residual <b>{run.rms_ms:.2f} ms</b> after {run.iterations} iteration(s); "
             f"{'converged' if run.converged else 'not converged'}: "
             f"{_esc(run.stop_reason or 'no reason recorded')}.</p>"]
    rows = []
    for k in range(chi2.size):
        rows.append((str(k), f"{chi2[k]:.3g}", f"{rms[k]:.3f}" if k < rms.size else "-",
                     f"{lam[k]:.3g}" if k < lam.size and np.isfinite(lam[k]) else "-"))
    if rows:
        parts.append(_table(["iteration", "chi-squared", "RMS (ms)", "regularisation weight"], rows,
                            numeric=(0, 1, 2, 3)))
    return "\n".join(parts)


def build_report(run, source=None, skip_note=None, figure_pngs=None, other=None, labels=None, contour_m_s=None):
    """The report HTML for a run (a str).

    ``source`` names the run file in the heading. ``figure_pngs`` (figure name -> PNG
    bytes, names as in :data:`tomo.figures.bundle.FIGURES`, plus ``"versus"``) reuses
    figures already drawn; otherwise they are drawn here. ``other``, a second run of
    the same picks (e.g. from the other starting model), adds the comparison of the
    ``contour_m_s`` surface in both (:mod:`tomo.figures.versus`; ``labels`` name the
    two runs).
    """
    from ..figures import versus as vs
    from ..figures.bundle import FIGURES, FigureSpec, make_figures

    created = _dt.datetime.now(_dt.UTC).replace(microsecond=0).isoformat()
    title = "Seismic refraction interpretation"
    if figure_pngs is None:
        figs = [(spec, _figure_png(fig)) for spec, fig in make_figures(run, skip_note)]
    else:
        figs = [(spec, base64.b64encode(figure_pngs[spec.name]).decode("ascii"))
                for spec in FIGURES if spec.name in figure_pngs]
    versus_html = ""
    if other is not None:
        labels = tuple(labels or vs.LABELS)
        summary = vs.versus_summary(vs.versus_table(run, other, contour_m_s, labels), labels)
        if figure_pngs is not None and "versus" in figure_pngs:
            data = base64.b64encode(figure_pngs["versus"]).decode("ascii")
        else:
            fig = vs.versus_figure(run, other, contour_m_s, labels)
            try:
                data = _figure_png(fig)
            finally:
                vs.style.plt.close(fig)
        figs.append((FigureSpec("versus", vs.CAPTION, None), data))
        versus_html = f'<p>Against a second run of these picks (Figure {len(figs)}): {_esc(summary)}.</p>'
    fig_html = []
    for number, (spec, data) in enumerate(figs, start=1):
        if spec.name == "versus":
            fig_html.append(versus_html)
        fig_html.append(f'<figure id="fig-{spec.name}"><img alt="{_esc(spec.caption)}" '
                        f'src="data:image/png;base64,{data}"><figcaption><b>Figure {number}.</b> '
                        f"{_esc(spec.caption)}</figcaption></figure>")
    if not any(spec.name == "compare" for spec, _ in figs):
        fig_html.append('<p class="note">The layered against gridded comparison is left out: this run file holds '
                        "no layered refractor profile.</p>")
    cautions = "".join(f"<li><b>{_esc(head)}.</b> {_esc(text)}</li>" for head, text in CAUTIONS)
    notes = "".join(f"<li>{_esc(n)}</li>" for n in run.notes)
    body = f"""<!DOCTYPE html>
<html lang="en"><head><meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>{_esc(title)}{f' - {_esc(Path(source).name)}' if source else ''}</title>
<style>{_CSS}</style></head>
<body>
<h1>{_esc(title)}</h1>
<p class="meta">Run file {_esc(source or '(in memory)')}, made {_esc(run.created or '?')}
by tomo {_esc(run.tomo_version)}; report made {created} by tomo {__version__}.</p>
<div class="box"><b>Read the cautions at the end before using these results.</b> The section is one of many
models that fit the picks; depths need calibration against boreholes, and designs need review by a licensed
professional under the local codes.</div>
<h2 id="inputs">1. Input summary</h2>
{_input_summary(run)}
<h2 id="qc">2. Pick quality</h2>
{_qc_section(run)}
<h2 id="settings">3. Settings</h2>
{_settings_section(run)}
<h2 id="layered">4. Layered interpretation</h2>
{_layered_section(run)}
{_boreholes_section(run)}
<h2 id="misfit">5. Final misfit</h2>
{_misfit_section(run)}
{_ensemble_section(run, contour_m_s)}
<h2 id="figures">6. Figures</h2>
{''.join(fig_html)}
<h2 id="cautions">7. Interpretation cautions</h2>
<ul>{cautions}</ul>
{f'<h2 id="notes">Notes from the run</h2><ul>{notes}</ul>' if notes else ''}
</body></html>
"""
    return body


def write_report(path, run, source=None, skip_note=None, figure_pngs=None, other=None, labels=None,
                 contour_m_s=None):
    """Build the report (see :func:`build_report`) and write it atomically to ``path``;
    returns the path."""
    from ..core.fileio import check_output_path

    check_output_path(path)
    text = build_report(run, source=source, skip_note=skip_note, figure_pngs=figure_pngs, other=other,
                        labels=labels, contour_m_s=contour_m_s)
    with atomic_open(path, "w", encoding="utf-8") as f:
        f.write(text)
    return Path(path)


def _value_range(values, unit):
    """``"0.5 ms"`` for one value, ``"0.3 to 1 ms"`` for a range."""
    lo, hi = np.nanmin(values), np.nanmax(values)
    if np.isclose(lo, hi):
        return f"{lo:.2g} {unit}"
    return f"{lo:.2g} to {hi:.2g} {unit}"
