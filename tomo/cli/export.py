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


def run(args):
    from .. import api

    run_data = with_boreholes(api.read_run(args.run_file), args.boreholes)
    done = api.export(run_data, grid=args.grid, surface=args.surface, netcdf=args.netcdf, geojson=args.geojson,
                      dxf=args.dxf, contours_m_s=args.contour, crs=args.crs, source=args.run_file)
    if args.grid:
        print(f"wrote {done.grid_cells} cells to {args.grid}")
    if args.surface:
        surface = done.surfaces[0]
        reached = int(sum(surface.depth_m == surface.depth_m))
        print(f"wrote the {surface.velocity_m_s:g} m/s surface to {args.surface} ({reached} of "
              f"{surface.x.size} columns reach it, {int(surface.constrained.sum())} constrained by rays)")
    if args.netcdf:
        print(f"wrote the grid as CF netCDF to {args.netcdf}")
    if args.geojson:
        print(f"wrote {done.geojson_features} features (WGS 84 longitude, latitude) to {args.geojson}")
    if args.dxf:
        print(f"wrote the section drawing (m, true scale; {done.dxf_layers} layers) to {args.dxf}")
    return 0
