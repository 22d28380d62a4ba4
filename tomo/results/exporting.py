"""Every export of a run at once (``tomo export``): checked first, written after.

A request is checked whole before the first file is written (contour velocities inside
the model's range, map coordinates for GeoJSON, writable output folders), so a bad
request leaves no output; each file itself is written atomically by its module
(:mod:`.export` CSV, :mod:`.netcdf`, :mod:`.geojson`, :mod:`.dxf`).
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace

from ..core.errors import InputError
from ..core.fileio import check_output_path
from ..survey.crs import check_crs
from .export import write_grid, write_surface
from .surfaces import export_contours, section_surfaces

__all__ = ["Exported", "export_run"]


@dataclass
class Exported:
    """What :func:`tomo.api.export` wrote (0 or empty for what was not asked for).

    Attributes
    ----------
    grid_cells : int
        Rows of the grid CSV (ground cells).
    surfaces : list of SectionSurface
        The surfaces exported: the contours asked for (or the layered refractor's),
        then the layered delay-time refractors; the surface CSV holds the first.
    geojson_features : int
    dxf_layers : int
    """

    grid_cells: int = 0
    surfaces: list = field(default_factory=list)
    geojson_features: int = 0
    dxf_layers: int = 0


def export_run(run, outputs, contours_m_s=None, crs=None, source=None):
    """Export ``run`` to the files of ``outputs`` (``grid``, ``surface``, ``netcdf``,
    ``geojson``, ``dxf``: path or None; see :func:`tomo.api.export`), checking everything
    (contours, map coordinates, output folders) before writing anything.

    Returns
    -------
    Exported
    """
    if not any(outputs.values()):
        raise InputError("nothing to export: give --grid, --surface, --netcdf, --geojson and/or --dxf")
    surface, geojson, dxf = outputs["surface"], outputs["geojson"], outputs["dxf"]
    if surface and contours_m_s and len(contours_m_s) > 1:
        raise InputError("--surface writes one surface: give one --contour V", field="--contour")
    if crs is not None:
        if run.stations is None:
            raise InputError("the run has no stations to place with --crs (invert with --stations)", field="--crs")
        run.stations = replace(run.stations, crs=check_crs(crs))
    done = Exported()
    if surface or geojson or dxf:
        wanted = "--surface" if surface and not (geojson or dxf) else "the export"
        done.surfaces = section_surfaces(run, export_contours(run, contours_m_s, needed_for=wanted))
    if geojson:
        from .geojson import feature_collection

        feature_collection(run, done.surfaces)  # refuses a run without map coordinates now, not halfway
    for path in outputs.values():
        if path:
            check_output_path(path)
    _write(run, done, outputs, source)
    return done


def _write(run, done, outputs, source):
    """Write the checked request; fills in ``done``."""
    if outputs["grid"]:
        done.grid_cells = write_grid(outputs["grid"], run, source=source)
    if outputs["surface"]:
        write_surface(outputs["surface"], run, done.surfaces[0].velocity_m_s, source=source)
    if outputs["netcdf"]:
        from .netcdf import write_netcdf

        write_netcdf(outputs["netcdf"], run, source=source)
    if outputs["geojson"]:
        from .geojson import write_geojson

        done.geojson_features = len(write_geojson(outputs["geojson"], run, done.surfaces)["features"])
    if outputs["dxf"]:
        from .dxf import write_dxf

        done.dxf_layers = len(write_dxf(outputs["dxf"], run, done.surfaces, source=source))
