"""The workflow steps of the public API: survey, layers, tomography, figures, reports, exports.

Re-exported flat by :mod:`tomo.api` (see its docstring for the defaults they share).
"""

from __future__ import annotations

import inspect
import logging
import os
from collections.abc import Callable, Sequence
from pathlib import Path
from typing import TYPE_CHECKING, Any, Literal

from ..core.defaults import DEFAULT_SIGMA_MS
from ..core.errors import InputError, TomoError
from ..core.fileio import check_output_path, prepare_folder
from ..layered.branches import MAX_BRANCHES, check_branch_count
from ..layered.interpret import interpret_line
from ..layered.qc import QCReport, check_line
from ..layered.result import LayeredResult
from ..records.picker import PickSettings
from ..records.synthetic import RecordSettings
from ..results.layersfile import check_layers_match
from ..results.layersfile import read_layers as _read_layers_file
from ..results.layersfile import write_layers as _write_layers_file
from ..results.run import Run
from ..survey.boreholes import Boreholes
from ..survey.geometry import station_spacing
from ..survey.meshspec import MeshSpec, inversion_mesh_spec, read_mesh_spec
from ..survey.survey import NO_TERRAIN_NOTE, Survey, read_survey
from ..survey.units import DISTANCE_UNITS, TIME_UNITS
from ..tomography.inversion import InversionInterrupted, InversionSettings, IterationInfo
from ..tomography.mesh import Mesh
from ..tomography.meter import PassProgress
from ..tomography.starting import LAYERED_SMOOTHING_CELLS, check_smoothing, gradient_start, layered_start
from ..tomography.workers import check_workers
from .boreholes import grid_boreholes, invert_with_boreholes, place_boreholes, tied_layers
from .planning import RunPlan, plan_run

if TYPE_CHECKING:  # imported for the type hints only: both load matplotlib
    from ..analysis.surface import Surface
    from ..results.exporting import Exported

__all__ = ["NO_TERRAIN_NOTE", "demo_dir", "read_survey", "check_survey", "interpret_layers", "write_layers",
           "read_layers", "write_profile", "invert", "read_run", "default_settings", "START_SMOOTHING_CELLS", "STARTS",
           "QC_DEFAULTS", "LAYERS_DEFAULTS", "DEFAULT_SIGMA_MS", "TIME_UNITS", "DISTANCE_UNITS", "SURVEY_DEFAULTS",
           "MAX_BRANCHES", "check_branch_count", "synthesize",
           "add_boreholes", "plot_qc", "plot_branches", "prepare_folder", "plot_run", "compare_runs", "run_labels",
           "write_report", "read_project", "check_same_picks", "write_grid", "write_surface", "Survey", "Run",
           "LayeredResult", "QCReport",
           "InversionSettings", "IterationInfo", "InversionInterrupted", "check_output_path",
           "export", "pick_records", "plot_gathers", "PickSettings", "RecordSettings", "PassProgress", "RunPlan"]

#: Gaussian smoothing of the layered start, model cells (about one station spacing).
START_SMOOTHING_CELLS = LAYERED_SMOOTHING_CELLS
#: The starting models :func:`invert` knows.
STARTS = ("layered", "gradient")

logger = logging.getLogger("tomo")


def _defaults(function: Callable[..., object]) -> dict[str, Any]:
    """The keyword defaults of ``function``: read from its signature, so they are defined once."""
    return {name: p.default for name, p in inspect.signature(function).parameters.items()
            if p.default is not inspect.Parameter.empty}


#: Defaults of :func:`check_survey` (and ``tomo check``).
QC_DEFAULTS = _defaults(check_line)
#: Defaults of :func:`interpret_layers` (and ``tomo layers``).
LAYERS_DEFAULTS = _defaults(interpret_line)
#: Defaults of :func:`read_survey` (the units of the files; ``--time-unit``, ``--distance-unit``).
SURVEY_DEFAULTS = _defaults(read_survey)

PathLike = str | os.PathLike


def demo_dir(required: Sequence[str] = ("picks.csv", "terrain.csv")) -> Path:
    """The folder of the invented demo line shipped with tomo (package data, found with
    :mod:`importlib.resources`): ``picks.csv``, ``terrain.csv``, ``site.toml`` (the model
    the picks were made from), ``layout.csv``, ``stations.csv``, ``boreholes.csv``.

    Raises
    ------
    InputError
        Naming the folder, when a ``required`` file is missing (a broken installation).
    """
    from importlib.resources import files

    folder = Path(str(files("tomo") / "data" / "demo"))
    missing = [name for name in required if not (folder / name).is_file()]
    if missing:
        raise InputError(f"demo file(s) missing: {', '.join(missing)} (reinstall tomo)", path=folder)
    return folder


def default_settings() -> InversionSettings:
    """Every inversion setting at its default (the values ``tomo invert --help`` shows)."""
    return InversionSettings()


def check_survey(survey: Survey, **options: Any) -> QCReport:
    """Pick QC of a survey: counts, spacing, reciprocal times, outliers, unreversed shots.

    ``options`` are those of :func:`tomo.layered.qc.check_line` (``reciprocal_tol_ms``,
    ``reciprocal_tol_pct`` in %, ``outlier_sigma``, ``sigma_ms``). ``str`` lines for a
    person: ``report.summary_lines()``.
    """
    return check_line(survey.picks, **options)


def interpret_layers(survey: Survey, boreholes: PathLike | Boreholes | None = None,
                     **options: Any) -> LayeredResult:
    """The layered interpretation of a survey (velocity assumed to increase with depth).

    Travel-time branches per shot side, the intercept-time and dipping-layer formulas
    (Telford, Geldart & Sheriff 1990, Applied Geophysics, sec. 4.3) and delay-time
    refractor depths under the geophones (plus-minus, Hagedoorn 1959; GRM, Palmer
    1980, with ``grm=True``). ``options`` are the keyword arguments of
    :func:`tomo.layered.interpret.interpret_line` (``n_branches``, ``breaks_m``,
    ``sigma_ms``, ...), at the same defaults as ``tomo layers``.

    With ``boreholes`` (a borehole file, :mod:`tomo.survey.boreholes`, or boreholes
    read), the delay-time refractor is tied to them (:mod:`tomo.layered.ties`): the
    overburden velocity calibrated to the logged depths (least squares over the
    boreholes), the mis-tie left at each spread to its neighbours; ``result.ties``
    says what changed.

    Returns
    -------
    LayeredResult
        Layer velocities (m/s) and thicknesses (m), per-shot fits, the delay-time
        profile, warnings and the cautions that go with every layered result.

    Raises
    ------
    InputError
        For bad picks or options, or a borehole beyond the line's ends (naming the
        borehole file, line and field).

    Notes
    -----
    A layer slower than the one above it, or too thin to give first arrivals of its
    own, leaves no trace in the picks and puts the depths below it wrong; velocities
    do not identify rock types; calibrate against boreholes (``result.cautions``).
    """
    placed = None if boreholes is None else place_boreholes(boreholes, survey)
    result = interpret_line(survey.picks, terrain=survey.terrain, **options)
    if placed is not None:
        from ..layered.ties import tie_to_boreholes

        tie_to_boreholes(result, placed)
    return result


def read_layers(path: PathLike, survey: Survey | None = None) -> LayeredResult:
    """Read a layers file (``tomo layers --out``); with ``survey``, also check that it
    was made from these picks (InputError naming the file otherwise)."""
    result = _read_layers_file(path)
    if survey is not None:
        check_layers_match(result, survey.picks, path)
    return result


def write_layers(result: LayeredResult, path: PathLike) -> Path:
    """Write a layered interpretation as a layers file (JSON, the content of
    :meth:`LayeredResult.to_dict`), atomically; :func:`read_layers` reads it back."""
    return _write_layers_file(path, result)


def write_profile(result: LayeredResult, path: PathLike) -> int:
    """Write the delay-time refractor depths per geophone as CSV (header only when the
    result has no profile); returns the number of rows."""
    import numpy as np

    from ..layered.profile import RefractorProfile, write_profile_csv

    profile: Any = result.profile
    if profile is None:
        empty = np.zeros(0)
        profile = RefractorProfile(np.zeros(0, int), empty, empty, empty, empty, empty, empty, np.zeros(0, object))
    write_profile_csv(path, profile)
    return len(profile)


def synthesize(model: PathLike, layout: PathLike, out: PathLike, **options: Any) -> tuple[Any, dict[str, Any]]:
    """Synthetic first-arrival picks through a layered model file (TOML) for the pairs of
    a layout file, written to the pick file ``out`` atomically.

    ``options`` are those of :func:`tomo.tomography.synth.synthesize` (``terrain``,
    ``mesh``, ``noise_ms`` (ms, Gaussian, seeded by ``seed``), ``workers``,
    ``progress``, ``records_dir`` and ``record_settings`` for SEG-Y shot records).
    Returns the Picks written and a dict (mesh, notices, fallbacks, shots, records).
    """
    from ..tomography.synth import synthesize as synth

    return synth(model, layout, out, **options)


def _settings(values: dict[str, Any]) -> InversionSettings:
    if "workers" in values:
        check_workers(values["workers"])
    try:
        return InversionSettings.from_dict(values).check()
    except TypeError as exc:
        raise InputError(f"bad setting: {exc}") from None


def _check_start(start: str, layers: Any, branches: int | None, start_smoothing: float | None) -> float:
    """Check the starting-model options together; returns the smoothing, cells."""
    if start not in STARTS:
        raise InputError(f"unknown starting model {start!r} (expected 'layered' or 'gradient')", field="start")
    if branches is not None:
        if start != "layered":
            raise InputError("branches apply to the layered start only", field="branches")
        if layers is not None:
            raise InputError("branches choose how the picks are read into layers; given layers are read already",
                             field="branches")
        check_branch_count(branches)
    if layers is not None and start != "layered":
        raise InputError("given layers apply to the layered start only", field="layers")
    if start_smoothing is not None and start != "layered":
        raise InputError("start smoothing applies to the layered start only (the gradient start is smooth)",
                         field="start_smoothing")
    return START_SMOOTHING_CELLS if start_smoothing is None else check_smoothing(start_smoothing)


def _start_model(survey: Survey, grid: Mesh, terrain: Any, start: str, layers: LayeredResult | None,
                 branches: int | None, smoothing: float, notes: list[str],
                 sigma_ms: float | None = None) -> tuple[Any, Any, str]:
    """The starting velocity (m/s on the grid), the layered result it came from (a dict,
    or None) and the start used; appends what the user should know to ``notes``."""
    if start == "layered":
        try:
            velocity, layered = layered_start(survey.picks, grid, terrain, n_branches=branches,
                                              smooth_cells=smoothing, result=layers, sigma_ms=sigma_ms)
            return velocity, layered, start
        except TomoError as exc:
            # a line the layered methods cannot read still gets a tomogram, from the
            # gradient start, with a note saying so
            notes.append(f"layered starting model not available ({exc}); the gradient start was used")
    velocity, info = gradient_start(survey.picks, grid, return_fit=True)
    notes.append(f"starting model: v = {info['v0_m_s']:.0f} m/s + {info['k_per_s']:.2f} 1/s x depth "
                 f"fitted to the first arrivals")
    return velocity, None, "gradient"


def _log_progress(info: IterationInfo) -> None:
    logger.info("%s", info)


def _plan(survey: Survey, terrain: Any, mesh: PathLike | MeshSpec | None, start: str, layers: LayeredResult | None,
          branches: int | None, smoothing: float, notes: list[str], opts: InversionSettings,
          on_plan: Callable[[RunPlan], object] | None, boreholes: PathLike | Boreholes | None,
          contour_m_s: float | None) -> tuple[Mesh, MeshSpec, Any, Any, str, str | None, Boreholes | None, RunPlan]:
    """The boreholes placed on the line (the layered start tied to them), the grid and
    the starting model on it (:func:`tomo.api.planning.plan_run`: the depth from the
    starting model's rays unless the spec sets it, the estimate refused when it cannot
    fit), the boreholes checked against the grid; appends the start's notes and the
    depth's reason to ``notes``."""
    placed = grid_boreholes(survey, None, boreholes, contour_m_s)  # on the line, before any solve
    if placed is not None and start == "layered":
        layers = tied_layers(survey, terrain, layers, branches, placed, opts.default_sigma_ms)
    spec_in = mesh if isinstance(mesh, MeshSpec) else (read_mesh_spec(mesh) if mesh is not None else None)
    given = {"layers": layers}

    def start_for(grid: Mesh) -> tuple[Any, Any, str, list[str]]:
        start_notes: list[str] = []
        velocity, layered, used = _start_model(survey, grid, terrain, start, given["layers"], branches, smoothing,
                                               start_notes, opts.default_sigma_ms)
        if used == "layered" and given["layers"] is None:
            given["layers"] = LayeredResult.from_dict(layered)  # interpreted once, painted on every grid
        return velocity, layered, used, start_notes

    spec = inversion_mesh_spec(station_spacing(survey.picks), spec_in)
    grid, spec, (velocity, layered, used, start_notes), plan = plan_run(
        survey.picks, survey.picks_path, terrain, spec, spec_in is not None and spec_in.depth_m is not None,
        start_for, opts, placed)
    notes += start_notes + [f"grid depth {plan.depth}"]
    # logged at debug level: the info level has one line per iteration (its contract)
    (on_plan or (lambda p: logger.debug("%s", "; ".join(p.lines()))))(plan)
    if placed is not None:
        placed = placed.check_depths(grid.terrain.elevation(placed.x, extrapolate=True), grid.z_bottom)
    mesh_file = None if mesh is None or isinstance(mesh, MeshSpec) else str(mesh)
    return grid, spec, velocity, layered, used, mesh_file, placed, plan


def invert(survey: Survey, start: Literal["layered", "gradient"] = "layered",
           layers: LayeredResult | PathLike | None = None, mesh: PathLike | MeshSpec | None = None,
           out: PathLike | None = None, progress: Callable[[IterationInfo], object] | None = None, *,
           branches: int | None = None, start_smoothing: float | None = None,
           boreholes: PathLike | Boreholes | None = None, contour_m_s: float | None = None,
           pass_progress: Callable[[PassProgress], object] | None = None,
           on_plan: Callable[[RunPlan], object] | None = None, **settings: Any) -> Run:
    """Travel-time tomography of a survey, to the noise level of its picks.

    Regularised Gauss-Newton updates with rays through fast-marching travel times,
    until chi-squared = mean((residual / sigma)^2) reaches 1 (the discrepancy
    principle; Constable, Parker & Constable 1987, Geophysics 52); see
    :mod:`tomo.tomography.inversion`.

    Parameters
    ----------
    survey : Survey
        From :func:`read_survey`.
    start : {"layered", "gradient"}
        Starting model: the layered interpretation painted on the grid and smoothed,
        or a 1-D velocity-depth gradient fitted to the picks (Slotnick 1959). A line
        the layered methods cannot read falls back to the gradient start (noted).
    layers : LayeredResult or path, optional
        Start from this layered interpretation (or layers file) of the same picks
        instead of interpreting them again.
    mesh : path or MeshSpec, optional
        Mesh spec (TOML) or spec; unset fields come from the survey: cells of half the
        station spacing, a depth that holds the starting model's deepest ray with room
        (:mod:`tomo.tomography.depth`; one forward pass with rays checks it).
    out : path, optional
        Run file (HDF5), rewritten after every iteration (an interrupted run keeps it).
    progress : callable, optional
        Called with an :class:`IterationInfo` (``str()`` is one line) after the start
        and each iteration; default: logged at INFO level to the logger ``"tomo"``.
    branches, start_smoothing : int, float, optional
        The layered start's travel-time branches on every side (default: chosen by the
        BIC) and Gaussian smoothing, model cells (default :data:`START_SMOOTHING_CELLS`).
    boreholes, contour_m_s : path or Boreholes, float, optional
        Boreholes the ``contour_m_s`` surface (m/s; default per borehole the mean of the
        layer velocities around the refractor it logged) must pass through within their
        sigma (:mod:`tomo.tomography.constraints`); the run is made without and with
        them, ``run.borehole_fit`` compares the two and flags what the picks resist
        (:mod:`tomo.analysis.borehole_fit`); the layered result is tied to them too.
    pass_progress, on_plan : callable, optional
        Called with a :class:`PassProgress` as each iteration's shots get done (for a
        progress bar), and once with the :class:`RunPlan` (grid, its depth and why,
        the estimate of time and memory) before the first iteration.
    **settings
        Fields of :class:`InversionSettings` (``max_iterations``, ``default_sigma_ms``,
        ``smooth_x``, ``workers``, ...).

    Returns
    -------
    Run
        The model (m/s), its fit, history and every setting; ``run.surface(v)`` reads
        an iso-velocity surface, ``run.write(path)`` saves it.

    Raises
    ------
    InputError
        For a bad setting, mesh spec, layers file, starting-model option, borehole
        (beyond the line, below the grid) or contour, and for a run whose estimated
        memory exceeds what is available (naming the estimate and a coarser cell).
    InversionInterrupted
        On Ctrl-C (a KeyboardInterrupt); ``out`` then holds the last finished iteration.

    Notes
    -----
    A tomogram is one of many models that fit the picks: below the depth of
    investigation it shows the starting model, sharp boundaries come out smeared, and
    first arrivals do not see into a layer slower than the one above. Compare runs from
    both starts (:func:`compare_runs`), calibrate against boreholes; designs need
    review by a licensed professional. With ``workers`` > 1 (the default 2) the worker
    processes re-import a script: call this under ``if __name__ == "__main__":`` there
    (a notebook needs no guard).
    """
    opts = _settings(settings)
    smoothing = _check_start(start, layers, branches, start_smoothing)
    layers, layers_file = _given_layers(layers, survey)
    notes = list(survey.notices)
    terrain, ground_notes = survey.ground()
    notes += ground_notes
    grid, spec, velocity, layered, start_used, mesh_file, placed, plan = _plan(
        survey, terrain, mesh, start, layers, branches, smoothing, notes, opts, on_plan, boreholes, contour_m_s)
    extra = {"start": start_used, "start_requested": start, "layered_branches": branches,
             "start_smoothing_cells": smoothing if start_used == "layered" else None,
             "mesh_spec": spec.as_dict(), "picks_file": survey.picks_path, "terrain_file": survey.terrain_path,
             "mesh_file": mesh_file, "stations_file": survey.stations_path}
    if layers is not None:
        extra["layers_file"] = layers_file
    from ..results.runfile import RunWriter

    # the stations are not the inversion's business but go into every run file written
    checkpoint = None if out is None else RunWriter(out, stations=survey.stations, boreholes=placed)
    data = invert_with_boreholes(survey, grid, terrain, velocity, opts, progress or _log_progress, checkpoint,
                                 layered, notes, extra, placed, contour_m_s, pass_progress=pass_progress,
                                 start_pass=plan.start_pass)
    data.stations = survey.stations
    data.boreholes = placed
    return Run.from_data(data)


def _given_layers(layers: LayeredResult | PathLike | None,
                  survey: Survey) -> tuple[LayeredResult | None, str | None]:
    """The layered result given to :func:`invert` (read when a file) and its file name,
    checked to be of the survey's picks."""
    if layers is not None and not isinstance(layers, LayeredResult):
        return read_layers(layers, survey), str(layers)
    if layers is not None:
        check_layers_match(layers, survey.picks)
    return layers, None


def read_run(path: PathLike) -> Run:
    """Read a run file (HDF5) written by :func:`invert` or ``tomo invert``."""
    return Run.read(path)


def run_labels(path: PathLike, run: Run, other_path: PathLike, other: Run) -> tuple[str, str]:
    """Legend names of two runs: their file names with their starting models."""
    from ..figures.versus import run_labels as labels

    return labels(path, run, other_path, other)


def compare_runs(run: Run, other: Run, contour_m_s: float | None = None,
                 labels: Sequence[str] | None = None) -> str:
    """One line comparing the ``contour_m_s`` surface (m/s; default: the layered
    result's deepest refractor contour) of two runs of the same picks: mean, RMS and
    largest difference, m, over the columns both constrain."""
    from ..figures.versus import LABELS, versus_summary, versus_table

    labels = tuple(labels or LABELS)
    return versus_summary(versus_table(run, other, contour_m_s, labels), labels)


def plot_qc(survey: Survey, report: QCReport, path: PathLike) -> Path:
    """Save the travel-time curves with the picks QC flagged (PNG or PDF by extension)."""
    from ..figures.curves import qc_figure

    qc_figure(survey.picks, report, path)
    return Path(path)


def plot_branches(result: LayeredResult, path: PathLike, survey: Survey | None = None) -> Path:
    """Save the picks with their fitted branches per shot (PNG or PDF by extension)."""
    from ..figures.curves import branches_figure

    branches_figure(result, path, picks=None if survey is None else survey.picks)
    return Path(path)


def plot_run(run: Run, out_dir: PathLike, formats: Sequence[str] = ("png", "pdf"), other: Run | None = None,
             contour_m_s: float | None = None, labels: Sequence[str] | None = None,
             skip_note: Callable[[str], object] | None = None, depth_range: Any = None) -> list[Path]:
    """Save every figure of a run into ``out_dir`` as ``<name>.<format>``; with
    ``other`` (a second run of the same picks; refused otherwise) also the ``versus``
    figure, and the depth figure shades the range between the two runs unless
    ``depth_range`` (a :class:`tomo.analysis.depth_range.DepthRange`, e.g. an ensemble's
    band) is given. A failure leaves no partial set. Returns the files written."""
    from ..figures.bundle import plot_run as save_all
    from ..figures.versus import LABELS, versus_figure
    from ..results.report_depth import rock_surface

    extra = []
    names = tuple(labels or LABELS)
    if other is not None:
        extra.append(("versus", versus_figure(run, other, contour_m_s, names)))
    _, depth_range = rock_surface(run, contour_m_s, depth_range, other, names)
    return save_all(run, out_dir, formats=tuple(formats), skip_note=skip_note, extra=extra, depth_range=depth_range)


def write_report(run: Run, path: PathLike, source: PathLike | None = None, other: Run | None = None,
                 contour_m_s: float | None = None, labels: Sequence[str] | None = None,
                 figure_pngs: dict[str, bytes] | None = None,
                 skip_note: Callable[[str], object] | None = None, project: Any = None,
                 depth_range: Any = None) -> Path:
    """Write one self-contained HTML report of a run (figures embedded, cautions
    included), atomically; ``figure_pngs`` (name -> PNG bytes) reuses figures already
    drawn. ``project`` (:func:`read_project`) fills its project section; ``other`` (a
    second run of the same picks, refused otherwise) adds the comparison; the depth
    table's range is ``depth_range`` when given, else the two runs'. Returns the path."""
    from ..results.report import write_report as write

    return write(path, run, source=None if source is None else str(source), skip_note=skip_note,
                 figure_pngs=figure_pngs, other=other, labels=labels, contour_m_s=contour_m_s, project=project,
                 depth_range=depth_range)


def read_project(path: PathLike | None = None, values: dict[str, Any] | None = None) -> Any:
    """Project details for the report from a TOML file and/or ``values`` (name -> text,
    which win): project, site, line, client, survey_date, crew, equipment,
    coordinate_system, line_direction, author, checked_by, revision, report_date, notes
    (:mod:`tomo.survey.project`; an unknown name is an InputError)."""
    from ..survey.project import read_project as read

    return read(path, values)


def check_same_picks(run: Run, other: Run, labels: Sequence[str] | None = None) -> list[str]:
    """Refuse two runs that do not hold the same picks and geometry (InputError naming
    the difference); returns notices (e.g. an older run file compared without its
    digest). Every two-run feature calls it (:mod:`tomo.analysis.digest`)."""
    from ..analysis.digest import check_same_picks as check
    from ..figures.versus import LABELS

    return check(run, other, tuple(labels or LABELS))


def add_boreholes(run: Run, path: PathLike | None) -> Run:
    """``run`` with the boreholes of the file ``path`` (:mod:`tomo.survey.boreholes`)
    placed on its line, replacing any it held; unchanged when ``path`` is None."""
    if path is None:
        return run
    from ..analysis.boreholes import place_boreholes
    from ..survey.boreholes import read_boreholes

    run.boreholes = place_boreholes(read_boreholes(path), run)
    return run


def write_grid(run: Run, path: PathLike, source: PathLike | None = None) -> int:
    """Write ``x, z, velocity_m_s, coverage_m`` per ground cell as CSV; returns the rows."""
    from ..results.export import write_grid as write

    return write(path, run, source=None if source is None else str(source))


def write_surface(run: Run, surface: Surface, path: PathLike, source: PathLike | None = None) -> Surface:
    """Write ``x, ground_z, depth_m, elevation_m, constrained`` of ``surface`` (from
    :meth:`Run.surface`) as CSV, atomically."""
    from ..results.export import write_surface as write

    return write(path, run, surface.velocity_m_s, source=None if source is None else str(source), surface=surface)


def export(run: Run, *, grid: PathLike | None = None, surface: PathLike | None = None,
           netcdf: PathLike | None = None, geojson: PathLike | None = None, dxf: PathLike | None = None,
           contours_m_s: Sequence[float] | None = None, crs: int | str | None = None,
           source: PathLike | None = None) -> Exported:
    """Export a run for other tools; everything is checked before anything is written.

    Parameters
    ----------
    run : Run
    grid, surface, netcdf, geojson, dxf : path, optional
        Grid CSV (x, z, velocity, coverage per ground cell), surface CSV (one
        ``contours_m_s`` surface per column), CF netCDF grid, GeoJSON points (RFC 7946,
        WGS 84; needs a line on the map) and a DXF section drawing at true scale.
    contours_m_s : sequence of float, optional
        Velocities of the surfaces, m/s (default: the layered refractor's contour, the
        mean of the layer velocities above and below it).
    crs : int or str, optional
        EPSG code of the run's stations when it was inverted without one.
    source : path, optional
        The run file's name, written into the exports' headers.

    Returns
    -------
    Exported
        What was written (rows, surfaces, features, layers).
    """
    from ..results.exporting import export_run

    return export_run(run, {"grid": grid, "surface": surface, "netcdf": netcdf, "geojson": geojson, "dxf": dxf},
                      contours_m_s=contours_m_s, crs=crs, source=None if source is None else str(source))


def pick_records(records: Sequence[PathLike], out: PathLike, layout: PathLike | None = None,
                 corrections: PathLike | None = None, settings: PickSettings | None = None, stack: bool = True,
                 progress: Callable[[int, int], object] | None = None) -> Any:
    """Pick the first break of every trace of SEG-2 / SEG-Y shot records, with its sigma.

    Reads the records (ObsPy), picks each shot gather (:mod:`tomo.records.picker`),
    keeps the hand edits of an earlier pick file and the ``corrections`` file, and
    writes the pick file ``out`` with its trace table beside it. Returns the
    :class:`tomo.records.workflow.PickRun` (gathers, picks, every trace's status).
    """
    from ..records.workflow import pick_records as pick

    return pick(list(records), out, layout_path=layout, corrections_path=corrections, settings=settings,
                stack=stack, progress=progress)


def plot_gathers(result: Any, folder: PathLike) -> list[Path]:
    """Save a gather figure per shot and a figure of all picks of a :func:`pick_records`
    result into ``folder``; returns the files."""
    from ..figures.gathers import write_gather_figures

    return list(write_gather_figures(result, folder))

