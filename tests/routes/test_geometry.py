"""Route input: GeoJSON and GPX, resampling, elevation, slope, stops, errors."""

from __future__ import annotations

import numpy as np
import pytest

from walkcomfort.errors import InputError
from walkcomfort.routes.geometry import load_route, resample_line, utm_crs_for

GPX_HEAD = '<?xml version="1.0"?><gpx version="1.1" creator="test" xmlns="http://www.topografix.com/GPX/1/1">'


def test_resample_keeps_both_ends_and_spacing():
    d, x, y, vd = resample_line([0.0, 12.0, 12.0], [0.0, 0.0, 10.0], 5.0)
    assert d.tolist() == [0, 5, 10, 15, 20, 22]
    assert (x[-1], y[-1]) == (12.0, 10.0)
    assert (x[3], y[3]) == (12.0, 3.0)
    assert vd.tolist() == [0.0, 12.0, 22.0]


def test_utm_zone():
    # UTM zones are 6° wide from 180° W (zone 1); Madrid (-3.7) is in zone 30, southern hemisphere 327xx
    assert utm_crs_for(-3.7, 40.4) == "EPSG:32630"
    assert utm_crs_for(151.2, -33.9) == "EPSG:32756"


def test_geojson_length_matches_geodesic(line_factory):
    from pyproj import Geod

    coords = [[-3.70, 40.40], [-3.69, 40.40], [-3.69, 40.41]]
    r = load_route(line_factory(coords, {"route_id": "r1"}), spacing_m=5)
    geod = Geod(ellps="WGS84")  # pyproj geodesic as the reference length
    ref = sum(geod.inv(*coords[i], *coords[i + 1])[2] for i in range(2))
    # UTM's scale factor (0.9996 at the central meridian) bounds the difference to ~0.1 %
    assert r.length_m == pytest.approx(ref, rel=1.5e-3)
    assert r.route_id == "r1"
    d = r.points["dist_m"].to_numpy()
    assert np.allclose(np.diff(d)[:-1], 5.0)
    assert r.points["heading_deg"].iloc[0] == pytest.approx(90.0, abs=1.0)  # eastwards first
    assert r.points["heading_deg"].iloc[-2] == pytest.approx(0.0, abs=1.0)  # then north
    assert r.points["lat"].iloc[-1] == pytest.approx(40.41, abs=1e-7)


def test_flat_route_gets_a_notice(line_factory):
    r = load_route(line_factory([[-3.70, 40.40], [-3.699, 40.40]]))
    assert r.elevation_source == "flat"
    assert any("flat" in n for n in r.notices)
    assert (r.points["slope_pct"] == 0).all()


def test_elevations_give_the_slope(line_factory):
    # 100 m eastwards rising 10 m: a 10 % grade everywhere
    from pyproj import Geod

    lon1 = Geod(ellps="WGS84").fwd(-3.70, 40.40, 90.0, 100.0)[0]
    r = load_route(line_factory([[-3.70, 40.40, 600.0], [lon1, 40.40, 610.0]]))
    assert r.elevation_source == "file"
    # grade = rise/run = 10 m / 100 m (from the definition); the 100 m is laid out with pyproj.Geod (reference library)
    assert r.points["slope_pct"].to_numpy() == pytest.approx(10.0, rel=2e-3)


def test_stops_from_properties_and_points(line_factory):
    stop_pt = {"type": "Feature", "properties": {"wait_s": 20, "label": "bus"},
               "geometry": {"type": "Point", "coordinates": [-3.6995, 40.40001]}}
    r = load_route(line_factory([[-3.70, 40.40], [-3.699, 40.40]],
                                {"stops": [{"dist_m": 10, "wait_s": 30, "label": "crossing"}]}, [stop_pt]))
    assert r.stops["label"].tolist() == ["crossing", "bus"]
    assert r.stops["wait_s"].tolist() == [30.0, 20.0]
    # the stop point sits at the middle longitude of a straight east-west line: half its length (from the geometry)
    assert r.stops["dist_m"].iloc[1] == pytest.approx(r.length_m / 2, abs=1.0)


def test_gpx_route_with_stop_waypoint(tmp_path):
    p = tmp_path / "r.gpx"
    p.write_text(GPX_HEAD + '<wpt lat="40.40" lon="-3.6995"><name>light</name><desc>wait_s=45</desc>'
                 '<type>stop</type></wpt><rte><name>school</name>'
                 '<rtept lat="40.40" lon="-3.70"><ele>600</ele></rtept>'
                 '<rtept lat="40.40" lon="-3.699"><ele>604</ele></rtept></rte></gpx>')
    r = load_route(p)
    assert r.route_id == "school" and r.elevation_source == "file"
    assert r.stops["wait_s"].tolist() == [45.0]
    assert r.points["elev_m"].iloc[-1] == pytest.approx(604.0)


def test_gpx_track(tmp_path):
    p = tmp_path / "t.gpx"
    p.write_text(GPX_HEAD + '<trk><name>t</name><trkseg><trkpt lat="40.40" lon="-3.70"/>'
                 '<trkpt lat="40.401" lon="-3.70"/></trkseg></trk></gpx>')
    r = load_route(p, spacing_m=10)
    assert r.length_m == pytest.approx(111.0, abs=1.0)  # 0.001° of latitude is about 111 m (from the definition)
    assert len(r.points) == 13


@pytest.mark.parametrize("content, needle", [
    ('{"type": "FeatureCollection", "features": []}', "no LineString"),
    ('{"type": "Point", "coordinates": [0, 0]}', "not a route"),
    ('{"type": "Feature", "properties": {}, "geometry": {"type": "LineString", "coordinates": [[0, 0]]}}',
     "at least 2"),
    ('{"type": "Feature", "properties": {}, "geometry": {"type": "LineString", "coordinates": [[0, 95], [0, 0]]}}',
     "outside WGS84"),
    ('{"type": "Feature", "properties": {}, "geometry": {"type": "LineString", "coordinates": [[1, 1], [1, 1]]}}',
     "zero length"),
    ('{"type": "Feature", "properties": {"stops": [{"dist_m": 1e6, "wait_s": 3}]}, '
     '"geometry": {"type": "LineString", "coordinates": [[0, 0], [0.001, 0]]}}', "outside the route"),
    ('{"type": broken', "not valid JSON"),
])
def test_bad_route_files(tmp_path, content, needle):
    p = tmp_path / "bad.geojson"
    p.write_text(content)
    with pytest.raises(InputError) as exc:
        load_route(p)
    assert needle in str(exc.value) and str(p) in str(exc.value)


def test_two_lines_are_ambiguous_unless_named(tmp_path, line_factory):
    other = {"type": "Feature", "properties": {"route_id": "b"},
             "geometry": {"type": "LineString", "coordinates": [[0, 0], [0.001, 0]]}}
    p = line_factory([[0, 0], [0, 0.001]], {"route_id": "a"}, [other])
    with pytest.raises(InputError, match="ambiguous"):
        load_route(p)
    assert load_route(p, route_id="b").route_id == "b"


def test_dem_gives_elevation_and_slope(line_factory, tmp_path):
    # a DEM in the route's UTM zone rising 10 m per 100 m northwards (a 10 % grade); rasterio is
    # the optional DEM reader (test extra)
    rasterio = pytest.importorskip("rasterio", reason="pip install rasterio (the optional DEM reader)")
    from pyproj import Transformer
    from rasterio.transform import from_origin

    x0, y0 = Transformer.from_crs("EPSG:4326", "EPSG:32630", always_xy=True).transform(-3.70, 40.40)
    cell = 1.0
    ny, nx = 400, 100
    north = y0 + 300.0
    rows = np.arange(ny)
    z = 600.0 + 0.10 * ((north - (rows + 0.5) * cell) - y0)  # by northing of each cell centre
    grid = np.repeat(z[:, None], nx, axis=1).astype("float32")
    dem = tmp_path / "dem.tif"
    with rasterio.open(dem, "w", driver="GTiff", height=ny, width=nx, count=1, dtype="float32", crs="EPSG:32630",
                       transform=from_origin(x0 - 50.0, north, cell, cell), nodata=-9999.0) as ds:
        ds.write(grid, 1)
    lat1 = Transformer.from_crs("EPSG:32630", "EPSG:4326", always_xy=True).transform(x0, y0 + 200.0)[1]
    r = load_route(line_factory([[-3.70, 40.40], [-3.70, lat1]]), dem=dem)
    assert r.elevation_source == "dem"
    assert r.points["elev_m"].iloc[0] == pytest.approx(600.0, abs=0.1)
    assert r.points["elev_m"].iloc[-1] == pytest.approx(620.0, abs=0.2)
    assert np.median(r.points["slope_pct"]) == pytest.approx(10.0, abs=0.3)
    far = line_factory([[3.0, 40.40], [3.001, 40.40]], name="far.geojson")
    with pytest.raises(InputError, match="outside the DEM"):
        load_route(far, dem=dem)


def test_dem_without_rasterio_names_the_install(line_factory, tmp_path, monkeypatch):
    import sys

    monkeypatch.setitem(sys.modules, "rasterio", None)  # as if the optional package were not installed
    with pytest.raises(InputError, match="pip install rasterio"):
        load_route(line_factory([[-3.70, 40.40], [-3.699, 40.40]]), dem=tmp_path / "dem.tif")
