"""The demo basin (sample_data/basin): the generator reproduces the committed
files, and the files hold what the scenario promises.

Each number is checked against something outside the generator where one
exists: Chow's (1959) table as encoded in the fluids package, Manning's
equation in fluids, the Arcement & Schneider (1989) Cowan ranges, the
closed-form channel section (a trapezoid over a parabolic bed), and the
Bessel-function sinuosity of the sine-generated curve (scipy). truth.json says what the generator built. The
tests use it only as a sanity check of the demo, never as a reference.
"""

from __future__ import annotations

import importlib.util
import json
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

import geopandas as gpd  # noqa: E402  (core dependencies of the package)
import rasterio  # noqa: E402
import shapely  # noqa: E402


@pytest.fixture(scope="module")
def fluids_open_flow():
    """The reference library, only for the tests that use it."""
    return pytest.importorskip("fluids.open_flow")

from hypothesis import given, settings  # noqa: E402
from hypothesis import strategies as st  # noqa: E402
from scipy.ndimage import map_coordinates  # noqa: E402
from scipy.special import j0  # noqa: E402

from reachgauge import CrossSection  # noqa: E402
from reachgauge.config import read_toml  # noqa: E402
from reachgauge.settings import from_mapping  # noqa: E402

ROOT = Path(__file__).resolve().parents[1]
GENERATOR = ROOT / "sample_data" / "make_basin.py"
BASIN = ROOT / "sample_data" / "basin"
FILES = ("terrain.tif", "landcover.tif", "streams.gpkg", "landcover_n.csv", "design_flows.csv",
         "observations.csv", "cowan.csv", "truth.json", "config.toml", "regional_curves.csv")


def load_generator():
    spec = importlib.util.spec_from_file_location("make_basin", GENERATOR)
    module = importlib.util.module_from_spec(spec)
    sys.modules["make_basin"] = module  # dataclasses look their module up here
    spec.loader.exec_module(module)
    return module


@pytest.fixture(scope="module")
def gen():
    return load_generator()


@pytest.fixture(scope="module")
def plan(gen):
    return gen.build_planform()


@pytest.fixture(scope="module")
def truth():
    return json.loads((BASIN / "truth.json").read_text(encoding="utf-8"))


@pytest.fixture(scope="module")
def dem():
    with rasterio.open(BASIN / "terrain.tif") as src:
        z = src.read(1).astype(float)
        z[z == src.nodata] = np.nan
        return z, src.transform


@pytest.fixture(scope="module")
def streams():
    return gpd.read_file(BASIN / "streams.gpkg", layer="streams", engine="pyogrio")


def read_csv(name):
    import pandas as pd

    return pd.read_csv(BASIN / name, comment="#")   # a '# units:' line may head the file


def sample(dem, x, y, order=1):
    """DEM at map coordinates: bilinear (order 1) or nearest pixel (order 0),
    pixel centres at (col + 0.5, row + 0.5) of the affine transform."""
    z, t = dem
    col = (np.asarray(x) - t.c) / t.a - 0.5
    row = (np.asarray(y) - t.f) / t.e - 0.5
    return map_coordinates(z, [row, col], order=order, mode="nearest")


def arc_length(xy):
    return np.concatenate([[0.0], np.cumsum(np.hypot(*np.diff(xy, axis=0).T))])


def station(xy, chainage):
    """Point and unit right-hand normal (looking downstream) at a chainage of a line."""
    s = arc_length(xy)
    p = np.array([np.interp(chainage, s, xy[:, 0]), np.interp(chainage, s, xy[:, 1])])
    t = np.array([np.interp(chainage, s, np.gradient(xy[:, 0])),
                  np.interp(chainage, s, np.gradient(xy[:, 1]))])
    t /= np.hypot(*t)
    return p, np.array([t[1], -t[0]])


# ------------------------------------------------------------ reproduction
@pytest.fixture(scope="module")
def regenerated(tmp_path_factory):
    out = tmp_path_factory.mktemp("basin")
    done = subprocess.run([sys.executable, str(GENERATOR), "--out", str(out)],
                          capture_output=True, text=True, timeout=120)
    assert done.returncode == 0, done.stderr
    return out


def listing(folder):
    # GDAL may leave *.aux.xml side files next to a raster it has opened; they are not ours
    return sorted(p.name for p in folder.iterdir() if not p.name.endswith(".aux.xml"))


def test_generator_writes_the_same_file_set(regenerated):
    assert listing(regenerated) == sorted(FILES)
    assert listing(BASIN) == sorted(FILES)


@pytest.mark.parametrize("name", ["terrain.tif", "landcover.tif"])
def test_generator_reproduces_rasters(regenerated, name):
    with rasterio.open(BASIN / name) as a, rasterio.open(regenerated / name) as b:
        assert a.profile == b.profile  # dtype, size, CRS, transform, nodata, tiling, compression
        assert a.crs == b.crs and a.transform == b.transform
        assert a.tags() == b.tags()
        assert a.tags(ns="IMAGE_STRUCTURE") == b.tags(ns="IMAGE_STRUCTURE")   # incl. predictor
        np.testing.assert_array_equal(a.read(1), b.read(1))


def test_generator_reproduces_streams(regenerated, streams):
    import pandas as pd

    again = gpd.read_file(regenerated / "streams.gpkg", layer="streams", engine="pyogrio")
    assert again.crs == streams.crs
    pd.testing.assert_frame_equal(pd.DataFrame(again.drop(columns="geometry")),
                                  pd.DataFrame(streams.drop(columns="geometry")))
    assert shapely.equals_exact(again.geometry.values, streams.geometry.values, 0.0).all()


@pytest.mark.parametrize("name", ["landcover_n.csv", "design_flows.csv", "observations.csv",
                                  "cowan.csv", "truth.json", "config.toml",
                                  "regional_curves.csv"])
def test_generator_reproduces_tables(regenerated, name):
    assert (regenerated / name).read_bytes() == (BASIN / name).read_bytes()


def test_committed_files_are_small():
    total = sum((BASIN / name).stat().st_size for name in FILES)
    assert total < 4_000_000, f"sample_data/basin is {total / 1e6:.2f} MB"


# ------------------------------------------------------------- the rasters
def test_terrain_format():
    with rasterio.open(BASIN / "terrain.tif") as src:
        assert src.count == 1 and src.dtypes[0] == "float32"
        assert src.crs.to_epsg() == 32632 and src.crs.is_projected
        assert src.res == (2.0, 2.0)
        assert src.nodata == -9999
        assert src.compression.name.lower() == "deflate"
        assert src.tags(ns="IMAGE_STRUCTURE")["PREDICTOR"] == "3"   # floating-point predictor
        assert src.profile["tiled"] and src.block_shapes[0] == (256, 256)
        b = src.bounds
        assert 420_000 <= b.left < b.right <= 423_000
        assert 5_119_000 <= b.bottom < b.top <= 5_121_000
        # about 2.4 km × 1.6 km
        assert (b.right - b.left) == pytest.approx(2400, abs=200)
        assert (b.top - b.bottom) == pytest.approx(1600, abs=200)
        z = src.read(1)
    valid = z[z != -9999].astype(np.float64)
    # quantised to 0.01 m; float32 keeps about 1.5e-5 m near 215 m
    assert np.abs(valid * 100 - np.round(valid * 100)).max() < 0.01


def test_nodata_patch_is_small_and_at_an_edge():
    with rasterio.open(BASIN / "terrain.tif") as src:
        gap = src.read(1) == src.nodata
    assert 0 < gap.mean() < 0.01
    assert gap[:, 0].any() or gap[:, -1].any() or gap[0].any() or gap[-1].any()


def test_landcover_grid_classes_and_nodata():
    with rasterio.open(BASIN / "landcover.tif") as lc, rasterio.open(BASIN / "terrain.tif") as t:
        assert lc.dtypes[0] == "uint8" and lc.nodata == 0
        assert lc.crs == t.crs and lc.bounds == t.bounds
        classes, z = lc.read(1), t.read(1)
    table = read_csv("landcover_n.csv")
    assert set(np.unique(classes)) <= set(table["class"]) | {0}
    np.testing.assert_array_equal(classes == 0, z == -9999)


def test_landcover_marks_channels_and_road(plan, truth):
    with rasterio.open(BASIN / "landcover.tif") as lc:
        classes = lc.read(1).astype(float)
        grid = (classes, lc.transform)
    for rid, xy in plan.reach_lines.items():
        on_line = sample(grid, xy[::20, 0], xy[::20, 1], order=0)
        assert np.mean(on_line == 1) > 0.95, rid      # the channel class along the channel
    x, y = truth["embankment"]["xy"]
    assert sample(grid, [x], [y], order=0)[0] == 7     # the road over the culvert


def test_noise_level_follows_cover(dem):
    # White noise of SD σ gives second differences of SD σ √6 (a smooth surface
    # adds almost nothing at a 2 m step). The expected levels are the design:
    # 3–5 cm on open ground, more under timber (truth.json, noise_sd_m_by_class).
    z, _ = dem
    with rasterio.open(BASIN / "landcover.tif") as lc:
        classes = lc.read(1)
    d2 = z[:, 2:] - 2 * z[:, 1:-1] + z[:, :-2]
    cls = classes[:, 1:-1]
    same = (classes[:, 2:] == cls) & (classes[:, :-2] == cls)
    robust_sd = {}
    for c in (2, 3, 6):
        v = d2[same & (cls == c) & np.isfinite(d2)]
        # MAD-based SD (1.4826: the normal-consistency constant, common practice)
        # ignores the pits, spikes and breaks of slope
        robust_sd[c] = 1.4826 * np.median(np.abs(v - np.median(v))) / np.sqrt(6)
    assert 0.03 <= robust_sd[2] <= 0.05
    assert 0.03 <= robust_sd[3] <= 0.06
    assert robust_sd[6] > 2 * robust_sd[2]


# --------------------------------------------------- the channels in the DEM
def usable_chainages(rid, length, truth):
    """Stations along a reach away from its ends, the road and the flattened stretch."""
    out = []
    for c in np.linspace(60.0, length - 60.0, 9):
        emb, flat = truth["embankment"], truth["hydro_flattened"]
        if rid == emb["reach_id"] and abs(c - emb["chainage_m"]) < 40:
            continue
        if (rid == flat["reach_id"]
                and flat["chainage_from_m"] - 30 < c < flat["chainage_to_m"] + 30):
            continue
        out.append(c)
    return out


def channel_section(r, y):
    """Closed-form area, wetted perimeter and top width at depth y above the
    thalweg (y >= bed_dip): a trapezoid of bottom width b and side slope z over a
    parabolic bed segment of sag δ. The segment's area is 2/3 of its bounding
    rectangle (Archimedes). Its arc length is (b²/8δ)[U√(1+U²) + asinh U],
    U = 4δ/b (calculus, checked against quadrature below)."""
    b, z, dip = r["bottom_width"], r["side_slope"], r["bed_dip"]
    yt = y - dip
    u = 4 * dip / b
    arc = b * b / (8 * dip) * (u * np.sqrt(1 + u * u) + np.arcsinh(u)) if dip > 1e-9 else b
    return ((b + z * yt) * yt + 2 / 3 * b * dip, arc + 2 * yt * np.sqrt(1 + z * z),
            b + 2 * z * yt)


def test_parabola_arc_length_against_quadrature():
    from scipy.integrate import quad

    for b, dip in ((9.5, 0.15), (5.2, 0.10), (3.0, 1.0)):
        ref = quad(lambda x: np.sqrt(1 + (8 * dip * x / b**2) ** 2), -b / 2, b / 2)[0]
        r = {"bottom_width": b, "side_slope": 2.0, "bed_dip": dip}
        assert channel_section(r, dip)[1] == pytest.approx(ref, rel=1e-12)


def test_dem_sections_are_the_true_channels(plan, truth, dem):
    # Closed-form section (channel_section): trapezoid over a parabolic bed.
    # Bilinear sampling of 2 m pixels rounds the section's corners over about
    # one pixel. At the bank top that widens the water surface, and at the toe it
    # fills the bottom a little. So the top width is checked at mid-depth, away
    # from both corners, and the area near bankfull, where the corners' share is
    # small. Noise of 3–4 cm and the odd pit move single sections. Tolerances:
    # per-reach median within 5 % (area) and 0.3 m (top width, 0.15 pixel); every
    # section within 12 % and 1.0 m; bankfull depth median within 0.05 m.
    for rid, xy in plan.reach_lines.items():
        r = truth["reaches"][rid]
        b, h, top, dip = r["bottom_width"], r["bank_height"], r["bankfull_width"], r["bed_dip"]
        area_err, width_err, depth_err = [], [], []
        for c in usable_chainages(rid, r["length_m"], truth):
            p, right = station(xy, c)
            off = np.arange(-30.0, 30.01, 0.5)
            elev = sample(dem, p[0] + off * right[0], p[1] + off * right[1])
            section = CrossSection(off, elev)
            bank = np.median(elev[(np.abs(off) > top / 2 + 1) & (np.abs(off) < top / 2 + 5)])
            bed = np.abs(off) < b / 2 - 1
            # thalweg: the bed samples brought down to the centre along the parabola
            thalweg = np.median(elev[bed] - dip * (2 * off[bed] / b) ** 2)
            depth_err.append(bank - thalweg - h)
            y = bank - 0.10 - thalweg
            area_err.append(section.geometry(thalweg + y).area[()] / channel_section(r, y)[0] - 1)
            y = 0.5 * h
            width_err.append(section.geometry(thalweg + y).top_width[()]
                             - channel_section(r, y)[2])
        area_err, width_err = np.array(area_err), np.array(width_err)
        assert len(area_err) >= 5, rid
        assert abs(np.median(area_err)) < 0.05, (rid, area_err)
        assert abs(np.median(width_err)) < 0.3, (rid, width_err)
        assert np.abs(area_err).max() < 0.12, (rid, area_err)
        assert np.abs(width_err).max() < 1.0, (rid, width_err)
        assert abs(np.median(depth_err)) < 0.05, (rid, depth_err)


def test_channel_bed_is_not_flat_outside_the_flattened_stretch(plan, truth, dem):
    # A concave bed, not a planar one that could pass for a water surface. One
    # least-squares parabola z = c0_i + c2 o² (an intercept per section, one
    # curvature per reach) through the bed samples of a reach's sections,
    # keeping one pixel clear of the toes, gives the sag c2 (b/2)². With 3 cm
    # noise on ~5 pixels across each bed, its standard error is about 0.02 m,
    # hence ±0.05 m; a planar bed would give 0.
    for rid, xy in plan.reach_lines.items():
        r = truth["reaches"][rid]
        half = r["bottom_width"] / 2
        off = np.arange(-(half - 2.0), half - 2.0 + 1e-9, 0.25)
        rows = []
        for c in usable_chainages(rid, r["length_m"], truth):
            p, right = station(xy, c)
            z = sample(dem, p[0] + off * right[0], p[1] + off * right[1])
            rows.append(z - z.mean())
        rows = np.array(rows)
        o2 = np.broadcast_to(off ** 2 - np.mean(off ** 2), rows.shape)
        c2 = (o2 * rows).sum() / (o2 * o2).sum()
        assert c2 * half ** 2 == pytest.approx(r["bed_dip"], abs=0.05), rid


def test_hydro_flattened_stretch_is_flat_across_and_falls_downstream(plan, truth, dem):
    flat = truth["hydro_flattened"]
    xy = plan.reach_lines[flat["reach_id"]]
    half_wet = flat["wetted_width_m"] / 2
    chain = np.arange(flat["chainage_from_m"] + 10, flat["chainage_to_m"] - 10, 5.0)
    rows = []
    for c in chain:
        p, right = station(xy, c)
        off = np.array([-(half_wet - 2.5), 0.0, half_wet - 2.5])
        rows.append(sample(dem, p[0] + off * right[0], p[1] + off * right[1], order=0))
    rows = np.array(rows)
    # flat across the wetted width: every pixel at one elevation (0.01 m quantum)
    assert np.ptp(rows, axis=1).max() <= 0.0101
    # falling downstream, smoothly (no noise on a processed water surface)
    centre = rows[:, 1]
    assert np.all(np.diff(centre) <= 0.0101)
    hi, lo = flat["water_surface_z_from_to"]
    assert lo - 0.01 <= centre.min() and centre.max() <= hi + 0.01
    # outside the stretch the DEM shows the bed again, FLAT_DEPTH below the water
    for c, ws in ((flat["chainage_from_m"] - 20, hi), (flat["chainage_to_m"] + 20, lo)):
        p, _ = station(xy, c)
        bed = np.median(sample(dem, p[0] + np.array([-1, 0, 1]), p[1] + np.array([-1, 0, 1])))
        assert ws - bed == pytest.approx(flat["water_depth_at_flight_m"], abs=0.12)


def test_embankment_closes_the_channel(plan, truth, dem):
    # Closed-form embankment: crest 6 m wide at floodplain + 2 m, 1:1 sides.
    emb = truth["embankment"]
    xy = plan.reach_lines[emb["reach_id"]]
    p, right = station(xy, emb["chainage_m"])
    crest = sample(dem, [p[0]], [p[1]])[0]
    assert crest - emb["floodplain_z_m"] == pytest.approx(2.0, abs=0.1)
    # along the channel, the terrain rises over the road and falls back to the bed
    along = np.arange(-25.0, 25.01, 0.5)
    tangent = np.array([-right[1], right[0]])
    prof = sample(dem, p[0] + along * tangent[0], p[1] + along * tangent[1])
    bed = emb["floodplain_z_m"] - truth["reaches"][emb["reach_id"]]["bank_height"]
    assert prof[0] - bed < 0.2 and prof[-1] - bed < 0.2
    # the crest stands above floodplain + 1.9 m over about its 6 m width, measured
    # along the channel, which crosses the road obliquely (1 pixel of slack)
    top = along[prof > emb["floodplain_z_m"] + 1.9]
    assert 5.0 <= np.ptp(top) <= 12.0


# ---------------------------------------------------------------- streams
def test_streams_layer_schema(streams, truth):
    assert list(streams.columns) == ["reach_id", "name", "drainage_km2", "q_design", "geometry"]
    assert streams.crs.to_epsg() == 32632
    assert set(streams.geom_type) == {"LineString"}
    assert list(streams.reach_id) == list(truth["reaches"])
    assert streams.reach_id.is_unique
    assert streams.drainage_km2.dtype == float and streams.q_design.dtype == float


def test_reversed_reaches_are_drawn_upstream(streams, truth, dem):
    # the upstream end is higher: a 5 × 5 pixel median at each end drops pits and noise
    for _, row in streams.iterrows():
        xy = np.asarray(row.geometry.coords)
        ends = []
        for x, y in (xy[0], xy[-1]):
            gx, gy = np.meshgrid(np.arange(-4, 5, 2.0), np.arange(-4, 5, 2.0))
            ends.append(np.nanmedian(sample(dem, x + gx.ravel(), y + gy.ravel())))
        drawn_downhill = ends[0] > ends[-1]
        reversed_ = truth["reaches"][row.reach_id]["digitised"]["reversed"]
        assert drawn_downhill != reversed_, row.reach_id
    assert any(r["digitised"]["reversed"] for r in truth["reaches"].values())


def test_digitising_offsets_jitter_and_spacing(streams, plan, truth):
    for _, row in streams.iterrows():
        d = truth["reaches"][row.reach_id]["digitised"]
        pts = np.asarray(row.geometry.coords)
        if d["reversed"]:
            pts = pts[::-1]
        seg = np.hypot(*np.diff(pts, axis=0).T)
        assert 10.0 <= np.median(seg) <= 15.0, row.reach_id
        # signed distance of the inner vertices from the true line, + to the right
        true = shapely.LineString(plan.reach_lines[row.reach_id])
        s = shapely.line_locate_point(true, shapely.points(pts))
        inner = (s > d["offset_taper_m"] + 10) & (s < true.length - d["offset_taper_m"] - 10)
        signed = []
        for p, c in zip(pts[inner], s[inner]):
            foot, right = station(plan.reach_lines[row.reach_id], c)
            signed.append((p - foot) @ right)
        signed = np.array(signed)
        # mean of ~40–90 vertices with 1 m jitter: ±0.3 m covers 2 standard errors
        assert np.mean(signed) == pytest.approx(d["offset_m"], abs=0.35), row.reach_id
        assert np.std(signed) == pytest.approx(d["jitter_sd_m"], rel=0.3), row.reach_id


def test_tributaries_join_the_main_stem(streams):
    lines = dict(zip(streams.reach_id, streams.geometry))
    main = shapely.union_all([lines["M1"], lines["M2"], lines["M3"]])
    for tid in ("N1", "S1"):
        xy = np.asarray(lines[tid].coords)
        ends = [shapely.Point(xy[0]), shapely.Point(xy[-1])]
        assert min(main.distance(e) for e in ends) < 1e-6, tid   # one end on a main-stem node
    # the main stem's reaches share their nodes
    assert lines["M1"].touches(lines["M2"]) and lines["M2"].touches(lines["M3"])


# ----------------------------------------------------------------- tables
# our class -> the row of Chow (1959) Table 5-6 as keyed in fluids.open_flow.n_natural
CHOW_ROW = {
    1: ("Minor streams", "Clean, winding, some pools and shoals"),
    2: ("Flood plains", "Pasture, no brush, short grass"),
    3: ("Flood plains", "Cultivated areas, mature row crops"),
    4: ("Flood plains", "Brush, light brush and trees, in summer"),
    5: ("Flood plains", "Brush, medium to dense brush, in summer"),
    6: ("Flood plains", "Trees, heavy stand of timber, a few down trees, little undergrowth, "
                        "flood stage below branches"),
    7: ("Flood plains", "Cultivated areas, no crop"),
}


def test_landcover_n_are_chow_normal_values(fluids_open_flow):
    table = read_csv("landcover_n.csv")
    assert list(table.columns) == ["class", "name", "n"]
    assert sorted(table["class"]) == sorted(CHOW_ROW)
    for cls, n in zip(table["class"], table["n"]):
        group, row = CHOW_ROW[cls]
        assert n == pytest.approx(fluids_open_flow.n_natural[group][row][1], abs=1e-9), cls


def test_cowan_terms_inside_published_ranges(truth):
    # Arcement & Schneider (1989), USGS WSP 2339, Table 1 (REFERENCES.md):
    # n1 minor 0.001–0.005, n2 occasional 0.001–0.005, n3 negligible 0–0.004 [read];
    # nb firm soil 0.025–0.032 / gravel 0.028–0.035, n4 small 0.002–0.010,
    # m 1.00 below sinuosity 1.2, 1.15 from 1.2 to 1.5 [memory]. The values sit
    # well inside these bands, so a small error in the remembered limits would not matter.
    cowan = read_csv("cowan.csv")
    assert list(cowan.columns) == ["reach_id", "base", "irregularity", "variation", "obstruction",
                                   "vegetation", "meander"]
    assert set(cowan.reach_id) == set(truth["reaches"])
    for _, r in cowan.iterrows():
        assert 0.025 <= r.base <= 0.035
        assert 0.001 <= r.irregularity <= 0.005
        assert 0.001 <= r.variation <= 0.005
        assert 0.0 <= r.obstruction <= 0.004
        assert 0.002 <= r.vegetation <= 0.010
        sinuosity = truth["reaches"][r.reach_id]["sinuosity"]
        assert r.meander == (1.00 if sinuosity < 1.2 else 1.15)
        n = (r.base + r.irregularity + r.variation + r.obstruction + r.vegetation) * r.meander
        # the demo's Cowan estimate agrees with the n behind the "measured" flows
        assert n == pytest.approx(truth["n_observations"], abs=0.001)


def manning_q(r, y, slope, n):
    """Q = A V with V from fluids.open_flow.V_Manning (SI); section in closed form."""
    fluids = pytest.importorskip("fluids.open_flow")
    area, perimeter, _ = channel_section(r, y)
    return area * fluids.V_Manning(Rh=area / perimeter, S=slope, n=n)


def test_observations_are_manning_on_the_true_section(truth):
    obs = read_csv("observations.csv")
    assert list(obs.columns) == ["reach_id", "chainage", "stage", "depth", "discharge"]
    assert 3 <= len(obs) <= 4
    # the water surface falls downstream: stage on the main stem decreases with position
    main = obs[obs.reach_id.str.startswith("M")]
    assert np.all(np.diff(main.stage.to_numpy()) < 0)
    for _, o in obs.iterrows():
        r = truth["reaches"][o.reach_id]
        assert 0.3 * r["bank_height"] < o.depth < r["bank_height"]        # in bank
        assert 50 < o.chainage < r["length_m"] - 50
        q = manning_q(r, o.depth, r["channel_slope"], truth["n_observations"])
        assert o.discharge == pytest.approx(q, rel=2e-4)   # written to 0.001 m³/s
        emb, flat = truth["embankment"], truth["hydro_flattened"]
        if o.reach_id == emb["reach_id"]:
            assert abs(o.chainage - emb["chainage_m"]) > 100
        if o.reach_id == flat["reach_id"]:
            assert not flat["chainage_from_m"] - 50 < o.chainage < flat["chainage_to_m"] + 50


def test_design_flows_leave_some_channels_and_not_others(truth, streams):
    flows = read_csv("design_flows.csv")
    assert list(flows.columns) == ["reach_id", "flow", "discharge"]
    table = read_csv("landcover_n.csv")
    n_channel = float(table.loc[table["class"] == 1, "n"].iloc[0])
    leaves, stays = [], []
    for rid, g in flows.groupby("reach_id", sort=False):
        assert list(g.flow) == ["q2", "q10", "q100"]
        assert np.all(np.diff(g.discharge) > 0)
        assert streams.set_index("reach_id").q_design[rid] == g.discharge.iloc[0]
        r = truth["reaches"][rid]
        capacity = manning_q(r, r["bank_height"], r["channel_slope"], n_channel)
        q100 = g.discharge.iloc[-1]
        # margins of ±25 % either side of capacity, so that the tool's
        # estimated capacity can be off by that much and the demo still shows both
        if q100 > 1.25 * capacity:
            leaves.append(rid)
        elif q100 < 0.75 * capacity:
            stays.append(rid)
    assert leaves and stays


def test_truth_describes_the_scenario(truth, streams):
    r = truth["reaches"]
    assert set(r) == set(streams.reach_id)
    # channel size grows downstream, and the tributaries are smaller than the stem
    assert r["M1"]["bankfull_width"] < r["M2"]["bankfull_width"] < r["M3"]["bankfull_width"]
    assert max(r["N1"]["bankfull_width"], r["S1"]["bankfull_width"]) < r["M1"]["bankfull_width"]
    for rid, v in r.items():
        assert 1.1 <= v["sinuosity"] <= 1.4, rid
        assert 0.002 <= v["down_valley_slope"] <= 0.007, rid
        assert v["channel_slope"] == pytest.approx(v["down_valley_slope"] / v["sinuosity"],
                                                   rel=1e-3)
        # the channel from the regional curves (Bieger et al. 2015 national fit:
        # W = 2.70 A^0.352 [read via a reproduction], D = 0.30 A^0.213 [memory])
        a = v["drainage_km2"]
        assert v["bankfull_width"] == pytest.approx(2.70 * a ** 0.352, rel=1e-4)
        assert v["mean_depth"] == pytest.approx(0.30 * a ** 0.213, rel=1e-4)
        assert v["bank_height"] == pytest.approx(v["side_height"] + v["bed_dip"], abs=2e-4)
        area, perimeter, top = channel_section(v, v["bank_height"])
        assert top == pytest.approx(v["bankfull_width"], rel=1e-4)
        assert area / top == pytest.approx(v["mean_depth"], rel=1e-3)
        assert area == pytest.approx(v["bankfull_area"], rel=1e-3)
        assert perimeter == pytest.approx(v["bankfull_wetted_perimeter"], rel=1e-3)
    assert 1.0 <= truth["valley"]["terrace"]["height_m"] <= 2.0
    assert truth["embankment"]["height_above_floodplain_m"] == pytest.approx(2.0)


def test_config_loads_into_runconfig(truth):
    cfg = from_mapping(read_toml(BASIN / "config.toml"), source="config.toml")
    for path in (cfg.dem, cfg.streams, cfg.landcover, cfg.landcover_table, cfg.design_flows,
                 cfg.observations):
        assert path.is_file(), path
    assert cfg.id_field == "reach_id" and cfg.name_field == "name"
    assert cfg.drainage_area_field == "drainage_km2"
    assert cfg.spacing == 25.0
    widest = max(v["bankfull_width"] for v in truth["reaches"].values())
    # half the widest channel plus at least 20 m of floodplain on each side
    assert cfg.half_width >= widest / 2 + 20.0
    offsets = max(abs(v["digitised"]["offset_m"]) for v in truth["reaches"].values())
    assert cfg.snap_distance >= offsets + 3.0        # offset plus 3 SD of the 1 m jitter


# ------------------------------------------------------ generator pieces
@settings(max_examples=25, deadline=None)
@given(omega=st.floats(0.2, 1.3), quarter_m=st.integers(160, 1200),
       heading=st.floats(-np.pi, np.pi), cycles=st.integers(1, 4))
def test_sine_generated_curve_sinuosity_is_one_over_j0(gen, omega, quarter_m, heading, cycles):
    # Langbein & Leopold (1966), USGS PP 422-H: the sine-generated curve has
    # sinuosity 1 / J0(ω) over whole wavelengths (J0 from scipy.special).
    # The wavelength is a whole number of 0.25 m steps (40–300 m), so that the
    # curve ends on a vertex. The midpoint-rule polyline is second order: its
    # error stays below (2π ω Δs / M)² / 8 ≈ 3.3e-4 in the tightest case
    # (M = 40 m, ω = 1.3, Δs = 0.25 m), hence rel = 5e-4.
    wavelength = 0.25 * quarter_m
    xy, s = gen.sine_generated(np.array([0.0, 0.0]), heading, cycles * wavelength, wavelength,
                               omega, step=0.25)
    xy = xy[s <= cycles * wavelength + 1e-9]
    length = gen.line_length(xy)
    chord = np.hypot(*(xy[-1] - xy[0]))
    assert length / chord == pytest.approx(1.0 / j0(omega), rel=5e-4)
    assert length == pytest.approx(cycles * wavelength, abs=0.3)


@settings(max_examples=40, deadline=None)
@given(area=st.floats(1.0, 2000.0), z=st.floats(0.5, 3.0), dip=st.floats(0.0, 0.3))
def test_regional_channel_has_the_curve_width_and_mean_depth(gen, area, z, dip):
    # closed form (channel_section): the channel of top width W and side slope z
    # with a bed dip δ whose A / T is D, or a clear error when none exists
    w, mean_depth = 2.70 * area ** 0.352, 0.30 * area ** 0.213
    try:
        d = gen.regional_channel(area, z, dip)
    except ValueError as exc:
        assert "side slope" in str(exc)
        # none exists: even the triangle over the sag is too shallow, or the sag too deep
        assert w < 4 * z * mean_depth or dip >= 1.5 * mean_depth or dip > 0.1 * w
        return
    b, h = d["bottom_width"], d["side_height"]
    assert b > 0 and h > 0
    r = {"bottom_width": b, "side_slope": z, "bed_dip": dip}
    area_bf, _, top = channel_section(r, h + dip)
    assert top == pytest.approx(w, rel=1e-9)
    assert area_bf / top == pytest.approx(mean_depth, rel=1e-9)
    assert d["bank_height"] == pytest.approx(h + dip, rel=1e-12)


def test_exact_distance_to_a_polyline_matches_shapely(gen):
    # reference: shapely's distance and line_locate_point on the same line
    rng = np.random.default_rng(3)
    xy, s = gen.sine_generated(np.array([0.0, 0.0]), 0.3, 400.0, 120.0, 0.9)
    px, py = rng.uniform(-20, 420, 500), rng.uniform(-80, 200, 500)
    d, chain = gen.nearest_on_line(xy, s, px, py, bound=1e9)
    line = shapely.LineString(xy)
    pts = shapely.points(px, py)
    np.testing.assert_allclose(d, shapely.distance(line, pts), atol=1e-6)
    close = d < 30   # far points can have two nearly equidistant feet
    np.testing.assert_allclose(chain[close], shapely.line_locate_point(line, pts[close]),
                               atol=1e-3)
