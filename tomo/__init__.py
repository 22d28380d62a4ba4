"""tomo: shallow seismic refraction interpretation.

First-arrival picks of a line of geophones in; pick QC, a layered interpretation
(intercept times, delay times) and travel-time tomography out. The public API, flat::

    survey = tomo.read_survey("picks.csv", terrain="terrain.csv")
    layers = tomo.interpret_layers(survey)
    run = tomo.invert(survey, layers=layers, out="run.h5")
    depth_m = run.surface(2100.0).depth_m

Workflow functions (:mod:`tomo.api`): ``read_survey``, ``check_survey``,
``interpret_layers``, ``read_layers``, ``write_layers``, ``invert``, ``ensemble``,
``resolve`` (resolution tests), ``design`` (candidate layouts on a model), ``read_run``,
``compare_runs``, ``plot_run``, ``write_report``, ``write_grid``, ``write_surface``,
``export`` (CSV, netCDF, GeoJSON, DXF), ``add_boreholes``, ``pick_records`` (SEG-2 /
SEG-Y shot records to picks), ``synthesize``, ``demo_dir``.
Types: ``Survey``, ``LayeredResult``, ``Run``, ``Surface``, ``InversionSettings``.
Figures of a run, returning matplotlib figures: ``velocity_section``,
``coverage_section``, ``traveltime_fit``, ``residual_figure``, ``misfit_history``,
``layered_vs_gridded``, ``versus_figure``.

Every name is imported on first use (module ``__getattr__``), so ``import tomo`` stays
light: it loads neither matplotlib nor h5py until a figure or a run file is asked for.
"""

from __future__ import annotations

import importlib
from typing import TYPE_CHECKING, Any

from .core.errors import InputError, SolverError, TomoError
from .core.version import __version__

if TYPE_CHECKING:  # type checkers and editors see the lazy names as what they are
    from .analysis.surface import Surface
    from .api import (
        InversionSettings,
        LayeredResult,
        Run,
        Survey,
        add_boreholes,
        check_same_picks,
        check_survey,
        compare_runs,
        default_settings,
        demo_dir,
        design,
        ensemble,
        export,
        interpret_layers,
        invert,
        pick_records,
        plot_run,
        read_layers,
        read_project,
        read_run,
        read_survey,
        resolve,
        synthesize,
        write_grid,
        write_layers,
        write_profile,
        write_report,
        write_surface,
    )
    from .figures.compare import layered_vs_gridded
    from .figures.fit import misfit_history, residual_figure, traveltime_fit
    from .figures.section import coverage_section, velocity_section
    from .figures.versus import versus_figure

#: Public name -> module that defines it (imported when the name is first used).
_LAZY = {
    **{name: "tomo.api" for name in (
        "read_survey", "check_survey", "interpret_layers", "read_layers", "write_layers", "write_profile",
        "invert", "read_run", "compare_runs", "plot_run", "write_report", "write_grid", "write_surface",
        "export", "add_boreholes", "pick_records", "synthesize", "ensemble", "read_project", "check_same_picks",
        "resolve", "design",
        "default_settings", "demo_dir", "Survey", "Run", "LayeredResult", "InversionSettings")},
    "Surface": "tomo.analysis.surface",
    "velocity_section": "tomo.figures.section",
    "coverage_section": "tomo.figures.section",
    "traveltime_fit": "tomo.figures.fit",
    "residual_figure": "tomo.figures.fit",
    "misfit_history": "tomo.figures.fit",
    "layered_vs_gridded": "tomo.figures.compare",
    "versus_figure": "tomo.figures.versus",
}

__all__ = [
    "__version__", "TomoError", "InputError", "SolverError",
    "read_survey", "check_survey", "interpret_layers", "read_layers", "write_layers", "write_profile", "invert",
    "read_run", "compare_runs", "plot_run", "write_report", "write_grid", "write_surface", "export",
    "add_boreholes", "pick_records", "synthesize", "ensemble", "read_project", "check_same_picks", "resolve", "design",
    "default_settings", "demo_dir",
    "Survey", "Run", "LayeredResult", "InversionSettings", "Surface",
    "velocity_section", "coverage_section", "traveltime_fit", "residual_figure", "misfit_history",
    "layered_vs_gridded", "versus_figure",
]


def __getattr__(name: str) -> Any:
    module = _LAZY.get(name)
    if module is None:
        raise AttributeError(f"module 'tomo' has no attribute {name!r}")
    value = getattr(importlib.import_module(module), name)
    globals()[name] = value  # later look-ups skip this function
    return value


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(_LAZY))
