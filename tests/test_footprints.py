"""Design-flow footprints (reachgauge.flood) on terrain of known shape.

Truth, outside the project:
- Plane geometry of a prismatic channel (REFERENCES.md "Closed forms"): in a straight
  compound channel with the bed falling at the valley slope, a uniform flow's water
  surface is parallel to the bed, so the wet plan area is the section's top width
  T(y) times the reach length, T(y) = b + 2 z y in the trapezoid (y ≤ bank height)
  and 2 (F + w (y − h)) on the plain between valley walls of slope w (H:V) that rise
  at F from the centre.
- Pixel-edge tolerance: a cell counts where its centre is under water. Along a
  straight edge parallel to the grid each column holds a whole number of cells
  within one cell of T / res, and the ends cut whole columns: |ΔA| < res·(L + T).
- Depth is stage minus ground (definition): checked against the closed-form ground
  at cell centres, to float32 rounding of the GeoTIFF (1e-4 m at these values).
- A partition of the plane by nearest line (Voronoi by lines) covers every point
  once: two reaches' corridors neither overlap nor leave a gap (set algebra on the
  cells, shapely areas).
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
import rasterio
import shapely

from reachgauge.batch import dispatch, task
from reachgauge.config import RunConfig
from reachgauge.flood import corridor as C
from reachgauge.hydraulics.reach import ReachInputs
from reachgauge.inputs import network as network_mod
from terrain_fixtures import ORIGIN, make_valley_raster, north_up, write_lines

pytestmark = pytest.mark.filterwarnings("ignore::RuntimeWarning", "ignore::UserWarning")

RES = 0.5               # m, pixel size
L = 300.0               # m, reach length (a multiple of the transect spacing)
B, Z, H = 6.0, 2.0, 1.5  # channel bottom width, side slope (H:V), bank height (m)
F, W = 25.0, 1.0        # valley walls rise from F m off the centre at W (H:V)
S = 0.002               # valley (and bed) slope
Z0 = 100.0              # floodplain elevation at the upstream end (m)
MARGIN = 70.0


def ground(x, y):
    """Closed-form terrain: floodplain falling at S down x, the trapezoid channel
    along y = ORIGIN[1], walls from |dy| = F."""
    d = np.abs(y - ORIGIN[1])
    cut = np.clip(H - (d - B / 2) / Z, 0.0, H)
    wall = np.maximum(d - F, 0.0) / W
    return Z0 - S * (x - ORIGIN[0]) - cut + wall


def top_width(y):
    """Top width (m) at depth y above the bed (closed form, module docstring)."""
    y = np.asarray(y, float)
    return np.where(y <= H, B + 2 * Z * y, 2 * (F + W * (y - H)))


@pytest.fixture(scope="module")
def compound(tmp_path_factory):
    d = tmp_path_factory.mktemp("compound")
    x0, y0 = ORIGIN[0] - MARGIN, ORIGIN[1] - MARGIN
    w, h = int((L + 2 * MARGIN) / RES), int(2 * MARGIN / RES)
    tr = north_up(x0, y0 + h * RES, RES, RES)
    cols, rows = np.meshgrid(np.arange(w) + 0.5, np.arange(h) + 0.5)
    z = ground(x0 + cols * RES, y0 + h * RES - rows * RES)
    path = d / "dem.tif"
    with rasterio.open(path, "w", driver="GTiff", width=w, height=h, count=1, dtype="float64",
                       crs="EPSG:32633", transform=tr) as dst:
        dst.write(z, 1)
    line = shapely.LineString([ORIGIN, (ORIGIN[0] + L, ORIGIN[1])])
    streams = write_lines(d / "streams.gpkg", [line])
    return d, path, streams


def run_reaches(dem, streams, flows, tmp, **cfg_kw):
    """process_reach on every reach with the given flows; {reach_id: output}."""
    cfg = RunConfig(dem=dem, streams=streams, spacing=20.0, footprints=True, **cfg_kw)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        net = network_mod.load_network(cfg)
    out = {}
    for r in net.reaches:
        nb = net.neighbours(r, 2.0 * max(cfg.half_width, dispatch._footprint_half(cfg, r)))
        o = task.process_reach(net.raster, r, cfg, ReachInputs(flows=dict(flows)), nb)
        assert o.error is None, o.error
        out[o.reach_id] = o
    task.close_rasters()
    return out, net


def stages(o, flow):
    d = o.result.design
    d = d[(d["flow"] == flow) & (d["station"] >= 0)]
    return d["chainage"].to_numpy(float), d["stage"].to_numpy(float)


def row(o, flow):
    fp = o.footprints
    i = int(np.nonzero(fp.rows["flow"].to_numpy() == flow)[0][0])
    return fp.rows.iloc[i], fp.geometry[i]


def test_compound_channel_footprint_is_top_width_times_length(compound, tmp_path):
    d, dem, streams = compound
    outs, _ = run_reaches(dem, streams, {"low": 8.0, "high": 60.0}, tmp_path, half_width=40.0,
                          depth_grids=tmp_path)
    (o,) = outs.values()
    for flow in ("low", "high"):
        ch, st = stages(o, flow)
        y = st - (Z0 - S * ch - H)                 # depth above the closed-form bed
        assert np.ptp(y) < 0.02                    # uniform flow: one depth all along
        r, geom = row(o, flow)
        t = float(top_width(y.mean()))
        tol = RES * (L + t)                        # pixel edges (module docstring)
        assert abs(r["wet_area"] - t * L) < tol, (flow, r["wet_area"], t * L, tol)
        assert abs(geom.area - r["wet_area"]) < 1e-6 * r["wet_area"]
        assert not r["cut_by_limit"] and r["transects_cut"] == 0
    low, _ = row(o, "low")
    high, _ = row(o, "high")
    # the low flow is below bankfull: inside the banks, no cell out of bank
    assert low["out_of_bank_area"] <= RES * L     # at most one pixel row along the reach
    assert high["out_of_bank_area"] > 0.5 * high["wet_area"]


def test_depth_grid_is_stage_minus_ground_at_sampled_cells(compound, tmp_path):
    d, dem, streams = compound
    outs, _ = run_reaches(dem, streams, {"high": 60.0}, tmp_path, half_width=40.0,
                          depth_grids=tmp_path)
    (o,) = outs.values()
    (path,) = o.footprints.grids
    ch, st = stages(o, "high")
    with rasterio.open(path) as g:
        assert g.profile["tiled"] and g.profile["compress"] == "deflate"
        depth = g.read(1, masked=True)
        tr = g.transform
    r, c = np.nonzero(~np.ma.getmaskarray(depth))
    pick = np.random.default_rng(1).choice(r.size, 200, replace=False)   # any cells will do
    x, y = C.cell_centres(tr, depth.shape)[r[pick], c[pick]].T
    expected = np.interp(x - ORIGIN[0], ch, st) - ground(x, y)
    np.testing.assert_allclose(depth.data[r[pick], c[pick]], expected, atol=1e-4)
    assert (expected > 0).all()


def test_flow_over_the_transect_ends_is_widened_up_to_the_limit(compound, tmp_path):
    d, dem, streams = compound
    # transects of ±15 m end on the plain (walls at ±25 m): the high flow runs over them
    outs, _ = run_reaches(dem, streams, {"high": 60.0}, tmp_path, half_width=15.0,
                          snap_distance=5.0, footprint_max_width=80.0)
    (o,) = outs.values()
    r, _ = row(o, "high")
    assert r["transects_widened"] > 0 and r["transects_cut"] == 0 and not r["cut_by_limit"]
    ref, _ = run_reaches(dem, streams, {"high": 60.0}, tmp_path, half_width=40.0)
    r40, _ = row(ref["1"], "high")
    # widened to the walls, the same section as a transect that reaches them
    assert abs(r["wet_area"] - r40["wet_area"]) < RES * L


def test_flow_cut_by_the_limit_is_flagged_where(tmp_path):
    # an unbounded flat floodplain: a flow over bankfull spreads past any limit
    line = shapely.LineString([ORIGIN, (ORIGIN[0] + 200.0, ORIGIN[1])])
    v = make_valley_raster(tmp_path, line, res=1.0, margin=60.0)
    streams = write_lines(tmp_path / "s.gpkg", [line])
    outs, _ = run_reaches(v.path, streams, {"big": 80.0}, tmp_path, half_width=20.0,
                          footprint_max_width=100.0)
    (o,) = outs.values()
    r, geom = row(o, "big")
    assert r["cut_by_limit"] and r["transects_cut"] > 0
    assert 0.0 <= r["cut_from"] < r["cut_to"] <= 200.0 + 1.0
    assert "width limit" in r["caution"] and "left and right" in r["caution"]
    # the footprint fills the mapped width: 100 m × 200 m within pixel edges
    assert abs(geom.area - 100.0 * 200.0) < 1.0 * (200.0 + 100.0)


def test_two_reaches_meeting_share_no_cell_and_leave_no_gap(tmp_path):
    # a bend: reach A east, reach B on at 40° north of east, joined at P
    p = np.array(ORIGIN) + (150.0, 0.0)
    a = shapely.LineString([ORIGIN, tuple(p)])
    b = shapely.LineString([tuple(p), tuple(p + 150.0 * np.array([np.cos(0.7), np.sin(0.7)]))])
    grid = north_up(ORIGIN[0] - 100.0, ORIGIN[1] + 300.0, 1.0, 1.0)
    half = 50.0
    ca = _corridor_in_window(a, b, grid, half)
    cb = _corridor_in_window(b, a, grid, half)
    assert not (ca & cb).any()                               # no cell counted twice
    both = shapely.MultiLineString([a, b])
    centres = C.cell_centres(grid, (400, 500)).reshape(-1, 2)
    dist = shapely.distance(both, shapely.points(centres)).reshape(400, 500)
    free = _beyond_free_ends(a, b, centres).reshape(400, 500)
    want = (dist < half - 1.0) & ~free                       # a cell clear of the outer edge
    assert want.sum() > 20_000 and ca.sum() > 5_000 and cb.sum() > 5_000
    assert (ca | cb)[want].all()                             # ... belongs to one of the two


def _corridor_in_window(line, other, grid, half):
    """The line's ownership on the whole (400, 500) grid, computed on a window of its
    own (as a reach task reads it) and put back in place."""
    x0, y0, x1, y1 = line.buffer(half).bounds
    c0, r0 = max(int(np.floor(x0 - grid.c)), 0), max(int(np.floor(grid.f - y1)), 0)  # 1 m cells
    c1, r1 = int(np.ceil(x1 - grid.c)), int(np.ceil(grid.f - y0))
    win = north_up(grid.c + c0, grid.f - r0, 1.0, 1.0)
    cor = C.corridor(line, other, win, (r1 - r0, c1 - c0), half, 1.0, grid)
    out = np.zeros((400, 500), bool)
    out[r0:r1, c0:c1] = cor.own[: 400 - r0, : 500 - c0]
    return out


def _beyond_free_ends(a, b, xy):
    """Cells past the perpendicular at the free ends (A's start, B's end)."""
    out = np.zeros(len(xy), bool)
    for end, prev in ((a.coords[0], a.coords[1]), (b.coords[-1], b.coords[-2])):
        e, pr = np.asarray(end), np.asarray(prev)
        out |= (xy - e) @ (e - pr) > 0
    return out


def test_footprints_of_two_reaches_join_without_overlap(tmp_path):
    # one channel drawn as two reaches meeting at a bend; the flow stays in bank
    line = shapely.LineString([ORIGIN, (ORIGIN[0] + 150.0, ORIGIN[1]),
                               (ORIGIN[0] + 250.0, ORIGIN[1] + 100.0)])
    v = make_valley_raster(tmp_path, line, res=1.0, margin=60.0)
    parts = [shapely.LineString(line.coords[:2]), shapely.LineString(line.coords[1:])]
    streams = write_lines(tmp_path / "s.gpkg", parts)
    outs, _ = run_reaches(v.path, streams, {"low": 4.0}, tmp_path, half_width=20.0)
    geoms = [row(o, "low")[1] for o in outs.values()]
    assert len(geoms) == 2
    assert geoms[0].intersection(geoms[1]).area == 0.0       # no double counting
    union = shapely.union_all(geoms)
    assert union.geom_type == "Polygon"                      # one channel, no gap at the joint
    assert abs(union.area - sum(g.area for g in geoms)) < 1e-6
    # the wider neighbour search footprints need leaves every other table as it was
    cfg = RunConfig(dem=v.path, streams=streams, spacing=20.0, half_width=20.0)
    net = network_mod.load_network(cfg)
    for r in net.reaches:
        nb = net.neighbours(r, 2.0 * cfg.half_width)
        plain = task.process_reach(net.raster, r, cfg, ReachInputs(flows={"low": 4.0}), nb)
        got = outs[plain.reach_id].result
        for name in ("transects", "design", "rating"):
            pd.testing.assert_frame_equal(getattr(plain.result, name), getattr(got, name))


def test_report_map_draws_the_largest_flow_over_a_hillshade(compound, tmp_path):
    import base64

    import geopandas as gpd

    from reachgauge.results.report_maps import footprint_map_png, hillshade

    d, dem, streams = compound
    outs, _ = run_reaches(dem, streams, {"low": 8.0, "high": 60.0}, tmp_path, half_width=40.0)
    (o,) = outs.values()
    fp = gpd.GeoDataFrame(o.footprints.rows, geometry=o.footprints.geometry, crs="EPSG:32633")
    with rasterio.open(dem) as g:
        z, b = g.read(1), g.bounds
    shade = hillshade(z, RES)
    # a plane is evenly lit (Lambert: one value): the plain between bank and wall,
    # rows 8 to 23 m left of the centre line ((MARGIN - dy) / RES)
    plain = shade[int((MARGIN - 22) / RES):int((MARGIN - 9) / RES), 5:-5]
    assert np.ptp(plain) < 1e-6 and np.ptp(shade) > 0.1
    uri = footprint_map_png(fp, shade, (b.left, b.right, b.bottom, b.top))
    assert base64.b64decode(uri.split(",", 1)[1])[:8] == b"\x89PNG\r\n\x1a\n"


def test_depth_grids_of_an_earlier_run_are_not_replaced_unasked(compound, tmp_path, capsys):
    from reachgauge.cli import main

    d, dem, streams = compound
    flows = tmp_path / "flows.csv"
    flows.write_text("reach_id,flow,discharge\n1,high,60\n")
    old = tmp_path / "grids" / "depth_high_1.tif"
    old.parent.mkdir()
    old.write_bytes(b"earlier")
    args = ["run", "--dem", str(dem), "--streams", str(streams), "--out",
            str(tmp_path / "r.gpkg"), "--design-flows", str(flows), "--depth-grids",
            str(old.parent)]
    assert main(args) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "--overwrite" in err[0] and old.read_bytes() == b"earlier"
    assert main(args + ["--overwrite"]) == 0
    with rasterio.open(old) as g:          # replaced by a whole GeoTIFF, nothing left beside it
        assert g.count == 1
    assert sorted(p.name for p in old.parent.iterdir()) == ["depth_high_1.tif"]
    assert main(["run", "--dem", str(dem), "--streams", str(streams), "--out",
                 str(tmp_path / "s.gpkg"), "--depth-grids", str(tmp_path / "none")]) == 2
    assert "is not a folder" in capsys.readouterr().err
