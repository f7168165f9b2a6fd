"""Channels derived from the terrain when no streams are given (issue 12,
``--drainage-area terrain --channel-area A``).

The terrain is invented and closed-form: two V valleys meeting in a Y. The
ground is z = SIDE × d + FALL × (y − y_outlet), d the distance to the Y's three
centrelines, with a small V channel cut along them; every cell drains
to the nearest valley floor and down it (steepest descent, O'Callaghan & Mark
1984), so the channels above a threshold are the three built centrelines, cut
at the confluence. A D8 path on a floor that is not at a multiple of 45° is a
staircase within one pixel of the floor's line; the smoothing keeps it within
half a pixel more; the channel head starts where the area first passes the
threshold, so the built branches are compared below :data:`HEAD` metres of the
raster's top edge. Tolerance: 2 pixels (the staircase, its smoothing, and the
confluence, which D8 may place a pixel off the lines' meeting point).
"""

from __future__ import annotations

import numpy as np
import pytest
import rasterio
import shapely

from terrain_fixtures import north_up

pytest.importorskip("pyflwdir")

from reachgauge.errors import InputError  # noqa: E402

RES = 2.0                     # m per pixel
N = 160                       # pixels a side: 320 m × 320 m
WEST, SOUTH = 500_000.0, 5_000_000.0
SIDE, FALL = 0.3, 0.05        # valley side slope, down-valley tilt (m/m)
# the floor L m below the top edge drains about L × 160 m (the branch's catchment:
# the raster's side to the divide between the branches), so the threshold of
# 0.01 km² is passed some 60–75 m down (D8's hillslope paths reach the floor
# slantwise, a little lower): the branches are compared from 100 m down
HEAD = 100.0
# the trunk on a column of pixel centres: off them, the two cells either side of
# its line tie and D8 runs two parallel threads down a straight floor
CONFLUENCE = (WEST + 161.0, SOUTH + 141.0)
TRUNK = shapely.LineString([CONFLUENCE, (WEST + 161.0, SOUTH)])
BRANCHES = (shapely.LineString([(WEST + 60.0, SOUTH + 320.0), CONFLUENCE]),
            shapely.LineString([(WEST + 270.0, SOUTH + 320.0), CONFLUENCE]))
THRESHOLD_CELLS = 2500        # contributing cells at which a channel starts
CELL_KM2 = RES * RES * 1e-6


def _write_y(path):
    rows, cols = np.mgrid[0:N, 0:N]
    x = WEST + (cols + 0.5) * RES
    y = SOUTH + N * RES - (rows + 0.5) * RES
    pts = shapely.points(x.ravel(), y.ravel())
    d = shapely.distance(pts, shapely.multilinestrings([TRUNK, *BRANCHES])).reshape(N, N)
    cut = np.clip(1.0 - d / 3.0, 0.0, 1.0)       # a V channel 1 m deep, 6 m wide
    z = 100.0 + SIDE * d + FALL * (y - SOUTH) - cut
    with rasterio.open(path, "w", driver="GTiff", width=N, height=N, count=1, dtype="float32",
                       crs="EPSG:32633", transform=north_up(WEST, SOUTH + N * RES, RES, RES)
                       ) as dst:
        dst.write(z.astype(np.float32), 1)
    return path


@pytest.fixture(scope="module")
def dem(tmp_path_factory):
    return _write_y(tmp_path_factory.mktemp("y") / "y.tif")


def _derive(dem, folder, area=THRESHOLD_CELLS * CELL_KM2):
    from reachgauge import api
    from reachgauge.drainage.channels import derived_network

    cfg = api.configure(dem=dem, drainage_area="terrain", channel_area=area)
    return derived_network(cfg, folder)


def _ok(net):
    return [r for r in net.reaches if r.geometry is not None]


def test_channels_follow_the_valley_floors_split_at_the_confluence(dem, tmp_path):
    net = _derive(dem, tmp_path)
    lines = _ok(net)
    assert len(net.reaches) == 3 and len(lines) == 3
    # trunk first (Strahler order 2, Strahler 1957: two order-1 streams meet), then the branches
    assert [r.stream_order for r in net.reaches] == [2, 1, 1]
    trunk, *branches = (r.geometry for r in lines)
    assert shapely.hausdorff_distance(trunk, TRUNK) <= 2 * RES
    for got in branches:
        built = min(BRANCHES, key=lambda b: shapely.hausdorff_distance(b, got))
        below = built.intersection(shapely.box(WEST, SOUTH, WEST + N * RES,
                                               SOUTH + N * RES - HEAD))
        # every derived vertex on the floor, and the floor below the head covered
        assert max(built.distance(shapely.Point(p)) for p in got.coords) <= 2 * RES
        on_floor = shapely.line_interpolate_point(below, np.arange(0.0, below.length, 1.0))
        assert shapely.distance(got, on_floor).max() <= 2 * RES
        # reaches meet: each branch ends where the trunk starts
        assert shapely.Point(got.coords[-1]).distance(shapely.Point(trunk.coords[0])) < 1e-9
    # oriented downstream: the trunk ends at the outlet on the south edge
    assert trunk.coords[-1][1] < SOUTH + RES
    assert all(b.coords[0][1] > b.coords[-1][1] for b in branches)
    assert all(r.orientation == "by-flow-direction" for r in lines)


def test_ids_are_the_same_across_two_runs(dem, tmp_path):
    (tmp_path / "a").mkdir(), (tmp_path / "b").mkdir()
    a = _derive(dem, tmp_path / "a")
    b = _derive(dem, tmp_path / "b")
    assert [r.reach_id for r in a.reaches] == ["c0001", "c0002", "c0003"]
    assert [r.reach_id for r in a.reaches] == [r.reach_id for r in b.reaches]
    for ra, rb in zip(a.reaches, b.reaches):
        assert ra.geometry.equals_exact(rb.geometry, 0.0)


def test_smoothing_turns_the_staircase_into_a_steady_direction(dem, tmp_path):
    """A D8 staircase turns by 45° from one pixel to the next; after the moving
    average the branch (29° and 33° off north) turns by much less, which is
    what keeps neighbouring transects near parallel."""
    for r in _ok(_derive(dem, tmp_path))[1:]:
        xy = np.asarray(r.geometry.coords)[3:-3]       # away from the pinned ends
        ang = np.degrees(np.arctan2(*np.diff(xy, axis=0).T[::-1]))
        assert np.max(np.abs(np.diff(ang))) < 30.0


def test_a_run_without_streams_writes_the_derived_reaches(dem, tmp_path):
    import geopandas as gpd

    import reachgauge

    out = tmp_path / "o.gpkg"
    reachgauge.run(out, dem=dem, drainage_area="terrain", channel_area=THRESHOLD_CELLS * CELL_KM2,
                   spacing=20.0, half_width=20.0, snap_distance=4.0, smoothing=20.0)
    re = gpd.read_file(out, layer="reaches")
    tr = gpd.read_file(out, layer="transects")
    assert list(re["reach_id"]) == ["c0001", "c0002", "c0003"]
    assert list(re["stream_order"]) == [2, 1, 1]
    (tmp_path / "again").mkdir()
    derived = _derive(dem, tmp_path / "again")
    for rid, geom in zip(re["reach_id"], re.geometry):
        want = next(r.geometry for r in derived.reaches if r.reach_id == rid)
        assert geom.equals_exact(want, 1e-6)
    assert set(tr["reach_id"]) == set(re["reach_id"]) and len(tr) >= 20
    # the areas read at the transects come from the same routed raster: above the threshold
    assert (tr["drainage_area"].dropna() >= 0.9 * THRESHOLD_CELLS * CELL_KM2).all()
    assert not out.with_name("o.gpkg.checkpoint").exists()
    info = gpd.read_file(out, layer="run_info")
    keys = set(info["key"])
    assert "input.dem" in keys and "input.streams" not in keys
    assert "param.channel_area" in keys


def test_threshold_above_the_largest_area_is_an_input_error(dem, tmp_path):
    import reachgauge

    with pytest.raises(InputError, match="largest contributing area") as err:
        reachgauge.run(tmp_path / "o.gpkg", dem=dem, drainage_area="terrain", channel_area=50.0)
    assert "lower --channel-area" in err.value.fix
    assert not (tmp_path / "o.gpkg").exists()
    assert not (tmp_path / "o.gpkg.checkpoint").exists()


@pytest.mark.parametrize("values, words", [
    ({}, "streams are needed"),
    ({"channel_area": 1.0}, "needs --drainage-area terrain"),
    ({"drainage_area": "terrain", "channel_area": 1.0, "streams": "s.gpkg"},
     "--streams is given too"),
    ({"drainage_area": "terrain", "channel_area": 1.0, "id_field": "x"}, "--id-field"),
])
def test_missing_or_conflicting_channel_settings_are_input_errors(dem, tmp_path, values, words):
    import reachgauge

    with pytest.raises(InputError, match=words):
        reachgauge.run(tmp_path / "o.gpkg", dem=dem, **values)


def test_channel_area_is_in_square_miles_with_us_units(dem):
    from reachgauge import api
    from reachgauge.manning import SQ_MILE_KM2

    # 1 mi = 1609.344 m exactly (international mile, 1959)
    cfg = api.configure(dem=dem, drainage_area="terrain", channel_area=2.0, units="us")
    assert cfg.channel_area == pytest.approx(2.0 * 1.609344 ** 2)
    assert SQ_MILE_KM2 == pytest.approx(2.589988110336)
    from reachgauge.results.run_info import settings

    assert settings(cfg)["channel_area"] == pytest.approx(2.0)       # shown back in mi²
    with pytest.raises(InputError, match="mi²"):
        api.configure(dem=dem, drainage_area="terrain", channel_area=-1.0, units="us")


def test_resume_reuses_the_routed_terrain_and_the_derived_channels(dem, tmp_path, monkeypatch):
    """Interrupted after one reach, then resumed: neither the routing nor the
    channels are made again (both would raise here), the checkpoint's identity
    names the user's settings (no streams file), and the result has all reaches."""
    import json

    import geopandas as gpd

    import reachgauge
    from reachgauge.batch import dispatch
    from reachgauge.drainage import channels, grid

    real = dispatch.iterate

    def stop_after_one(*a, **k):
        for kept in real(*a, **k):
            yield kept
            raise KeyboardInterrupt

    values = dict(dem=dem, drainage_area="terrain", channel_area=THRESHOLD_CELLS * CELL_KM2,
                  spacing=20.0, half_width=20.0, snap_distance=4.0, smoothing=20.0)
    out = tmp_path / "o.gpkg"
    monkeypatch.setattr(dispatch, "iterate", stop_after_one)
    with pytest.raises(KeyboardInterrupt):
        reachgauge.run(out, **values)
    folder = tmp_path / "o.gpkg.checkpoint"
    assert len(list(folder.glob("channels-*.gpkg"))) == 1
    assert len(list(folder.glob("drainage-*.tif"))) == 1
    ident = json.loads((folder / "run.json").read_text())
    assert "streams" not in ident["inputs"] and ident["settings"]["streams"] is None
    assert ident["settings"]["channel_area"] == pytest.approx(THRESHOLD_CELLS * CELL_KM2)
    monkeypatch.setattr(dispatch, "iterate", real)

    def again(*a, **k):
        raise AssertionError("made again on resume")

    monkeypatch.setattr(channels, "write_channels", again)
    monkeypatch.setattr(grid, "_route_terrain", again)
    reachgauge.run(out, resume=True, **values)
    assert list(gpd.read_file(out, layer="reaches")["reach_id"]) == ["c0001", "c0002", "c0003"]
