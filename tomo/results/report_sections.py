"""The bodies of the report's sections (HTML text), one function each; the report
(:mod:`tomo.results.report`) numbers and assembles them."""

from __future__ import annotations

import numpy as np

from ..core.notices import WARNING, group_notices
from ..layered.result import layered_result
from .report_boreholes import borehole_use_html, used_text
from .report_depth import depth_rows
from .report_html import Raw, esc, no_folders, table
from .report_settings import settings_rows

__all__ = ["project_section", "input_summary", "pick_qc", "qc_section", "notices_html", "settings_section",
           "layered_section", "depth_section", "boreholes_section", "misfit_section"]

_FLAG_NO = Raw('<span class="flag">no</span>')


def project_section(project):
    """The project table (:class:`tomo.survey.project.ProjectInfo`), or how to give one."""
    rows = [] if project is None else project.rows()
    if not rows:
        return ('<p class="note">No project details were given (project, site, line, client, survey date, crew, '
                "equipment, coordinate system, line direction, author, revision): tomo report --project "
                "project.toml, or --info KEY=VALUE.</p>")
    return table(["", ""], rows)


def input_summary(run):
    """Picks, shots, geophones (with their station numbers), offsets, times, ground, grid."""
    from ..analysis.stations import geophone_stations

    p = run.picks
    shots = np.unique(np.round(p["source_x"], 3))
    geos, numbers = geophone_stations(run)
    spacing = float(np.median(np.diff(geos))) if geos.size > 1 else float("nan")
    sigma = np.asarray(p["sigma_ms"], float)
    offset = np.abs(p["receiver_x"] - p["source_x"])
    rows = [
        ("Picks", f"{p['observed_ms'].size}"),
        ("Shots", f"{shots.size} (x = {shots.min():g} to {shots.max():g} m)"),
        ("Geophones", f"{geos.size}, stations {numbers[0]} to {numbers[-1]} at x = {geos.min():g} to "
                      f"{geos.max():g} m (median spacing {spacing:g} m); station numbers count the geophones "
                      "from the smallest x"),
        ("Offsets", f"{offset.min():.1f} to {offset.max():.1f} m"),
        ("First-arrival times", f"{np.min(p['observed_ms']):.2f} to {np.max(p['observed_ms']):.2f} ms"),
        ("Pick uncertainty (sigma)", _value_range(sigma, "ms") if np.any(np.isfinite(sigma)) else "not given"),
        ("Ground elevation", f"{np.min(run.terrain_z):.1f} to {np.max(run.terrain_z):.1f} m "
                             f"({len(run.terrain_x)} terrain points)"),
        ("Model grid", _mesh_text(run)),
    ]
    digest = getattr(run, "picks_digest", None)
    if digest:
        rows.append(("Picks digest", f"{digest[:19]} (the same in every run of these picks)"))
    if run.stations is not None:
        st = run.stations
        side = st.sideways()
        rows.append(("Line on the map", f"{len(st)} surveyed stations, {st.spread_m:.1f} m along the line, "
                                        f"{st.crs if st.crs else 'no coordinate system given'}; largest sideways "
                                        f"departure {side.max_m:.2f} m ({100 * side.fraction:.1f} % of the spread)"
                                        + ("; a 2-D section misplaces depths" if side.warn else "")))
    if run.boreholes is not None and len(run.boreholes):
        rows.append(("Boreholes", f"{len(run.boreholes)}"))
    return table(["", ""], rows)


def _mesh_text(run):
    nz, nx = run.velocity.shape
    cell = abs(run.x[1] - run.x[0]) if run.x.size > 1 else float("nan")
    return (f"{nx} x {nz} cells of {cell:g} m, x {run.x[0] - cell / 2:g} to {run.x[-1] + cell / 2:g} m, "
            f"elevation {run.z[-1] - cell / 2:g} to {run.z[0] + cell / 2:g} m")


def _value_range(values, unit):
    """``"0.5 ms"`` for one value, ``"0.3 to 1 ms"`` for a range."""
    lo, hi = np.nanmin(values), np.nanmax(values)
    if np.isclose(lo, hi):
        return f"{lo:.2g} {unit}"
    return f"{lo:.2g} to {hi:.2g} {unit}"


def pick_qc(run):
    """The pick QC of ``tomo check`` (:func:`tomo.layered.qc.check_line`) on the run's picks."""
    from ..layered.qc import check_line
    from ..survey.picks import Picks

    p = run.picks
    sigma = np.asarray(p["sigma_ms"], float)
    picks = Picks(p["source_x"], p["source_z"], p["receiver_x"], p["receiver_z"],
                  time_s=np.asarray(p["observed_ms"], float) * 1e-3,
                  sigma_s=sigma * 1e-3 if np.all(np.isfinite(sigma) & (sigma > 0)) else None)
    return check_line(picks)


def qc_section(run):
    """Reciprocal pairs, picks off their branch, residuals beyond 3 sigma."""
    parts = []
    qc = pick_qc(run)
    tol = qc.settings
    pairs = qc.reciprocal_pairs
    if pairs:
        parts.append(f"<p>{len(pairs)} reciprocal pair(s); {qc.n_flagged_reciprocals} differ by more than the "
                     f"tolerance ({tol['reciprocal_tol_ms']:g} ms or {tol['reciprocal_tol_pct']:g} % of the time, "
                     "whichever is larger; common practice), as <code>tomo check</code> reports them.</p>")
        rows = [(f"{p['shot_a_x']:g}", f"{p['shot_b_x']:g}", f"{p['time_ab_ms']:.2f}", f"{p['time_ba_ms']:.2f}",
                 f"{p['difference_ms']:+.2f}", f"{p['tolerance_ms']:.2f}",
                 Raw('<span class="flag">check</span>') if p["flagged"] else "ok") for p in pairs]
        parts.append(table(["shot A x (m)", "shot B x (m)", "A to B (ms)", "B to A (ms)", "difference (ms)",
                            "tolerance (ms)", ""], rows, numeric=(0, 1, 2, 3, 4, 5)))
    else:
        parts.append('<p class="note">No reciprocal pairs: no shot was recorded at another shot\'s position.</p>')
    parts.append(f"<p>Picks that break from their shot's branch (more than {tol['outlier_sigma']:g} robust sigmas): "
                 f"{len(qc.outliers)}."
                 + (" Shots with no reversed partner: " + ", ".join(f"{x:g} m" for x in qc.unreversed_shots) + "."
                    if qc.unreversed_shots else " Every shot has a reversed partner.") + "</p>")
    if qc.outliers:
        rows = [(f"{o['shot_x']:g}", f"{o['receiver_x']:g}", f"{o['time_ms']:.2f}", f"{o['residual_ms']:+.2f}")
                for o in qc.outliers]
        parts.append(table(["shot x (m)", "geophone x (m)", "time (ms)", "from branch (ms)"], rows,
                           numeric=(0, 1, 2, 3)))
    r = run.residual_ms
    sigma = np.asarray(run.picks["sigma_ms"], float)
    out = np.flatnonzero(np.abs(r) > 3 * sigma)
    parts.append(f"<p>Residuals beyond three pick sigmas in the final model: {out.size} of {r.size}.</p>")
    if out.size:
        rows = [(f"{run.picks['source_x'][k]:g}", f"{run.picks['receiver_x'][k]:g}",
                 f"{run.picks['observed_ms'][k]:.2f}", f"{run.picks['computed_ms'][k]:.2f}", f"{r[k]:+.2f}")
                for k in out[np.argsort(-np.abs(r[out]))]]
        parts.append(table(["shot x (m)", "geophone x (m)", "observed (ms)", "computed (ms)", "residual (ms)"],
                           rows, numeric=(0, 1, 2, 3, 4)))
    return "\n".join(parts)


def notices_html(notices, level):
    """The notices of one ``level``, grouped: W1, W2, ... (or N1, ...) with their members
    and what to do; nothing is cut. "" when there are none."""
    chosen = [g for g in group_notices(notices) if g.level == level]
    if not chosen:
        return ('<p>None.</p>' if level == WARNING else "")
    tag = "W" if level == WARNING else "N"
    out = ['<ol class="notices">']
    for k, g in enumerate(chosen, start=1):
        members = "".join(f"<li>{esc(no_folders(m))}</li>" for m in g.members())
        out.append(f"<li><b>{tag}{k}.</b> {esc(no_folders(g.heading()))}" + (f"<ul>{members}</ul>" if members else "")
                   + (f"<br><i>What to do:</i> {esc(g.hint)}" if g.hint else "") + "</li>")
    out.append("</ol>")
    return "\n".join(out)


def settings_section(run):
    rows = settings_rows(run.settings)
    if not rows:
        return '<p class="note">No settings recorded.</p>'
    return table(["setting", "value"], rows, groups=True)


def layered_section(run, start_note):
    """The layer table and the delay-time refractors against the tomogram's contour."""
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
             table(["layer", "velocity (m/s)", "thickness (m)", "depth below ground (m)"], rows,
                   numeric=(0, 1, 2, 3))]
    tables = compare_tables(run)
    for t in tables:
        ok = t["constrained"] & np.isfinite(t["difference_m"])
        prof = t["profile"]
        text = (f"<p>Delay-time refractor {t['refractor']}: depth {np.nanmin(prof['depth_m']):.1f} to "
                f"{np.nanmax(prof['depth_m']):.1f} m below ground at {prof['x'].size} geophones "
                f"(x = {prof['x'].min():g} to {prof['x'].max():g} m). The tomogram's {t['contour_m_s']:.0f} m/s "
                "contour (the mean of the layer velocities above and below) ")
        if ok.any():
            # difference_m is an elevation difference (contour minus refractor): up is shallower
            deeper = -t["difference_m"][ok]
            mean = float(np.mean(deeper))
            text += (f"lies on average {abs(mean):.2f} m {'deeper' if mean > 0 else 'shallower'} than it (RMS "
                     f"{np.sqrt(np.mean(deeper ** 2)):.2f} m) at the {ok.sum()} of these geophones where it is above "
                     "the depth of investigation.</p>")
        else:
            text += "lies below the depth of investigation there.</p>"
        parts.append(text)
    if tables and (run.settings or {}).get("start") == "layered":
        parts.append(f'<p class="note">{start_note}</p>')
    if not tables and len(layered.layers) >= 2:
        parts.append('<p class="note">The layered result holds no delay-time refractor profile to compare.</p>')
    return "\n".join(parts)


def depth_section(run, velocity_m_s, depth_range=None):
    """The depth table at stations along the line, with its range and its source."""
    rows = depth_rows(run, velocity_m_s, depth_range)

    def number(v, fmt=".1f"):
        return "-" if not np.isfinite(v) else f"{v:{fmt}}"

    body = []
    for r in rows:
        span = "-" if not (np.isfinite(r.shallow_m) and np.isfinite(r.deep_m)) else \
            f"{r.shallow_m:.1f} to {r.deep_m:.1f}"
        layered = "-" if not np.isfinite(r.layered_depth_m) else \
            f"{r.layered_depth_m:.1f}" + (f" ± {r.layered_sigma_m:.1f}" if np.isfinite(r.layered_sigma_m) else "")
        body.append((str(r.station), f"{r.x:g}", number(r.ground_z), number(r.depth_m), span,
                     number(r.elevation_m), layered, "yes" if r.constrained else _FLAG_NO))
    if depth_range is None:
        source = ("<b>Range:</b> none given for the tomogram depth. Give a second run of the same picks from the "
                  "other starting model (tomo report --versus OTHER.h5) or an ensemble's band; the delay-time "
                  "depth carries its one-sigma uncertainty.")
    else:
        source = f"<b>Range:</b> {esc(depth_range.source)}."
    intro = (f"<p>Depth below the ground to the tomogram's {velocity_m_s:.0f} m/s surface at every "
             f"{_every(rows)} along the spread, beside the deepest delay-time refractor ± one sigma. "
             "<i>Constrained</i> says whether the surface lies above the depth of investigation there; where it "
             f"does not, the depth is the starting model's, not the picks'. {source} The full profile: "
             f"<code>tomo export RUN.h5 --contour {velocity_m_s:.0f} --surface surface.csv</code>.</p>")
    head = ["station", "x (m)", "ground elevation (m)", "depth (m)", "range of depth (m)", "surface elevation (m)",
            "delay-time depth (m)", "constrained"]
    return intro + table(head, body, numeric=(0, 1, 2, 3, 4, 5, 6))


def _every(rows):
    if len(rows) < 2:
        return "station"
    step = rows[1].station - rows[0].station
    return f"{step}th station ({rows[1].x - rows[0].x:g} m)" if step > 1 else "station"


def boreholes_section(run):
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
             else Raw(f'{esc(depth(t.tomogram_depth_m, t.tomogram_error_m))} <span class="flag">below DOI</span>'))
            for t in ties]
    return ("<p>Each logged interface beside the layered delay-time refractor and the tomogram's contour for that "
            "interface at the borehole (in brackets: minus the logged depth; positive is deeper). "
            f"{used_text(run)} Where an interpretation was not told about a borehole, a difference larger than "
            "the uncertainties calls for a look at both the borehole and the picks.</p>"
            + table(["borehole", "x (m)", "off line (m)", "ground (m)", "logged depth (m)", "interface",
                     "layered depth (m)", "contour (m/s)", "tomogram depth (m)"], rows,
                    numeric=(1, 2, 3, 4, 6, 7, 8))
            + borehole_use_html(run))


def misfit_section(run):
    chi2 = np.asarray(run.history.get("chi2", []), float)
    rms = np.asarray(run.history.get("rms_ms", []), float)
    lam = np.asarray(run.history.get("lambda", []), float)
    state = "converged" if run.converged else "not converged"
    parts = [f"<p>Final chi-squared <b>{run.chi2:.2f}</b> (target 1: the picks explained to their uncertainty), "
             f"RMS residual <b>{run.rms_ms:.2f} ms</b> after {run.iterations} iteration(s); "
             f"{state}: {esc(no_folders(run.stop_reason or 'no reason recorded'))}.</p>"]
    rows = [(str(k), f"{chi2[k]:.3g}", f"{rms[k]:.3f}" if k < rms.size else "-",
             f"{lam[k]:.3g}" if k < lam.size and np.isfinite(lam[k]) else "-") for k in range(chi2.size)]
    if rows:
        parts.append(table(["iteration (0: start)", "chi-squared", "RMS (ms)", "regularisation weight"], rows,
                           numeric=(0, 1, 2, 3)))
    return "\n".join(parts)

