"""The section of a run as a DXF drawing (via ezdxf) for CAD.

Drawing units are metres ($INSUNITS = 6), true scale: drawing x is the distance along
the line, drawing y the elevation, with no vertical exaggeration, so the drafter scales
it as any survey section. Every kind of line has its own layer (names below), so it
can be switched off, restyled or moved to the site's layer standard:

============================  ==================================================
layer                         content
============================  ==================================================
GROUND                        ground surface (polyline)
SURFACE-<V>                   iso-velocity surface of V m/s above the depth of
                              investigation (polylines)
SURFACE-<V>-BELOW-DOI         the same surface where it lies below it (dashed)
REFRACTOR-<K>                 layered delay-time refractor K (polyline)
BAND                          one-sigma band of each layered refractor (closed)
BOREHOLES                     borehole columns, logged interface, label and depth
DOI                           depth of investigation (dashed)
STATIONS                      geophones (triangles) and shots (circles)
GRID                          distance and elevation grid with its labels
NOTES                         title, scale and caution
============================  ==================================================

Polyline vertices are the surface's points as exported to CSV (x, elevation), so a
drawing and a table of one run agree to the millimetre.
"""

from __future__ import annotations

import numpy as np

from ..analysis.boreholes import borehole_elevations
from ..analysis.coverage import ground_elevation, investigation_elevation
from ..core.fileio import atomic_path
from ..core.version import __version__
from ..figures.section import stations as station_points
from ..figures.section import view_window
from ..survey.meshspec import nice_step

__all__ = ["write_dxf", "LAYERS"]

#: Fixed layers and their AutoCAD colour index (ACI) and linetype.
LAYERS = {"GROUND": (7, "Continuous"), "BAND": (8, "Continuous"), "BOREHOLES": (3, "Continuous"),
          "DOI": (6, "DASHED"), "STATIONS": (1, "Continuous"), "GRID": (8, "Continuous"),
          "NOTES": (7, "Continuous")}
_SURFACE_COLORS = (5, 30, 4, 210)


def _runs(mask):
    """Index arrays of the consecutive True stretches of ``mask``."""
    idx = np.flatnonzero(mask)
    if idx.size == 0:
        return []
    return np.split(idx, np.flatnonzero(np.diff(idx) > 1) + 1)


def _polylines(msp, x, z, mask, layer):
    for run in _runs(mask & np.isfinite(z)):
        if run.size >= 2:
            msp.add_lwpolyline(np.column_stack([x[run], z[run]]).tolist(), dxfattribs={"layer": layer})


def _surface(doc, msp, surface, colour):
    """A surface's polylines: above the DOI on its layer, below it on a dashed one."""
    name = (f"SURFACE-{surface.velocity_m_s:.0f}" if surface.velocity_m_s is not None
            else surface.key.upper())
    below = f"{name}-BELOW-DOI"
    doc.layers.add(name, color=colour)
    x, z = np.asarray(surface.x, float), np.asarray(surface.elevation_m, float)
    _polylines(msp, x, z, surface.constrained, name)
    if not np.all(surface.constrained[np.isfinite(z)]):
        doc.layers.add(below, color=colour, linetype="DASHED")
        # each stretch below the DOI takes one neighbour on either side, so the two
        # layers join without a gap
        loose = ~surface.constrained
        widened = loose | np.r_[loose[1:], False] | np.r_[False, loose[:-1]]
        _polylines(msp, x, z, widened & np.isfinite(z), below)
    if surface.has_band:
        for run in _runs(np.isfinite(surface.low_elevation_m) & np.isfinite(surface.high_elevation_m)):
            if run.size >= 2:
                outline = np.concatenate([np.column_stack([x[run], surface.high_elevation_m[run]]),
                                          np.column_stack([x[run], surface.low_elevation_m[run]])[::-1]])
                msp.add_lwpolyline(outline.tolist(), close=True, dxfattribs={"layer": "BAND"})
    return name


def _text(msp, text, x, y, height, layer, align):
    from ezdxf.enums import TextEntityAlignment

    entity = msp.add_text(text, height=height, dxfattribs={"layer": layer})
    entity.set_placement((x, y), align=getattr(TextEntityAlignment, align))


def _grid(msp, window, height):
    x0, x1, z0, z1 = window
    dx, dz = nice_step((x1 - x0) / 6), nice_step((z1 - z0) / 4)
    for x in np.arange(np.ceil(x0 / dx) * dx, x1 + 1e-9, dx):
        msp.add_line((x, z0), (x, z1), dxfattribs={"layer": "GRID"})
        _text(msp, f"{x + 0.0:g}", x, z0 - 0.6 * height, height, "GRID", "TOP_CENTER")
    for z in np.arange(np.ceil(z0 / dz) * dz, z1 + 1e-9, dz):
        msp.add_line((x0, z), (x1, z), dxfattribs={"layer": "GRID"})
        _text(msp, f"{z + 0.0:g}", x0 - 0.6 * height, z, height, "GRID", "MIDDLE_RIGHT")
    _text(msp, "Distance along line (m)", 0.5 * (x0 + x1), z0 - 2.4 * height, height, "GRID", "TOP_CENTER")
    _text(msp, "Elevation (m)", x0 - 0.6 * height, z1 + 1.2 * height, height, "GRID", "BOTTOM_RIGHT")


def _stations(msp, run, size):
    shots, geos = station_points(run)
    for x, z in geos:
        msp.add_lwpolyline([(x, z), (x - size / 2, z + size), (x + size / 2, z + size)], close=True,
                           dxfattribs={"layer": "STATIONS"})
    for x, z in shots:
        msp.add_circle((x, z + 1.5 * size), size / 2, dxfattribs={"layer": "STATIONS"})


def _boreholes(msp, run, size, height):
    ground, interface = borehole_elevations(run)
    b = run.boreholes
    for k in range(ground.size):
        x = float(b.x[k])
        msp.add_line((x, ground[k]), (x, interface[k]), dxfattribs={"layer": "BOREHOLES"})
        msp.add_line((x - size, interface[k]), (x + size, interface[k]), dxfattribs={"layer": "BOREHOLES"})
        _text(msp, b.label[k], x, ground[k] + 3.0 * size, height, "BOREHOLES", "BOTTOM_CENTER")
        _text(msp, f"{b.depth_m[k]:.1f} m", x + 1.3 * size, interface[k], 0.8 * height, "BOREHOLES", "MIDDLE_LEFT")


def write_dxf(path, run, surfaces, source=None):
    """Write the section drawing (module docstring) to ``path`` atomically.

    Parameters
    ----------
    run : tomo.tomography.run.RunData
    surfaces : list of tomo.results.surfaces.SectionSurface
    source : str, optional
        The run file's name, for the notes.

    Returns
    -------
    list of str
        The layer names in the drawing.
    """
    import ezdxf

    doc = ezdxf.new("R2010", setup=True)
    doc.units = ezdxf.units.M
    doc.header["$MEASUREMENT"] = 1  # metric
    window = view_window(run)
    width = window[1] - window[0]
    doc.header["$LTSCALE"] = max(1.0, width / 100.0)  # dashes visible at the section's size
    height = float(nice_step(width / 80.0))  # text height, m
    size = 0.6 * height  # station symbols, m
    for name, (colour, linetype) in LAYERS.items():
        doc.layers.add(name, color=colour, linetype=linetype)
    msp = doc.modelspace()
    _grid(msp, window, height)  # first, so that lines on grid values draw over it
    xs = np.concatenate([[window[0]], run.terrain_x[(run.terrain_x > window[0]) & (run.terrain_x < window[1])],
                         [window[1]]])
    msp.add_lwpolyline(np.column_stack([xs, ground_elevation(run, xs)]).tolist(), dxfattribs={"layer": "GROUND"})
    names = [_surface(doc, msp, s, _SURFACE_COLORS[k % len(_SURFACE_COLORS)]) for k, s in enumerate(surfaces)]
    doi = investigation_elevation(run)
    _polylines(msp, np.asarray(run.x, float), doi, np.ones(doi.size, bool), "DOI")
    _stations(msp, run, size)
    _boreholes(msp, run, size, height)
    notes = [f"Seismic refraction section, tomo {__version__}{f', from {source}' if source else ''}: "
             "distance along line and elevation in m, true scale (no vertical exaggeration).",
             "Surfaces: " + "; ".join(s.title for s in surfaces) + "." if surfaces else "No surfaces exported.",
             "One of many models that fit the picks; calibrate against boreholes; not a design: review by a "
             "licensed professional."]
    for k, text in enumerate(notes):
        _text(msp, text, window[0], window[2] - (4.5 + 1.6 * k) * height, height, "NOTES", "TOP_LEFT")
    with atomic_path(path) as tmp:
        doc.saveas(tmp)
    return list(LAYERS) + names
