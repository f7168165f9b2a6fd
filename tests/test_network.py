"""Loading and checking the inputs.

External references: pyproj (CRS transformations, UTM zones: zone = ⌊(lon + 180) / 6⌋ + 1,
so 15° E is zone 33, EPSG:32633 in the northern hemisphere — the definition of the
UTM grid); rasterio/GDAL and pyogrio/GDAL open the formats; 1 US survey foot =
1200/3937 m (its legal definition); 1 ft = 0.3048 m. The synthetic valley slopes
down its line's drawn direction (tests/terrain_fixtures.py), so the upstream end
is known.
"""

import pickle
import warnings

import geopandas
import numpy as np
import pytest
import shapely
from pyproj import CRS, Transformer

from reachgauge.config import RunConfig
from reachgauge.errors import InputError, ReachgaugeWarning
from reachgauge.inputs.network import load_network, open_raster
from terrain_fixtures import (ORIGIN, make_valley_raster, straight_line, tile_as_vrt, warp_raster,
                              write_lines)

LINE = straight_line(400, 20.0)


@pytest.fixture(scope="module")
def valley(tmp_path_factory):
    d = tmp_path_factory.mktemp("valley")
    return make_valley_raster(d, LINE, res=1.0)


def cfg_for(valley, streams, **kw):
    return RunConfig(dem=valley.path, streams=streams, **{"half_width": 25.0, **kw})


def geoms_close(a, b, tol=1e-6):
    return shapely.hausdorff_distance(a, b) < tol


@pytest.mark.parametrize("name", ["s.gpkg", "s.shp", "s.geojson", "s.fgb"])
def test_reads_every_vector_format(valley, tmp_path, name):
    path = write_lines(tmp_path / name, [LINE], fields={"code": ["A7"]})
    net = load_network(cfg_for(valley, path, id_field="code"))
    (r,) = net.reaches
    assert r.status == "ok" and r.reach_id == "A7" and r.orientation == "kept-by-terrain"
    assert geoms_close(r.geometry, LINE)
    assert r.length_m == pytest.approx(400.0)


def test_vrt_mosaic_reads_like_the_single_file(valley, tmp_path):
    vrt = tile_as_vrt(valley.path, tmp_path, nx=3, ny=2)
    path = write_lines(tmp_path / "s.gpkg", [LINE])
    one = load_network(cfg_for(valley, path))
    many = load_network(cfg_for(valley, path).replace(dem=vrt))
    assert many.raster.res == one.raster.res and many.raster.bounds == one.raster.bounds
    pts = shapely.get_coordinates(LINE.segmentize(7.0))
    from reachgauge.inputs import sampler
    with open_raster(one.raster) as a, open_raster(many.raster) as b:
        np.testing.assert_array_equal(sampler.sample(a, pts).z, sampler.sample(b, pts).z)


def test_vector_in_another_crs_is_reprojected(valley, tmp_path):
    gdf = geopandas.GeoDataFrame(geometry=[LINE.segmentize(10)], crs="EPSG:32633").to_crs("EPSG:3857")
    gdf.to_file(tmp_path / "web.gpkg")
    (r,) = load_network(cfg_for(valley, tmp_path / "web.gpkg")).reaches
    # pyproj round trip UTM → Web Mercator → UTM: vertices back within a millimetre
    assert geoms_close(r.geometry, LINE.segmentize(10), tol=1e-3)


def test_geographic_raster_is_warped_to_its_utm_zone(valley, tmp_path):
    geo = warp_raster(valley.path, tmp_path / "geo.tif", "EPSG:4326")
    path = write_lines(tmp_path / "s.gpkg", [LINE])
    with pytest.warns(ReachgaugeWarning, match="geographic"):
        net = load_network(cfg_for(valley, path).replace(dem=geo))
    assert net.raster.warped and net.work_crs.to_epsg() == 32633    # 15° E → zone 33 N
    assert net.source_crs.to_epsg() == 4326
    assert net.raster.xy_factor == 1.0
    assert net.raster.res == pytest.approx(1.0, rel=0.05)             # metres, not degrees
    assert any("geographic" in w for w in net.warnings)
    (r,) = net.reaches
    assert geoms_close(r.geometry, LINE)
    # the reach's vertices, carried to degrees and back with pyproj, are unchanged
    fwd = Transformer.from_crs(32633, 4326, always_xy=True)
    back = Transformer.from_crs(4326, 32633, always_xy=True)
    xy = np.asarray(r.geometry.coords)
    lon, lat = fwd.transform(xy[:, 0], xy[:, 1])
    np.testing.assert_allclose(np.column_stack(back.transform(lon, lat)), xy, atol=1e-6)
    # a named work CRS is used instead of the UTM zone (ETRS89-LAEA Europe)
    with pytest.warns(ReachgaugeWarning):
        named = load_network(cfg_for(valley, path, work_crs="EPSG:3035").replace(dem=geo))
    assert named.work_crs.to_epsg() == 3035
    # its length is the line's length in LAEA, as pyproj computes it
    laea = Transformer.from_crs(32633, 3035, always_xy=True)
    dense = np.asarray(LINE.segmentize(5.0).coords)
    ref = shapely.LineString(np.column_stack(laea.transform(dense[:, 0], dense[:, 1]))).length
    assert named.reaches[0].length_m == pytest.approx(ref, rel=1e-6)
    net2 = pickle.loads(pickle.dumps(net.raster))
    with open_raster(net2) as ds:
        assert ds.crs.to_epsg() == 32633
        assert (ds.width, ds.height) == (net.raster.width, net.raster.height)


def test_missing_crs_is_an_error_unless_stated(tmp_path):
    v = make_valley_raster(tmp_path, LINE, crs=None, name="nocrs.tif")
    path = write_lines(tmp_path / "s.gpkg", [LINE])
    with pytest.raises(InputError, match="has no CRS") as e:
        load_network(RunConfig(dem=v.path, streams=path))
    assert "dem-crs" in str(e.value)
    net = load_network(RunConfig(dem=v.path, streams=path, dem_crs="EPSG:32633"))
    assert net.reaches[0].status == "ok" and net.work_crs.to_epsg() == 32633
    shp = write_lines(tmp_path / "nocrs.shp", [LINE], crs=None)
    with pytest.raises(InputError, match="streams file nocrs.shp has no CRS"):
        load_network(RunConfig(dem=v.path, streams=shp, dem_crs="EPSG:32633"))
    net = load_network(RunConfig(dem=v.path, streams=shp, dem_crs="EPSG:32633",
                                 streams_crs="EPSG:32633"))
    assert net.reaches[0].status == "ok"
    with pytest.raises(InputError, match="not a CRS"):
        load_network(RunConfig(dem=v.path, streams=shp, dem_crs="EPSG:999999"))


def test_bad_files_fields_and_layers_give_clear_errors(valley, tmp_path):
    path = write_lines(tmp_path / "s.gpkg", [LINE, straight_line(300, 40.0)],
                       fields={"code": ["a", "a"], "hw": [10.0, 12.0]})
    with pytest.raises(InputError, match="does not exist"):
        load_network(cfg_for(valley, tmp_path / "nope.gpkg"))
    with pytest.raises(InputError, match="does not exist"):
        load_network(cfg_for(valley, path).replace(dem=tmp_path / "nope.tif"))
    junk = tmp_path / "junk.tif"
    junk.write_text("not a raster")
    with pytest.raises(InputError, match="cannot read the terrain raster"):
        load_network(cfg_for(valley, path).replace(dem=junk))
    junk_v = tmp_path / "junk.gpkg"
    junk_v.write_text("not a vector")
    with pytest.raises(InputError, match="cannot read the streams file"):
        load_network(cfg_for(valley, junk_v))
    with pytest.raises(InputError, match="no layer 'rivers'.*streams") as e:
        load_network(cfg_for(valley, path, layer="rivers"))
    assert e.value.fix.startswith("pick one of its layers")
    with pytest.raises(InputError, match="no field 'reach'.*code, hw"):
        load_network(cfg_for(valley, path, id_field="reach"))
    with pytest.raises(InputError, match="no field 'width'"):
        load_network(cfg_for(valley, path, half_width_field="width"))
    with pytest.raises(InputError, match="not unique: a"):
        load_network(cfg_for(valley, path, id_field="code"))
    pts = write_lines(tmp_path / "pts.gpkg",
                      [shapely.Point(ORIGIN), shapely.Point(ORIGIN[0] + 5, ORIGIN[1])])
    with pytest.raises(InputError, match="no line features"):
        load_network(cfg_for(valley, pts))


def test_bad_features_get_a_status_and_the_rest_load(valley, tmp_path):
    x, y = ORIGIN
    geoms = [LINE, None, shapely.Point(x, y), shapely.LineString([(x, y), (x, y)]),
             shapely.LineString([(x, y), (x + 5, y + 5)]),
             shapely.LineString([(x - 9000, y), (x - 8000, y)]),
             shapely.Polygon([(x, y), (x + 1, y), (x, y + 1)])]
    path = write_lines(tmp_path / "mixed.gpkg", geoms)
    net = load_network(cfg_for(valley, path))
    got = [(r.reach_id, r.status) for r in net.reaches]
    assert got == [("1", "ok"), ("2", "empty-geometry"), ("3", "not-a-line"), ("4", "zero-length"),
                   ("5", "too-short"), ("6", "outside-raster"), ("7", "not-a-line")]
    assert all(r.message for r in net.reaches[1:]) and net.reaches[0].message == ""
    assert all(r.geometry is None for r in net.reaches[1:])


def test_multilinestring_parts_merge_where_they_join(valley, tmp_path):
    a = shapely.LineString(LINE.coords[:1] + [LINE.interpolate(200).coords[0]])
    b = shapely.LineString([LINE.interpolate(200).coords[0], LINE.coords[-1]])
    joined = shapely.MultiLineString([b, a])   # drawn out of order
    apart = shapely.MultiLineString([shapely.LineString([a.coords[0], a.interpolate(150).coords[0]]), b])
    path = write_lines(tmp_path / "m.gpkg", [joined, apart], fields={"code": ["J", "K"]})
    net = load_network(cfg_for(valley, path, id_field="code"))
    ids = [r.reach_id for r in net.reaches]
    assert ids == ["J", "K-1", "K-2"]
    assert net.reaches[0].length_m == pytest.approx(400.0) and geoms_close(net.reaches[0].geometry, LINE)
    assert [r.part for r in net.reaches] == [0, 0, 1]
    assert all(r.source_index == i for r, i in zip(net.reaches, [0, 1, 1]))
    clash = write_lines(tmp_path / "c.gpkg", [apart, LINE], fields={"code": ["K", "K-2"]})
    with pytest.raises(InputError, match="clash after splitting.*K-2"):
        load_network(cfg_for(valley, clash, id_field="code"))


def test_orientation_by_terrain_or_as_digitised(valley, tmp_path):
    path = write_lines(tmp_path / "rev.gpkg", [LINE], reverse=True)
    (r,) = load_network(cfg_for(valley, path)).reaches
    assert r.orientation == "reversed-by-terrain"
    assert r.geometry.coords[0] == pytest.approx(LINE.coords[0])   # starts at the high end
    (d,) = load_network(cfg_for(valley, path, orientation="digitised")).reaches
    assert d.orientation == "as-digitised" and d.geometry.coords[0] == pytest.approx(LINE.coords[-1])
    flat = make_valley_raster(tmp_path, LINE, valley_slope=0.0, name="flat.tif")
    (f,) = load_network(RunConfig(dem=flat.path, streams=path)).reaches
    assert f.orientation == "ambiguous-kept" and f.geometry.coords[0] == pytest.approx(LINE.coords[-1])


def test_split_ids_names_attributes_and_half_width_field(valley, tmp_path):
    path = write_lines(tmp_path / "s.gpkg", [LINE], fields={"code": [12.0], "label": ["Mill Brook"],
                                                              "hw": [15.0], "area": [np.float32(3.5)]})
    net = load_network(cfg_for(valley, path, id_field="code", name_field="label",
                               half_width_field="hw", split_length=130.0))
    assert [r.reach_id for r in net.reaches] == ["12-1", "12-2", "12-3"]
    np.testing.assert_allclose([r.length_m for r in net.reaches], 400 / 3)
    np.testing.assert_allclose([r.start_chainage_m for r in net.reaches], [0, 400 / 3, 800 / 3])
    r = net.reaches[1]
    assert r.name == "Mill Brook" and r.half_width_m == 15.0
    assert r.attributes == {"code": 12.0, "label": "Mill Brook", "hw": 15.0, "area": 3.5}
    assert all(type(v) in (float, str) for v in r.attributes.values())
    # US units: the field is in feet
    us = load_network(cfg_for(valley, path, half_width_field="hw", units="us"))
    assert us.reaches[0].half_width_m == pytest.approx(15 * 0.3048)
    assert pickle.loads(pickle.dumps(net.reaches)) [1].reach_id == "12-2"


def test_feet_vertical_and_feet_crs(tmp_path):
    """A raster whose elevations are in feet reads in metres (1 ft = 0.3048 m);
    a CRS in US survey feet (EPSG:2227) gives lengths in metres (1 ftUS = 1200/3937 m)."""
    ft = make_valley_raster(tmp_path, LINE, vertical_units="ft", dtype="float64", name="ft.tif")
    m = make_valley_raster(tmp_path, LINE, dtype="float64", name="m.tif")
    path = write_lines(tmp_path / "s.gpkg", [LINE])
    a = load_network(RunConfig(dem=m.path, streams=path))
    b = load_network(RunConfig(dem=ft.path, streams=path, vertical_units="ft"))
    assert b.raster.z_factor == 0.3048
    from reachgauge.inputs import sampler
    pts = shapely.get_coordinates(LINE.segmentize(9.0))
    with open_raster(a.raster) as da, open_raster(b.raster) as db:
        np.testing.assert_allclose(sampler.sample(db, pts, z_factor=b.raster.z_factor).z,
                                   sampler.sample(da, pts).z, atol=1e-9)
    usft = 1200 / 3937
    line_ft = straight_line(400 / usft, 20.0, origin=(6_000_000.0, 2_000_000.0))
    v = make_valley_raster(tmp_path, line_ft, res=1 / usft, crs="EPSG:2227", name="ftcrs.tif")
    p2 = write_lines(tmp_path / "ft.gpkg", [line_ft], crs="EPSG:2227")
    net = load_network(RunConfig(dem=v.path, streams=p2))
    assert net.raster.xy_factor == pytest.approx(usft, rel=1e-12)
    assert net.raster.res == pytest.approx(1.0, rel=1e-9)
    assert net.reaches[0].length_m == pytest.approx(400.0, rel=1e-9)


def test_raster_info_fingerprint_and_stated_crs_override(valley, tmp_path):
    path = write_lines(tmp_path / "s.gpkg", [LINE])
    net = load_network(cfg_for(valley, path))
    info = net.raster
    assert info.fingerprint.startswith("size=") and "sha256-first-MB=" in info.fingerprint
    assert info.crs == CRS.from_epsg(32633) and not info.warped and info.res == 1.0
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        load_network(cfg_for(valley, path))   # a clean load raises no warning
    with pytest.warns(ReachgaugeWarning, match="says its CRS"):
        load_network(cfg_for(valley, path, streams_crs="EPSG:32633", dem_crs="EPSG:32634"))
