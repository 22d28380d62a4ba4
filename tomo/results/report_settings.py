"""The settings of a run in words, with units, for the report.

A client or reviewer reads "smoothing weights: 0.5 along the line, 0.2 with depth",
not ``smooth_x``; file names without the folders they happened to sit in; "chosen
from the starting model" rather than ``null``. Every setting the run file records is
said here; one this module does not know (from a newer tomo) is shown by its name,
so nothing is left out silently.
"""

from __future__ import annotations

from pathlib import PurePath

__all__ = ["settings_rows"]


def _file(value, none="none"):
    return PurePath(str(value)).name if value else none


def _on(value):
    return "yes" if value else "no"


def _inputs(s):
    rows = [("Pick file", _file(s.get("picks_file"), "made in memory"))]
    if s.get("stations_file"):
        rows.append(("Stations file (ground and map position)", _file(s["stations_file"])))
    else:
        rows.append(("Terrain file", _file(s.get("terrain_file"), "none: the ground drawn through the stations")))
    if "layers_file" in s:
        rows.append(("Layered interpretation read from", _file(s.get("layers_file"), "interpreted in the run")))
    rows.append(("Mesh spec file", _file(s.get("mesh_file"), "none: chosen from the survey")))
    return rows


def _grid(s):
    spec = s.get("mesh_spec") or {}
    rows = []
    if spec:
        rows.append(("Model cells", f"{spec.get('cell_m', float('nan')):g} m square"))
        rows.append(("Depth of the grid", f"{spec.get('depth_m', float('nan')):.1f} m below the highest ground"))
        rows.append(("Padding beyond the end stations", f"{spec.get('padding_m', float('nan')):g} m"))
        rows.append(("Travel-time grid", f"{spec.get('refine', 1)} nodes per model cell side"))
    return rows


def _start(s):
    used, asked = s.get("start"), s.get("start_requested", s.get("start"))
    if used == "layered":
        text = "the layered interpretation painted on the grid"
        cells = s.get("start_smoothing_cells")
        text += ", kept sharp" if not cells else f", smoothed by a Gaussian of {cells:g} model cells"
        branches = s.get("layered_branches")
        text += (f"; {branches} travel-time branches per shot side" if branches
                 else "; branch counts chosen by the Bayesian information criterion")
    elif used == "gradient":
        text = "a 1-D velocity increasing linearly with depth, fitted to the first arrivals"
    else:
        text = str(used) if used else "not recorded"
    if asked and asked != used:
        text += f" (the {asked} start was asked for but could not be made; see the notes)"
    return [("Starting model", text)]


def _fit(s):
    sigma = s.get("default_sigma_ms")
    rows = [("Pick uncertainty where the file gives none",
             f"{sigma:g} ms" + ("" if s.get("sigma_default_used", True) else " (not used: the picks carry their own)"))
            if sigma is not None else None,
            ("Target misfit", f"chi-squared {s.get('chi2_target', 1):g} ± {s.get('chi2_tolerance', 0):g} "
                              "(the picks explained to their uncertainty)"),
            ("Most iterations", f"{s.get('max_iterations')}"),
            ("Least progress per iteration", f"{100 * s.get('min_improvement', 0):g} % of chi-squared "
                                             "(of the model roughness once at the target)"),
            ("Model parameter", {"logv": "logarithm of velocity", "slowness": "slowness (1 / velocity)"}
             .get(s.get("parameter"), str(s.get("parameter")))),
            ("Smoothing weights", f"{s.get('smooth_x', 0):g} along the line, {s.get('smooth_z', 0):g} with depth"),
            ("Damping towards a reference model", "off" if not s.get("damping") else
             f"weight {s['damping']:g} relative to the smoothing (reference: {s.get('reference', 'the start')})"),
            ("Velocity bounds", _bounds(s)),
            ("First step's aim", f"chi-squared lowered to at most {100 * s.get('trust_reduction', 0):g} % of "
                                 "its value, then adapted to how well each step's prediction came true"),
            ("Regularisation weight", f"searched until the predicted misfit is within "
                                      f"{100 * s.get('lambda_tolerance', 0):g} % of its aim"),
            ("Step reductions per iteration", f"at most {s.get('line_search_steps')}")]
    return [r for r in rows if r is not None]


def _bounds(s):
    lo, hi = s.get("v_min_m_s_used"), s.get("v_max_m_s_used")
    chosen = s.get("v_min_m_s") is None and s.get("v_max_m_s") is None
    if lo is None or hi is None:
        return "not recorded"
    return f"{lo:,.0f} to {hi:,.0f} m/s" + (" (chosen from the starting model)" if chosen else " (set)")


def _numerics(s):
    solver = {"lsmr": "LSMR", "lsqr": "LSQR"}.get(s.get("solver"), str(s.get("solver")))
    limit = s.get("solver_iterations")
    step = s.get("ray_step")
    return [("Least-squares solver", f"{solver} (scipy), relative accuracy {s.get('solver_tol', 0):g}, "
                                     + (f"at most {limit} iterations" if limit else "iteration limit from the size")),
            ("Travel times", f"fast marching (scikit-fmm), order {s.get('order', 2)}, exact within "
                             f"{s.get('source_radius', 0):g} nodes of each source"),
            ("Rays", ("steps of one model cell" if step is None else f"steps of {step:g} nodes")
             + {"bilinear": ", lengths shared among the four nearest nodes",
                "nearest": ", lengths given to the nearest node"}.get(s.get("ray_booking"), "")),
            ("Fields solved from the geophones when fewer than the shots", _on(s.get("reciprocity", False))),
            ("Each field solved on its window of the grid, proved to hold its rays", _on(s.get("windows", False))),
            ("Parallel processes", f"{s.get('workers', 1)}")]


#: Keys said by the groups above (anything else is listed by name).
_KNOWN = {"picks_file", "terrain_file", "stations_file", "layers_file", "mesh_file", "mesh_spec", "start",
          "start_requested", "start_smoothing_cells", "layered_branches", "default_sigma_ms", "sigma_default_used",
          "chi2_target", "chi2_tolerance", "max_iterations", "min_improvement", "parameter", "smooth_x", "smooth_z",
          "damping", "reference", "v_min_m_s", "v_max_m_s", "v_min_m_s_used", "v_max_m_s_used", "trust_reduction",
          "lambda_tolerance", "line_search_steps", "solver", "solver_tol", "solver_iterations", "order",
          "source_radius", "ray_step", "ray_booking", "reciprocity", "workers", "windows"}


def settings_rows(settings):
    """The run's settings as (group, label, value) rows in words with units."""
    s = dict(settings or {})
    out = []
    for group, rows in (("Input files", _inputs(s)), ("Model grid", _grid(s)), ("Starting model", _start(s)),
                        ("Fit", _fit(s)), ("Numerics", _numerics(s))):
        out += [(group, label, value) for label, value in rows]
    other = sorted(set(s) - _KNOWN)
    out += [("Other", name.replace("_", " "), _plain(s[name])) for name in other]
    return out


def _plain(value):
    if value is None:
        return "not set"
    if isinstance(value, bool):
        return _on(value)
    if isinstance(value, (list, tuple)):
        return ", ".join(_plain(v) for v in value)
    if isinstance(value, dict):
        return "; ".join(f"{k.replace('_', ' ')} {_plain(v)}" for k, v in value.items())
    if isinstance(value, str) and ("/" in value or "\\" in value):
        return PurePath(value).name
    return f"{value:g}" if isinstance(value, float) else str(value)
