"""No channel, no confident figure (issue 9): terrain with no channel of our own making
(V valleys, a tilted plane, kettle-like bowls), real terrain from a registry package
(matplotlib's Jacksboro fault DEM), a clear channel as the positive control, and unit
checks of the flags the tool adds (supercritical flow, zero depth, closed hollows,
isolated picks, picks at a transect end) and of the reach's verdict.

What "trusted" means is the tool's own definition (reachgauge.hydraulics.trust): a
pick whose figures are published with confidence high or medium. The checks here are
that terrain with no channel never gets one, that the reach says why instead of
printing medians, and that a channel of known shape still does.
"""

import numpy as np
import pandas as pd
import pyogrio
import pytest
import rasterio
import shapely

import reachgauge
import terrain_fixtures as tf
from reachgauge import flags
from reachgauge.hydraulics import trust
from reachgauge.hydraulics.bankfull import pick_bankfull
from section_fixtures import compound_channel, v_valley

pytestmark = pytest.mark.filterwarnings("ignore::RuntimeWarning")

X0, Y0 = tf.ORIGIN
TRUSTED = ("high", "medium")
# lidar-like scatter (m): of the order of the vertical accuracy of lidar on open ground
# (REFERENCES.md: RMSE about 0.17-0.26 m in one study; bare, flat ground is better)
NOISE = 0.03


# ------------------------------------------------------------------ terrain makers
def grid(size, res):
    """Pixel-centre coordinates (m, from the raster's south-west corner) of a square
    raster of ``size`` pixels of ``res`` m, north row first."""
    c = (np.arange(size) + 0.5) * res
    return np.meshgrid(c, c[::-1])


def write_dem(path, z, res, origin=(X0, Y0), crs="EPSG:32633"):
    h, w = z.shape
    with rasterio.open(path, "w", driver="GTiff", width=w, height=h, count=1, dtype="float32",
                       crs=crs, transform=tf.north_up(origin[0], origin[1] + h * res, res, res),
                       nodata=-9999.0) as dst:
        dst.write(z.astype("float32"), 1)
    return path


def v_valley_dem(d, seed, side=0.3):
    """A V valley down the y axis: ground rises ``side`` per metre either side of x =
    200 m and falls 1 % down-valley; no floodplain anywhere (a gully)."""
    xx, yy = grid(400, 1.0)
    z = 100 + side * np.abs(xx - 200) + 0.01 * yy
    z += np.random.default_rng(seed).normal(0, NOISE, z.shape)
    return write_dem(d / f"v{side}.tif", z, 1.0)


def plane_dem(d, seed):
    """A plain hillslope: a plane rising 5 % to the north and 1 % to the east."""
    xx, yy = grid(400, 1.0)
    z = 100 + 0.05 * yy + 0.01 * xx + np.random.default_rng(seed).normal(0, NOISE, xx.shape)
    return write_dem(d / "plane.tif", z, 1.0)


# closed depressions (centre x, y, radius, depth; m) on a plain falling 0.2 % to the south
BOWLS = [(200, 300, 30, 4.0), (200, 200, 20, 3.0), (205, 110, 35, 6.0)]


def kettle_dem(d, seed):
    """Kettle-like terrain: paraboloid bowls with no outlet in a gently sloping plain,
    and no channel anywhere."""
    xx, yy = grid(400, 1.0)
    z = 100 + 0.002 * yy + np.random.default_rng(seed).normal(0, NOISE, xx.shape)
    for cx, cy, r, depth in BOWLS:
        z -= depth * np.clip(1 - ((xx - cx) ** 2 + (yy - cy) ** 2) / r ** 2, 0, None)
    return write_dem(d / "kettle.tif", z, 1.0)


def run(d, name, dem, lines, **kw):
    """The whole tool on ``lines``; returns (transects, reaches, summary lines)."""
    streams = tf.write_lines(d / f"{name}.gpkg", lines,
                             fields={"rid": [f"{name}{i}" for i in range(len(lines))]},
                             crs=kw.pop("crs", "EPSG:32633"))
    out = d / f"{name}.out.gpkg"
    summary = reachgauge.run(out, dem=str(dem), streams=str(streams), id_field="rid",
                             overwrite=True, jobs=1, **kw)
    tr = pyogrio.read_dataframe(out, layer="transects", read_geometry=False)
    rc = pyogrio.read_dataframe(out, layer="reaches", read_geometry=False)
    return tr, rc, summary.lines()


def down_y(x, y0=360.0, y1=40.0):
    return shapely.LineString([(X0 + x, Y0 + y0), (X0 + x, Y0 + y1)])


def assert_nothing_trusted(tr, rc):
    """No section of the run is ok and trusted with a bankfull figure; every ok
    transect whose figure is withheld says why with a "do not use" flag; every reach
    that has sections says why it has no bankfull figures."""
    ok = tr["status"] == "ok"
    trusted = ok & tr["confidence"].isin(TRUSTED) & tr["discharge"].notna()
    assert not trusted.any(), tr.loc[trusted, ["reach_id", "station", "confidence", "flags"]]
    withheld = ok & tr["discharge"].isna()
    assert (tr.loc[withheld, "confidence"] == "none").all()
    assert (tr.loc[withheld, "bankfull_method"] == "none").all()
    assert flags.contains_any(tr.loc[withheld, "flags"].to_numpy(object), flags.WITHHELD).all()
    for col in ("bankfull_stage", "bankfull_depth", "top_width", "bank_left", "velocity"):
        assert tr.loc[withheld, col].isna().all(), col
    published = ok & tr["discharge"].notna()
    # a published figure that is not trusted carries the flag that says why
    assert tr.loc[published, "flags"].str.len().gt(0).all()
    assert set(rc["status"]) <= {"bankfull-unsupported", "no-sections"}, rc[["reach_id", "status"]]
    unsupported = rc["status"] == "bankfull-unsupported"
    assert rc.loc[unsupported, "message"].str.contains("trusted bankfull pick").all()
    for col in ("bankfull_depth", "top_width", "discharge", "velocity"):
        assert rc[col].isna().all(), col


# ------------------------------------------------------ terrain with no channel
@pytest.mark.parametrize("seed", [0, 1])
@pytest.mark.parametrize("side", [0.1, 0.3])
def test_v_valley_gets_no_bankfull_figure_and_the_reach_says_why(tmp_path, seed, side):
    tr, rc, lines = run(tmp_path, "v", v_valley_dem(tmp_path, seed, side), [down_y(200.0)],
                        half_width=30.0)
    assert_nothing_trusted(tr, rc)
    assert (tr["status"] == "ok").all()
    # a V has no floodplain: every section lacks a break and gets no figure
    assert flags.contains(tr["flags"].to_numpy(object), "no-clear-break").all()
    assert rc["status"].tolist() == ["bankfull-unsupported"]
    assert "no-clear-break" in rc["message"].iloc[0]
    assert rc["transects_trusted"].tolist() == [0]
    assert any("0 with a trusted bankfull pick" in x for x in lines)
    assert any(x.startswith("no bankfull figure (do not use): no-clear-break") for x in lines)


@pytest.mark.parametrize("seed", [0, 1])
def test_plain_hillslope_gets_no_bankfull_figure(tmp_path, seed):
    # down the fall line (transects along the contour) and along the contour
    # (transects down the slope: no ground above the thalweg on the downhill side)
    down = down_y(200.0)
    across = shapely.LineString([(X0 + 50, Y0 + 200), (X0 + 350, Y0 + 200)])
    tr, rc, _ = run(tmp_path, "p", plane_dem(tmp_path, seed), [down, across], half_width=30.0)
    assert_nothing_trusted(tr, rc)
    status = dict(zip(rc["reach_id"], rc["status"]))
    assert status == {"p0": "bankfull-unsupported", "p1": "no-sections"}
    assert (tr.loc[tr["reach_id"] == "p1", "status"] == "no-depth").all()


@pytest.mark.parametrize("seed", [0, 1])
def test_kettle_bowls_are_closed_hollows_not_channels(tmp_path, seed):
    tr, rc, _ = run(tmp_path, "k", kettle_dem(tmp_path, seed), [down_y(200.0)], half_width=50.0)
    assert_nothing_trusted(tr, rc)
    assert rc["status"].tolist() == ["bankfull-unsupported"]
    # the transects through the middle of each bowl (within half its radius of the
    # centre along the line) sit in a closed hollow
    y = 360.0 - tr["chainage"].to_numpy(float)
    hollow = flags.contains(tr["flags"].to_numpy(object), "closed-hollow")
    for _cx, cy, r, _d in BOWLS:
        inner = np.abs(y - cy) < 0.5 * r
        assert inner.any()
        got = hollow[inner] | (tr["confidence"].to_numpy(object)[inner] == "none")
        assert got.all(), tr.loc[inner, ["station", "confidence", "flags"]]
    assert "closed-hollow" in rc["message"].iloc[0]


# ------------------------------------------------------------- positive control
def test_clear_channel_keeps_ok_and_trusted_figures(tmp_path):
    line = tf.straight_line(300.0)
    v = tf.make_valley_raster(tmp_path, line, noise=0.02, seed=3)   # defaults: b 6, y 1.5, z 2
    tr, rc, lines = run(tmp_path, "c", v.path, [line], half_width=30.0)
    assert rc["status"].tolist() == ["ok"]
    assert (tr["status"] == "ok").all()
    assert tr["confidence"].isin(TRUSTED).all()
    assert (tr["bankfull_method"] == "bank-top").all()
    assert tr["discharge"].notna().all()
    assert not flags.contains_any(tr["flags"].to_numpy(object), flags.WITHHELD).any()
    assert int(rc["transects_trusted"].iloc[0]) == len(tr)
    # the reach's figures are the medians of the trusted picks (all of them here)
    assert rc["discharge"].iloc[0] == pytest.approx(float(np.median(tr["discharge"])))
    # built bank height 1.5 m: the pick is read over one break rise, max(5 cm, 3σ) with
    # σ = 2 cm here, so it lies within two of them (0.12 m) of the bank top
    assert rc["bankfull_depth"].iloc[0] == pytest.approx(v.bank_height, abs=0.12)
    assert not any(x.startswith("no bankfull figure") for x in lines)
    assert any(f"{len(tr)} with a trusted bankfull pick" in x for x in lines)


# ------------------------------------------------------------------ real terrain
# matplotlib (PyPI package, sample data): the Jacksboro fault DEM, elevations in metres on
# a grid of 3 arc-seconds (dx = dy = 0.000833°, about 74 m east-west by 92 m north-south
# at 36.6° N; not 10 m). The CRS below (UTM 16N, where the data lies) and the placement
# of the grid in it are assigned for this test, not the data's own georeferencing: the
# pixel size in metres comes from the data's degrees.
#
# Valley bottoms: the main stems of the six largest drainage areas of this DEM, as D8
# flow paths (O'Callaghan & Mark 1984 [memory]; steepest descent to the lowest of the
# 8 neighbours), traced once and simplified to these vertices (row, col), upstream
# first; the test checks they fall downstream. Hillslopes: straight lines along and
# down slopes (the NW flank of the fault escarpment; a plateau).
STEMS = [[(190, 159), (189, 165), (193, 171), (193, 178), (198, 185), (213, 184), (217, 181)],
         [(286, 31), (272, 34), (264, 27), (256, 26), (252, 28)],
         [(254, 223), (250, 226), (250, 235), (261, 254), (259, 257)],
         [(298, 220), (308, 207), (308, 204), (299, 195), (294, 194)],
         [(114, 150), (113, 155), (118, 160), (121, 160), (135, 147), (139, 135)],
         [(286, 216), (286, 224), (283, 227), (280, 242), (273, 246)]]
HILLSLOPES = [[(60, 150), (110, 230)], [(90, 215), (110, 195)], [(20, 260), (20, 380)]]


@pytest.fixture(scope="module")
def jacksboro(tmp_path_factory):
    from matplotlib import cbook

    d = tmp_path_factory.mktemp("jacksboro")
    dem = cbook.get_sample_data("jacksboro_fault_dem.npz")
    z = dem["elevation"].astype("float32")
    lat = 0.5 * (float(dem["ymin"]) + float(dem["ymax"]))
    # degrees to metres on the WGS 84 ellipsoid near this latitude: 111.32 km per degree of
    # longitude at the equator times cos(lat); 110.95 km per degree of latitude near 36°
    # (standard geodesy, to 0.1 %)
    dx = float(dem["dx"]) * 111_320.0 * np.cos(np.radians(lat))
    dy = float(dem["dy"]) * 110_950.0
    h, w = z.shape
    x0, y0 = 700_000.0, 4_050_000.0
    path = d / "jacksboro.tif"
    with rasterio.open(path, "w", driver="GTiff", width=w, height=h, count=1, dtype="float32",
                       crs="EPSG:32616", transform=tf.north_up(x0, y0 + h * dy, dx, dy),
                       nodata=-9999.0) as dst:
        dst.write(z, 1)

    def line(rc):
        return shapely.LineString([(x0 + (c + 0.5) * dx, y0 + h * dy - (r + 0.5) * dy)
                                   for r, c in rc])

    lines = [line(s) for s in STEMS + HILLSLOPES]
    names = [f"v{i}" for i in range(len(STEMS))] + [f"h{i}" for i in range(len(HILLSLOPES))]
    streams = tf.write_lines(d / "streams.gpkg", lines, crs="EPSG:32616", fields={"rid": names})
    out = d / "out.gpkg"
    # what a user of a ~80 m DEM would set: transects reaching across the valley floors,
    # stations a few pixels apart, the thalweg sought within two pixels of the line
    reachgauge.run(out, dem=str(path), streams=str(streams), id_field="rid", overwrite=True,
                   jobs=1, spacing=200.0, half_width=1000.0, snap_distance=150.0)
    tr = pyogrio.read_dataframe(out, layer="transects", read_geometry=False)
    rc = pyogrio.read_dataframe(out, layer="reaches", read_geometry=False)
    return z, tr, rc


def test_jacksboro_stems_follow_valley_bottoms(jacksboro):
    z = jacksboro[0]
    for stem in STEMS:
        elev = np.array([z[r, c] for r, c in stem], dtype=float)
        assert np.all(np.diff(elev) <= 0), elev


def test_jacksboro_dem_gets_no_confident_bankfull_figure(jacksboro):
    # at ~80 m pixels no channel is resolved: what the methods find are valleys, and
    # nothing the tool publishes may be a trusted bankfull figure
    _z, tr, rc = jacksboro
    assert (tr["status"] == "ok").sum() > 50           # the run did read sections
    assert_nothing_trusted(tr, rc)
    # the valley-scale "channels" it does publish are flagged and rated low
    published = (tr["status"] == "ok") & tr["discharge"].notna()
    assert (tr.loc[published, "confidence"] == "low").all()


# ----------------------------------------------------------- unit checks of the flags
def test_supercritical_flag_is_froude_above_one():
    # critical flow is Fr = 1 (Chow 1959, Open-Channel Hydraulics, §3-3 [memory]);
    # NaN (no figure) is not flagged
    fr = np.array([0.3, 1.0, 1.0 + 1e-9, 2.5, np.nan])
    assert trust.supercritical(fr).tolist() == [False, False, True, True, False]


@pytest.mark.parametrize("slope, supercritical", [(0.05, True), (0.002, False)])
def test_steep_channel_is_flagged_supercritical_and_not_trusted(tmp_path, slope, supercritical):
    # closed form for the default trapezoid (b = 6 m, y = 1.5 m, z = 2; REFERENCES.md):
    # A = (b + z y) y = 13.5 m², P = b + 2 y √(1 + z²), T = b + 2 z y, D = A / T;
    # Manning V = R^(2/3) S^(1/2) / n, Fr = V / √(g D): 2.0 at S = 0.05, 0.40 at 0.002
    b, y, zz, n, g = 6.0, 1.5, 2.0, 0.035, 9.80665
    area, per, top = (b + zz * y) * y, b + 2 * y * np.hypot(1, zz), b + 2 * zz * y
    fr = (area / per) ** (2 / 3) * slope ** 0.5 / n / np.sqrt(g * area / top)
    assert (fr > 1) == supercritical
    line = tf.straight_line(300.0)
    v = tf.make_valley_raster(tmp_path, line, noise=0.02, seed=3, valley_slope=slope)
    tr, rc, _ = run(tmp_path, "s", v.path, [line], half_width=30.0, n=n)
    flagged = flags.contains(tr["flags"].to_numpy(object), "supercritical")
    if supercritical:
        assert flagged.all() and (tr["froude"] > 1).all()
        assert (tr["confidence"] == "low").all()
        assert rc["status"].tolist() == ["bankfull-unsupported"]
        assert "supercritical" in rc["message"].iloc[0]
    else:
        assert not flagged.any() and rc["status"].tolist() == ["ok"]


class _Picks:
    """The parts of a bankfull Picks that trust.assess reads."""

    def __init__(self, stage, thalweg, left, right, confidence="high", published=True):
        t = len(stage)
        self.stage = np.asarray(stage, float)
        self.left_bank, self.right_bank = np.asarray(left, float), np.asarray(right, float)
        self.confidence = np.full(t, confidence, dtype=object)
        self.published = np.full(t, published)
        self.profiles = type("P", (), {"thalweg": np.asarray(thalweg, float)})()


def test_zero_or_negative_bankfull_depth_is_withheld():
    # depth = stage - thalweg (DESIGN.md): 1 m, 0, -0.2 m; and banks with no width between
    picks = _Picks(stage=[101.0, 100.0, 99.8, 101.0], thalweg=[100.0] * 4,
                   left=[0, 0, 0, 5.0], right=[10, 10, 10, 5.0])
    ok = np.ones(4, bool)
    got = trust.assess(picks, ok, chainage=[0, 20, 40, 60], bed=[100.0] * 4,
                       snap_far=np.zeros(4, bool))
    assert got.zero_depth.tolist() == [False, True, True, True]
    assert got.published.tolist() == [True, False, False, False]
    # the one published pick has no neighbour with a figure: isolated, so rated low
    assert got.isolated.tolist() == [True, False, False, False]
    assert got.confidence.tolist() == ["low", "none", "none", "none"]
    assert flags.severity("zero-depth") == "do not use"


def test_closed_hollow_bowl_channel_and_dam():
    c = np.arange(0.0, 200.0, 20.0)
    # a channel 1.5 m deep, 13 m wide, its bed falling 0.002 downstream: never closed
    bed = 100.0 - 0.002 * c
    stage, depth, width = bed + 1.5, np.full(c.size, 1.5), np.full(c.size, 13.0)
    cand = np.ones(c.size, bool)
    assert not trust.closed_hollow(c, bed, stage, depth, width, cand).any()
    # ... with a road shown as a dam at station 6: closed downstream only, still a channel
    dammed = bed.copy()
    dammed[6] += 3.0
    assert not trust.closed_hollow(c, dammed, stage, depth, width, cand).any()
    # a bowl 4 m deep and 50 m wide over stations 4-5 in a plain: closed both ways within
    # 40 m (< 5 widths)
    plain = np.full(c.size, 100.0)
    bowl = plain.copy()
    bowl[4:6] = 96.0
    st = np.full(c.size, 100.0)
    got = trust.closed_hollow(c, bowl, st, st - bowl, np.full(c.size, 50.0), bowl < 100)
    assert got.tolist() == [i in (4, 5) for i in range(c.size)]
    # the same bowl at a reach end is open on that side: not closed
    end = plain.copy()
    end[0:2] = 96.0
    assert not trust.closed_hollow(c, end, st, st - end, np.full(c.size, 50.0), end < 100).any()
    # a long depression (closed 200 m apart, > 5 widths of 13 m) is no hollow
    long = plain.copy()
    long[1:9] = 98.5
    assert not trust.closed_hollow(c, long, st, st - long, np.full(c.size, 13.0), long < 100).any()


def test_isolated_pick_needs_a_neighbour_with_a_section():
    pub = np.array([False, True, False, True, True, False, True])
    ok = np.array([True, True, True, True, True, False, True])
    # 1: ok neighbours without picks -> isolated; 3, 4 confirm each other; 6: its only
    # neighbour has no section -> no evidence either way
    assert trust.isolated(pub, ok).tolist() == [False, True, False, False, False, False, False]


def test_pick_limited_by_a_transect_end_is_flagged_and_low():
    syn = compound_channel(noise=0.02, seed=1)
    whole = pick_bankfull(syn.section)
    assert "break-at-end" not in whole.flags and whole.confidence in TRUSTED
    # the same section cut at its left bank top: the left bank is the transect's end
    x, z = syn.section.offset, syn.section.elevation
    keep = x >= syn.bank_offsets[0]
    cut = reachgauge.CrossSection(x[keep], z[keep])
    pick = pick_bankfull(cut)
    if pick.source == "bank-top":
        assert "break-at-end" in pick.flags and pick.confidence == "low"
    else:  # no break of its own: a fallback with no confidence
        assert pick.confidence == "none"
    assert flags.severity("break-at-end") == "check"


def test_bankfull_method_names_the_fallback_that_gave_the_stage():
    syn = v_valley(noise=0.05, seed=0)
    pick = pick_bankfull(syn.section)
    assert pick.method == "bank-top"
    assert pick.source == pick.fallback and pick.source in ("methods-median", "profile-end")
    assert pick.confidence == "none" and "no-clear-break" in pick.flags


def test_reach_verdict_needs_a_majority_of_trusted_picks():
    status = np.array(["ok"] * 4, dtype=object)
    text = np.array(["", "", "no-clear-break", "closed-hollow"], dtype=object)
    # 2 of 4: not more than half -> no reach figures, and the reasons are counted
    s, msg = trust.verdict(np.array([True, True, False, False]), status, text, 4)
    assert s == "bankfull-unsupported"
    assert "2 of 4" in msg and "1 no-clear-break" in msg and "1 closed-hollow" in msg
    assert trust.verdict(np.array([True, True, True, False]), status, text, 4) == ("ok", "")


def test_every_flag_has_a_severity():
    assert set(flags.SEVERITY) <= set(flags.FLAGS)
    assert {flags.severity(c) for c in flags.FLAGS} <= set(flags.SEVERITIES)
    assert flags.WITHHELD == {"no-clear-break", "zero-depth", "closed-hollow", "off-channel"}
    table = flags.markdown()
    assert "| `closed-hollow` | do not use |" in table


def test_the_gravest_flag_of_a_section_sets_its_count():
    # the run's summary counts sections by their gravest flag; design-flow results
    # (out-of-bank, over-profile, stage-at-jump) are results, not doubts
    assert flags.worst("") is None
    assert flags.worst("out-of-bank;over-profile") is None
    assert flags.worst("shortened;out-of-bank") == "information"
    assert flags.worst("shortened;methods-disagree") == "check"
    assert flags.worst("methods-disagree;zero-depth;shortened") == "do not use"


def test_withheld_transects_are_left_out_of_the_reach_figures(tmp_path):
    # a clear channel whose downstream third runs into a V gully: the gully's sections
    # get no figure and the reach's medians are those of the channel's trusted picks
    line = tf.straight_line(300.0)
    v = tf.make_valley_raster(tmp_path, line, noise=0.02, seed=3)
    with rasterio.open(v.path) as ds:
        z = ds.read(1)
        tr_ = ds.transform
        prof = ds.profile
    rows, cols = np.indices(z.shape)
    xs = tr_.c + (cols + 0.5) * tr_.a
    ys = tr_.f + (rows + 0.5) * tr_.e
    dist = np.abs(ys - Y0)
    gully = xs > X0 + 200.0
    z = np.where(gully, v.z0 - v.valley_slope * (xs - X0) - 1.5 + 0.3 * dist, z)
    with rasterio.open(v.path, "w", **prof) as dst:
        dst.write(z.astype(prof["dtype"]), 1)
    tr, rc, _ = run(tmp_path, "g", v.path, [line], half_width=30.0)
    in_gully = tr["chainage"] > 215.0       # a smoothing half-length past the change
    assert (tr.loc[in_gully, "confidence"] == "none").all()
    assert tr.loc[in_gully, "discharge"].isna().all()
    trusted = tr["confidence"].isin(TRUSTED)
    assert trusted.sum() > len(tr) / 2 and rc["status"].tolist() == ["ok"]
    assert rc["discharge"].iloc[0] == pytest.approx(
        float(np.median(tr.loc[trusted, "discharge"])))
    assert int(rc["transects_trusted"].iloc[0]) == int(trusted.sum())
    assert pd.isna(tr.loc[in_gully, "bank_left"]).all()
