"""`tomo export`: a run's grid and surfaces as CSV, CF netCDF, GeoJSON and DXF."""

from __future__ import annotations

from .line_options import add_boreholes_option, with_boreholes


def register(sub):
    p = sub.add_parser(
        "export", help="export the grid and surfaces as CSV, netCDF, GeoJSON or DXF",
        description="Write the final model of a run file as a grid CSV (x, z, velocity, coverage) or CF "
                    "netCDF, and iso-velocity surfaces (where the model first reaches a chosen velocity) as "
                    "CSV, as GeoJSON on the map (WGS 84 longitude, latitude; needs a run made with --stations "
                    "and --crs) and in a DXF section drawing at true scale with one layer per kind of line.",
    )
    p.add_argument("run_file", metavar="RUN.h5", help="run file written by 'tomo invert'")
    p.add_argument("--grid", metavar="GRID.csv", help="write x, z, velocity_m_s, coverage_m per ground cell")
    p.add_argument("--contour", type=float, metavar="V", action="append",
                   help="velocity of a surface to export, m/s (repeatable for GeoJSON and DXF; default: the mean "
                        "of the layer velocities above and below the deepest refractor of the layered result)")
    p.add_argument("--surface", metavar="SURFACE.csv",
                   help="write x, ground_z, depth_m, elevation_m, constrained (and easting, northing on a "
                        "line in map coordinates) of one --contour surface")
    p.add_argument("--netcdf", metavar="GRID.nc",
                   help="write velocity, starting velocity, coverage and depth of investigation as CF netCDF")
    p.add_argument("--geojson", metavar="SURFACE.geojson",
                   help="write the surfaces, stations and boreholes as GeoJSON points with depth and elevation")
    p.add_argument("--dxf", metavar="SECTION.dxf",
                   help="write the section drawing: ground, surfaces, band, boreholes, depth of investigation, "
                        "stations and a labelled grid, each on its own layer, in metres at true scale")
    p.add_argument("--crs", metavar="EPSG",
                   help="EPSG code of the run's stations when it was inverted without --crs")
    add_boreholes_option(p)
    p.set_defaults(run=run)


def _prepare(args):
    """Read and check everything before writing anything: (run, surfaces, outputs)."""
    from dataclasses import replace

    from ..core.errors import InputError
    from ..core.fileio import check_output_path
    from ..results.runfile import read_run
    from ..results.surfaces import export_contours, section_surfaces
    from ..survey.crs import check_crs

    outputs = {name: getattr(args, name) for name in ("grid", "surface", "netcdf", "geojson", "dxf")}
    if not any(outputs.values()):
        raise InputError("nothing to export: give --grid, --surface, --netcdf, --geojson and/or --dxf")
    if args.surface and args.contour and len(args.contour) > 1:
        raise InputError("--surface writes one surface: give one --contour V", field="--contour")
    run = with_boreholes(read_run(args.run_file), args.boreholes)
    if args.crs is not None:
        if run.stations is None:
            raise InputError("the run has no stations to place with --crs (invert with --stations)", field="--crs")
        run.stations = replace(run.stations, crs=check_crs(args.crs))
    surfaces = []
    if args.surface or args.geojson or args.dxf:
        wanted = "--surface" if args.surface and not (args.geojson or args.dxf) else "the export"
        surfaces = section_surfaces(run, export_contours(run, args.contour, needed_for=wanted))
    if args.geojson:
        from ..results.geojson import feature_collection

        feature_collection(run, surfaces)  # refuses a run without map coordinates now, not halfway
    for path in outputs.values():
        if path:
            check_output_path(path)
    return run, surfaces, outputs


def run(args):
    from ..results.export import write_grid, write_surface

    run_data, surfaces, out = _prepare(args)
    if out["grid"]:
        n = write_grid(out["grid"], run_data, source=args.run_file)
        print(f"wrote {n} cells to {out['grid']}")
    if out["surface"]:
        surface = surfaces[0]
        write_surface(out["surface"], run_data, surface.velocity_m_s, source=args.run_file)
        reached = int(sum(surface.depth_m == surface.depth_m))
        print(f"wrote the {surface.velocity_m_s:g} m/s surface to {out['surface']} ({reached} of "
              f"{surface.x.size} columns reach it, {int(surface.constrained.sum())} constrained by rays)")
    if out["netcdf"]:
        from ..results.netcdf import write_netcdf

        write_netcdf(out["netcdf"], run_data, source=args.run_file)
        print(f"wrote the grid as CF netCDF to {out['netcdf']}")
    if out["geojson"]:
        from ..results.geojson import write_geojson

        collection = write_geojson(out["geojson"], run_data, surfaces)
        print(f"wrote {len(collection['features'])} features (WGS 84 longitude, latitude) to {out['geojson']}")
    if out["dxf"]:
        from ..results.dxf import write_dxf

        layers = write_dxf(out["dxf"], run_data, surfaces, source=args.run_file)
        print(f"wrote the section drawing (m, true scale; {len(layers)} layers) to {out['dxf']}")
    return 0
