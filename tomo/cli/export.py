"""`tomo export`: write a run's velocity grid and an iso-velocity surface as CSV."""

from __future__ import annotations


def register(sub):
    p = sub.add_parser(
        "export", help="export the velocity grid and an iso-velocity surface as CSV",
        description="Write the final model of a run file as a grid CSV (x, z, velocity, "
                    "coverage) and/or the surface where the model first reaches a chosen "
                    "velocity (x, ground elevation, depth, elevation, constrained by rays).",
    )
    p.add_argument("run_file", metavar="RUN.h5", help="run file written by 'tomo invert'")
    p.add_argument("--grid", metavar="GRID.csv", help="write x, z, velocity_m_s, coverage_m per ground cell")
    p.add_argument("--contour", type=float, metavar="V",
                   help="velocity of the surface to export, m/s (needs --surface)")
    p.add_argument("--surface", metavar="SURFACE.csv",
                   help="write x, ground_z, depth_m, elevation_m, constrained of the --contour surface")
    p.set_defaults(run=run)


def run(args):
    from ..analysis.surface import contour_surface
    from ..core.errors import InputError
    from ..core.fileio import check_output_path
    from ..results.export import write_grid, write_surface
    from ..results.runfile import read_run

    if args.grid is None and args.surface is None:
        raise InputError("nothing to export: give --grid GRID.csv and/or --contour V --surface SURFACE.csv")
    if (args.contour is None) != (args.surface is None):
        raise InputError("--contour V and --surface SURFACE.csv go together")
    run_data = read_run(args.run_file)
    # Check everything before writing anything, so a bad request leaves no output.
    surface = contour_surface(run_data, args.contour) if args.surface else None
    for path in (args.grid, args.surface):
        if path:
            check_output_path(path)
    if args.grid:
        n = write_grid(args.grid, run_data, source=args.run_file)
        print(f"wrote {n} cells to {args.grid}")
    if args.surface:
        write_surface(args.surface, run_data, args.contour, source=args.run_file, surface=surface)
        reached = int((surface["depth_m"] == surface["depth_m"]).sum())
        constrained = int(surface["constrained"].sum())
        print(f"wrote the {args.contour:g} m/s surface to {args.surface} ({reached} of "
              f"{surface['x'].size} columns reach it, {constrained} constrained by rays)")
    return 0
