"""tomo export --netcdf / --geojson / --dxf, each read back with an independent reader
(xarray and h5py, the json module, ezdxf), on a line in map coordinates bent on an arc
(issue 14, part 3)."""

import json
from dataclasses import replace

import h5py
import numpy as np
import pytest
import xarray as xr
from _runs import make_run

from tomo.cli import main
from tomo.core.fileio import read_csv_rows
from tomo.results.runfile import write_run
from tomo.survey.crs import check_crs
from tomo.survey.stations import Stations

EPSG = 32633
#: The test line's stations on an arc of this radius (m); the picks' x run along it.
RADIUS_M = 50.0
CENTRE_E, CENTRE_N = 512000.0, 5203000.0


def arc_stations(run, crs=True):
    """Stations every metre of arc from x = -2 to 35 m (the test line's shots and
    geophones), elevations from the run's terrain; the arc starts heading east."""
    x = np.arange(-2.0, 36.0, 1.0)
    theta = (x + 2.0) / RADIUS_M
    e = CENTRE_E + RADIUS_M * np.sin(theta)
    n = CENTRE_N + RADIUS_M * (1 - np.cos(theta))
    return Stations.from_arrays(x, e, n, np.interp(x, run.terrain_x, run.terrain_z),
                                crs=check_crs(EPSG) if crs else None)


@pytest.fixture(scope="module")
def mapped(tmp_path_factory):
    """A run on the arc with two boreholes, its file, and a borehole file."""
    folder = tmp_path_factory.mktemp("formats")
    run = make_run()[0]
    run = replace(run, stations=arc_stations(run))
    path = folder / "run.h5"
    write_run(path, run)
    boreholes = folder / "b.csv"
    boreholes.write_text("label,x,depth_m,sigma_m\nBH1,10,3.6,0.3\nBH2,27,4.3,0.3\n", encoding="utf-8")
    return run, path, boreholes


def test_netcdf_reads_back_with_xarray_and_h5py(tmp_path, mapped):
    run, path, _ = mapped
    out = tmp_path / "grid.nc"
    assert main(["export", str(path), "--netcdf", str(out)]) == 0
    with xr.open_dataset(out, engine="h5netcdf") as ds:
        # values equal to the run file's, read here with h5py (an independent reader)
        with h5py.File(path, "r") as f:
            np.testing.assert_array_equal(ds["velocity"].values, f["model/velocity"][()])
            np.testing.assert_array_equal(ds["coverage"].values, f["model/coverage"][()])
            np.testing.assert_array_equal(ds["x"].values, f["model/x"][()])
            np.testing.assert_array_equal(ds["z"].values, f["model/z"][()])
        assert ds["velocity"].dims == ("z", "x")
        # CF 1.10 attributes: Conventions (sec. 2.6.1), units in UDUNITS form (sec. 3.1),
        # long_name (sec. 3.2), positive for a vertical coordinate (sec. 4.3),
        # standard names of the auxiliary map coordinates (sec. 4.1, 5.6 and the
        # standard name table), grid_mapping with crs_wkt (sec. 5.6)
        assert ds.attrs["Conventions"] == "CF-1.10"
        assert ds["velocity"].attrs["units"] == "m s-1" and "long_name" in ds["velocity"].attrs
        assert ds["z"].attrs["positive"] == "up" and ds["z"].attrs["units"] == "m"
        assert ds["lon"].attrs["standard_name"] == "longitude" and ds["lon"].attrs["units"] == "degrees_east"
        assert ds["lat"].attrs["standard_name"] == "latitude" and ds["lat"].attrs["units"] == "degrees_north"
        assert ds["easting"].attrs["standard_name"] == "projection_x_coordinate"
        assert ds["velocity"].attrs["grid_mapping"] == "crs" and "UTM zone 33N" in ds["crs"].attrs["crs_wkt"]
        # the run's settings and fit as attributes
        assert ds.attrs["tomo_setting_start"] == "layered" and ds.attrs["tomo_setting_max_iterations"] == 10
        assert ds.attrs["tomo_chi2"] == pytest.approx(run.chi2)
        # air cells are missing values, not numbers
        assert np.isnan(ds["velocity"].values[0, 0])
        # columns under the stations sit on the arc (distance = arc length, 1 cm as in
        # test_stations.py); the padding continues the end segments
        inside = (ds["x"].values >= -2.0) & (ds["x"].values <= 35.0)
        theta = (ds["x"].values[inside] + 2.0) / RADIUS_M
        np.testing.assert_allclose(ds["easting"].values[inside], CENTRE_E + RADIUS_M * np.sin(theta), atol=0.01)


def _utm(lon, lat):
    from pyproj import Transformer

    return Transformer.from_crs(4326, EPSG, always_xy=True).transform(lon, lat)


def test_geojson_is_rfc7946_and_on_the_surveyed_stations(tmp_path, mapped):
    run, path, boreholes = mapped
    out = tmp_path / "s.geojson"
    assert main(["export", str(path), "--geojson", str(out), "--contour", "1000", "--boreholes", str(boreholes)]) == 0
    data = json.loads(out.read_text(encoding="utf-8"))  # the standard json module
    # RFC 7946: a FeatureCollection of Features (sec. 3.3, 3.2), geometry types from
    # sec. 3.1, no "crs" member (sec. 4), positions [longitude, latitude] in WGS 84
    assert data["type"] == "FeatureCollection" and "crs" not in data
    kinds = {}
    for feature in data["features"]:
        assert feature["type"] == "Feature" and isinstance(feature["properties"], dict)
        geometry = feature["geometry"]
        assert geometry["type"] in ("Point", "LineString")
        positions = [geometry["coordinates"]] if geometry["type"] == "Point" else geometry["coordinates"]
        for lon, lat in positions:  # two numbers each: no ellipsoidal height is claimed
            # UTM zone 33N spans 12 to 18 deg E; the line lies at about 47 deg N: the
            # first number is the longitude (RFC 7946 sec. 3.1.1 order)
            assert 12.0 < lon < 18.0 and 46.0 < lat < 48.0
        kinds.setdefault(feature["properties"]["kind"], []).append(feature)
    assert set(kinds) == {"line", "station", "surface", "borehole"}
    assert kinds["line"][0]["geometry"]["type"] == "LineString"
    # back to UTM with pyproj: every station within 1 cm of its surveyed position
    st = run.stations
    for feature in kinds["station"]:
        k = int(np.argmin(np.abs(st.x - feature["properties"]["x_m"])))
        e, n = _utm(*feature["geometry"]["coordinates"])
        assert np.hypot(e - st.easting[k], n - st.northing[k]) < 0.01
    # surface points at their distance along the line lie on the arc (1 cm)
    for feature in kinds["surface"]:
        p = feature["properties"]
        theta = (p["distance_m"] + 2.0) / RADIUS_M
        e, n = _utm(*feature["geometry"]["coordinates"])
        assert np.hypot(e - CENTRE_E - RADIUS_M * np.sin(theta), n - CENTRE_N - RADIUS_M * (1 - np.cos(theta))) < 0.01
        assert p["depth_m"] == pytest.approx(p["ground_elevation_m"] - p["elevation_m"], abs=2e-3)
    contour = [f for f in kinds["surface"] if f["properties"]["surface"] == "contour-1000"]
    layered = [f for f in kinds["surface"] if f["properties"]["surface"] == "refractor-1"]
    assert contour and layered and all("depth_low_m" in f["properties"] for f in layered)
    assert [f["properties"]["label"] for f in kinds["borehole"]] == ["BH1", "BH2"]


def test_dxf_layers_and_vertices_match_the_surface_csv(tmp_path, mapped):
    import ezdxf

    _, path, boreholes = mapped
    dxf, csv = tmp_path / "section.dxf", tmp_path / "surface.csv"
    assert main(["export", str(path), "--contour", "1000", "--surface", str(csv), "--dxf", str(dxf),
                 "--boreholes", str(boreholes)]) == 0
    doc = ezdxf.readfile(dxf)
    assert doc.header["$INSUNITS"] == 6  # metres
    layers = {layer.dxf.name for layer in doc.layers}
    assert {"GROUND", "SURFACE-1000", "REFRACTOR-1", "BAND", "BOREHOLES", "DOI", "STATIONS", "GRID"} <= layers
    msp = doc.modelspace()
    vertices = np.array([p for name in ("SURFACE-1000", "SURFACE-1000-BELOW-DOI")
                         for e in msp.query(f'LWPOLYLINE[layer=="{name}"]') for p in e.get_points("xy")])
    header, rows = read_csv_rows(csv)
    assert header[-2:] == ["easting", "northing"]
    table = np.array([[float(fields[0]), float(fields[3])] for _, fields in rows if fields[3]])
    # every CSV point is a vertex and every vertex a CSV point, within 1 mm (the CSV
    # keeps 3 decimals: half a millimetre)
    for points, others in ((table, vertices), (vertices, table)):
        gap = np.min(np.hypot(points[:, None, 0] - others[None, :, 0], points[:, None, 1] - others[None, :, 1]),
                     axis=1)
        assert gap.max() < 1e-3
    constrained = {float(fields[0]) for _, fields in rows if fields[3] and fields[4] == "1"}
    above = {round(p[0], 3) for e in msp.query('LWPOLYLINE[layer=="SURFACE-1000"]') for p in e.get_points("xy")}
    assert above == constrained  # the layer above the DOI holds exactly the constrained points
    texts = [e.dxf.text for e in msp.query('TEXT[layer=="BOREHOLES"]')]
    assert "BH1" in texts and "BH2" in texts
    assert len(msp.query('LINE[layer=="BOREHOLES"]')) == 4  # column and interface tick each


def test_export_refusals_leave_no_output(tmp_path, mapped, capsys):
    run, path, _ = mapped
    plain = tmp_path / "plain.h5"
    write_run(plain, replace(run, stations=None))
    nc, gj = tmp_path / "g.nc", tmp_path / "s.geojson"
    assert main(["export", str(plain), "--netcdf", str(nc), "--geojson", str(gj), "--contour", "1000"]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "no map coordinates" in err and not nc.exists() and not gj.exists()
    nocrs = tmp_path / "nocrs.h5"
    write_run(nocrs, replace(run, stations=arc_stations(run, crs=False)))
    assert main(["export", str(nocrs), "--geojson", str(gj), "--contour", "1000"]) == 2
    assert "give --crs EPSG" in capsys.readouterr().err and not gj.exists()
    assert main(["export", str(nocrs), "--geojson", str(gj), "--contour", "1000", "--crs", "32633"]) == 0
    assert main(["export", str(nocrs), "--geojson", str(gj), "--crs", "99999999"]) == 2
    assert "unknown EPSG code" in capsys.readouterr().err
    assert main(["export", str(path), "--surface", str(tmp_path / "s.csv"), "--contour", "900",
                 "--contour", "1000"]) == 2
    assert "one --contour" in capsys.readouterr().err
    no_layers = tmp_path / "nolayers.h5"
    write_run(no_layers, replace(run, layered=None))
    assert main(["export", str(no_layers), "--dxf", str(tmp_path / "s.dxf")]) == 2
    assert "give --contour V" in capsys.readouterr().err and not (tmp_path / "s.dxf").exists()


def test_report_describes_the_line_on_the_map(mapped):
    from tomo.results.report import build_report

    run, _, _ = mapped
    text = build_report(run, figure_pngs={})  # no figures: only the text is checked
    side = run.stations.sideways()
    # 38 stations on 37 m of arc (R = 50 m), a = 37/50 rad: the stations nearest the
    # arc's middle are 0.5 m of arc from it, so they depart R (cos(0.5/R) - cos(a/2))
    # = 3.38 m from the chord (plane geometry), 9.1 % of the spread: above the 5 % warning
    assert side.max_m == pytest.approx(RADIUS_M * (np.cos(0.5 / RADIUS_M) - np.cos(37.0 / RADIUS_M / 2)),
                                       abs=1e-9)
    assert "Line on the map" in text and "EPSG:32633" in text and f"{side.max_m:.2f} m" in text
    assert "a 2-D section misplaces depths" in text
