"""From terrain and centrelines to sections, thalweg and slope, on synthetic
valleys whose answers are closed-form (tests/terrain_fixtures.py).

Closed forms (standard plane geometry; REFERENCES.md "Closed forms"): a
trapezoid of bottom width b and side slope z holds A = (b + z y) y and has
T = b + 2 z y at depth y. The bed falls at the valley slope along a straight
channel; along a meander the bed falls by the valley drop over the channel
length.

Tolerances, and why:
- Bilinear interpolation reproduces planes exactly, so on a bank face the
  sampled section is exact; within one pixel of the trapezoid's four kinks it
  cuts the corners. At the bank top this widens the water by up to one pixel
  per bank (T within 2·res + 1 %), and changes the area by at most about
  (Δ slope)·res²/8 per kink (area within 3 %).
- Noise (σ = 2–3 cm) moves the lowest sample anywhere on the flat bottom, so the
  thalweg is checked to lie on the bottom (within b/2 + one pixel of the true
  centreline), and its elevation within 5σ of the bed.
- Slope: a line fitted through points whose elevations scatter by σ_t has a
  standard error σ_t / √Σ(c − c̄)² (least squares; Theil–Sen is nearly as
  efficient). σ_t is bounded by the raster's noise s, not measured from the run:
  a bilinear sample is a weighted mean of pixels (weights ≥ 0 summing to 1), so its
  standard deviation is at most s; the bed level is the least of a transect's bed
  samples raised by a constant (σ is one figure for the reach, kernel.bed.
  reach_noise), and the least of jointly normal variables is a 1-Lipschitz function
  of the underlying independent draws scaled by at most s, whose variance the
  Gaussian Poincaré inequality bounds by s² (Boucheron, S., Lugosi, G. & Massart,
  P., 2013, Concentration Inequalities, Oxford UP, Thm 3.20 [memory]). Transects
  20 m apart share no pixel, so their bed levels are independent. The tests check
  the thalweg's scatter about the true bed is within s and allow 4 standard errors
  with σ_t = s: about 5 % for a reach, 10–35 % for a station's 200 m window.
  Along a meander the local slope varies; the reference is the true bed drop over
  the same window.
"""

import pickle

import numpy as np
import pytest
import shapely

from reachgauge import CrossSection
from reachgauge.inputs import sampler
from reachgauge.transects import cutting
from reachgauge.config import RunConfig
from reachgauge.batch.pipeline import cut_all
from reachgauge.transects.cutting import CuttingParams, ReachSections, cut_reach
from reachgauge.inputs.network import open_raster
from terrain_fixtures import make_valley_raster, meander_line, straight_line, warp_raster, write_lines

B, H, Z = 8.0, 2.0, 2.0           # bottom width, bank height, side slope (H:V)


def true_chainage(valley, xy):
    """Chainage (m) along the true centreline of points (work CRS)."""
    return shapely.line_locate_point(valley.centreline, shapely.points(xy)) * valley.xy_factor


def bank_and_mid(r, valley, noise=0.0):
    """Sampled area and top width at bank height, and top width at mid-depth,
    against the closed form: relative errors of area and mid-depth width, and the
    bank-height width error in metres, per transect.

    "At bank height" is max(1 cm, 5σ) below the bank top: on a flat floodplain
    the width exactly at its level is undefined, and noise of σ leaves pockets
    below any nearer stage that would hold water."""
    bed = valley.bed(true_chainage(valley, r.thalweg_xy))
    yb, ym = H - max(0.01, 5 * noise), H / 2
    out = []
    for i in range(len(r)):
        cs = r.section(i)
        gb, gm = cs.geometry(bed[i] + yb), cs.geometry(bed[i] + ym)
        out.append((gb.area / valley.area(yb) - 1, gb.top_width - valley.top_width(yb),
                    gm.top_width / valley.top_width(ym) - 1))
    return np.array(out).T


def fit_tolerance(chainage, window, sigma):
    """Four standard errors of a slope fitted over each station's window."""
    c = np.asarray(chainage)
    inwin = np.abs(c[None, :] - c[:, None]) <= window / 2
    n = inwin.sum(axis=1)
    mean = (inwin * c[None, :]).sum(axis=1) / n
    scc = (inwin * (c[None, :] - mean[:, None]) ** 2).sum(axis=1)
    return 4 * sigma / np.sqrt(scc)


def reach_tolerance(chainage, sigma):
    c = np.asarray(chainage)
    return 4 * sigma / np.sqrt(np.sum((c - c.mean()) ** 2))


@pytest.fixture(scope="module")
def straight(tmp_path_factory):
    d = tmp_path_factory.mktemp("straight")
    line = straight_line(500, 30.0)
    v = make_valley_raster(d, line, res=0.5, bottom_width=B, bank_height=H, side_slope=Z,
                           valley_slope=0.002, noise=0.02, seed=5, margin=45)
    path = write_lines(d / "s.gpkg", [line], offset=3.0)   # drawn 3 m left of the channel
    cfg = RunConfig(dem=v.path, streams=path, half_width=25.0, snap_distance=8.0)
    net, (r,) = cut_all(cfg)
    return v, cfg, net, r


def test_straight_channel_geometry_thalweg_and_slope(straight):
    v, cfg, net, r = straight
    assert r.status == "ok" and len(r) == 26
    assert np.all(r.transect_status == "ok") and np.all(r.transect_flags == "")
    area, width_at_bank, width_mid = bank_and_mid(r, v, noise=0.02)
    assert np.max(np.abs(area)) < 0.03
    assert np.all(np.abs(width_at_bank) <= 2 * v.res + 0.01 * v.top_width(H))
    assert np.max(np.abs(width_mid)) < 0.01
    # thalweg on the bottom of the channel, 3 m to the right of the drawn line
    dist = shapely.distance(shapely.points(r.thalweg_xy), v.centreline)
    assert np.all(dist <= B / 2 + v.res)
    assert np.all(np.abs(r.thalweg_shift - 3.0) <= B / 2 + v.res)
    bed = v.bed(true_chainage(v, r.thalweg_xy))
    assert np.all(np.abs(r.thalweg_z - bed) <= 5 * 0.02)
    # the bed levels scatter by no more than the raster's noise (module docstring)
    sigma = 0.02
    assert np.std(r.thalweg_z - bed) <= sigma
    tol = reach_tolerance(r.chainage, sigma)
    assert tol < 0.1 * 0.002       # about 5 % (26 stations 20 m apart): a slope off by a tenth fails
    assert abs(r.reach_slope - 0.002) <= tol
    assert np.all(np.abs(r.slope - 0.002) <= fit_tolerance(r.chainage, cfg.slope_window, sigma))


def test_frame_offsets_left_to_right_and_sections(straight):
    v, cfg, net, r = straight
    hw = cfg.half_width
    assert r.offsets[0] == 0 and r.offsets[-1] == pytest.approx(2 * hw)
    assert r.sample_step == pytest.approx(v.res)
    assert r.elevations.shape == (len(r), r.offsets.size)
    flow = np.asarray(v.centreline.coords[-1]) - np.asarray(v.centreline.coords[0])
    for i in (0, 7, len(r) - 1):
        line = r.transects[i]
        a, b = np.asarray(line.coords[0]), np.asarray(line.coords[-1])
        d = a - r.thalweg_xy[i]
        assert flow[0] * d[1] - flow[1] * d[0] > 0           # left end is left of the flow
        assert line.length == pytest.approx(2 * hw)
        # the thalweg is at offset = half-width along the transect
        assert np.hypot(*(a - r.thalweg_xy[i])) == pytest.approx(hw)
        cs = r.section(i)
        assert isinstance(cs, CrossSection) and cs.offset.size == r.offsets.size
    p = r.profile
    assert list(p.columns) == cutting.PROFILE_COLUMNS and len(p) == len(r)
    assert np.all(np.diff(p.z_used) <= 0)                  # carved: never rises downstream


def test_meandering_channel_offset_jittered_noisy(tmp_path):
    line = meander_line(700, 25.0, 300.0, angle_deg=-20.0)
    v = make_valley_raster(tmp_path, line, res=1.0, bottom_width=B, bank_height=H, side_slope=Z,
                           valley_slope=0.002, noise=0.03, seed=9, margin=45)
    path = write_lines(tmp_path / "s.gpkg", [line], offset=-4.0, vertex_spacing=10.0, jitter=1.0)
    cfg = RunConfig(dem=v.path, streams=path, half_width=25.0, snap_distance=8.0)
    _, (r,) = cut_all(cfg)
    assert r.status == "ok" and np.all(r.transect_status == "ok")
    area, width_at_bank, width_mid = bank_and_mid(r, v, noise=0.03)
    assert np.max(np.abs(area)) < 0.03
    assert np.all(np.abs(width_at_bank) <= 2 * v.res + 0.01 * v.top_width(H))
    assert np.max(np.abs(width_mid)) < 0.03     # a transect off the true normal by the smoothing
    dist = shapely.distance(shapely.points(r.thalweg_xy), v.centreline)
    assert np.all(dist <= B / 2 + v.res)
    s = true_chainage(v, r.thalweg_xy)
    # the bed levels scatter by no more than the raster's noise (module docstring)
    sigma = 0.03
    assert np.std(r.thalweg_z - v.bed(s)) <= sigma
    # the drawn, jittered line is a little longer than the channel; allow that too
    stretch = v.length_m / r.reach.length_m
    assert 0.97 < stretch <= 1.0
    assert abs(r.reach_slope - v.channel_slope) <= (reach_tolerance(r.chainage, sigma)
                                                    + (1 - stretch) * v.channel_slope)
    assert r.reach_slope == pytest.approx(v.channel_slope, rel=0.05)
    # station slopes against the true bed over the same window
    lo = np.clip(s - cfg.slope_window / 2, 0, v.length_m)
    hi = np.clip(s + cfg.slope_window / 2, 0, v.length_m)
    ref = (v.bed(lo) - v.bed(hi)) / (hi - lo)
    tol = fit_tolerance(r.chainage, cfg.slope_window, sigma) + (1 - stretch) * ref
    assert np.all(np.abs(r.slope - ref) <= tol)


def test_geographic_raster_and_other_vector_crs_give_the_projected_answer(tmp_path):
    """The same valley as a WGS 84 raster (warped at ~0.5 m) and the line in Web
    Mercator: sections, thalweg and slope agree with the projected originals
    within sampling tolerance (two bilinear resamplings smooth the kinks:
    areas within 3 %, thalwegs within 1.5 pixels, slope within 1 %)."""
    line = straight_line(400, 30.0)
    v = make_valley_raster(tmp_path, line, res=1.0, bottom_width=B, bank_height=H, side_slope=Z,
                           margin=45)
    proj = write_lines(tmp_path / "s.gpkg", [line], offset=3.0)
    web = tmp_path / "web.gpkg"
    import geopandas
    geopandas.read_file(proj).to_crs("EPSG:3857").to_file(web)
    geo = warp_raster(v.path, tmp_path / "geo.tif", "EPSG:4326", resolution=(6.3e-6, 4.5e-6))
    cfg = RunConfig(dem=v.path, streams=proj, half_width=25.0)
    _, (a,) = cut_all(cfg)
    with pytest.warns(Warning, match="geographic"):
        net, (b,) = cut_all(cfg.replace(dem=geo, streams=web))
    assert net.work_crs.to_epsg() == 32633 and b.status == "ok"
    np.testing.assert_allclose(b.chainage, a.chainage, atol=1e-6)
    np.testing.assert_allclose(np.asarray(b.centre_xy), np.asarray(a.centre_xy), atol=1e-3)
    assert np.all(np.hypot(*(b.thalweg_xy - a.thalweg_xy).T) <= 1.5 * v.res)
    for i in range(len(a)):
        st = v.bed(a.chainage[i]) + H - 0.01
        assert b.section(i).geometry(st).area == pytest.approx(a.section(i).geometry(st).area, rel=0.03)
    assert b.reach_slope == pytest.approx(a.reach_slope, rel=0.01)


def test_partly_outside_and_nodata_are_flagged(tmp_path):
    line = straight_line(300, 0.0)
    x0, y0 = line.coords[0]
    v = make_valley_raster(tmp_path, line, res=1.0, margin=15,
                           nodata_box=(x0 + 100, y0 - 30, x0 + 140, y0 + 30))
    path = write_lines(tmp_path / "s.gpkg", [line])
    _, (r,) = cut_all(RunConfig(dem=v.path, streams=path, half_width=25.0, snap_distance=8.0))
    assert r.status == "ok"
    # the raster reaches 15 m beyond the line's sides: every transect is off the raster
    assert all("off-raster" in f for f in r.transect_flags)
    hole = (r.chainage >= 100) & (r.chainage <= 140)
    assert np.all(r.transect_status[hole] == "no-data")
    edge = (r.chainage == 80) | (r.chainage == 160)
    assert np.all(r.transect_status[edge] == "ok")
    assert np.all(r.profile.z_raw[hole].isna())
    assert np.all(np.isfinite(r.slope))       # the hole's stations take the windowed fit
    assert r.section(int(np.argmax(hole))) is None


def test_bad_reach_and_failing_reach_never_raise(tmp_path, monkeypatch, straight):
    v, cfg, net, r = straight
    bad = net.reaches[0].__class__(**{**net.reaches[0].__dict__, "status": "too-short",
                                      "geometry": None, "message": "short"})
    with open_raster(net.raster) as ds:
        out = cut_reach(ds, net.raster, bad, CuttingParams.from_config(cfg))
    assert isinstance(out, ReachSections) and out.status == "too-short" and len(out) == 0
    assert out.section is not None and np.isnan(out.reach_slope) and out.profile.empty

    def boom(*a, **k):
        raise RuntimeError("disk on fire")

    monkeypatch.setattr(sampler, "sample", boom)
    with open_raster(net.raster) as ds:
        out = cut_reach(ds, net.raster, net.reaches[0], CuttingParams.from_config(cfg))
    assert out.status == "failed" and "disk on fire" in out.message


def test_task_inputs_pickle_and_only_a_window_is_read(straight, monkeypatch):
    v, cfg, net, r = straight
    raster, reach, cfg2 = pickle.loads(pickle.dumps((net.raster, net.reaches[0], cfg)))
    cells = []

    class Spy:
        def __init__(self, ds):
            self.ds = ds

        def __getattr__(self, k):
            return getattr(self.ds, k)

        def read(self, *a, window=None, **k):
            cells.append(window.width * window.height)
            return self.ds.read(*a, window=window, **k)

    with open_raster(raster) as ds:
        again = cut_reach(Spy(ds), raster, reach, CuttingParams.from_config(cfg2))
    np.testing.assert_array_equal(again.elevations, r.elevations)
    assert len(cells) == 2                                   # thalweg search, then sections
    with open_raster(net.raster) as ds:
        total = ds.width * ds.height
    # the reach's box (a 500 m line at 30°, ±25 m) is most of this small raster;
    # the search window is the line ±8 m only
    assert max(cells) <= total and min(cells) < 0.8 * total


def test_reversed_line_and_a_tributary(tmp_path):
    main = meander_line(400, 40.0, 200.0, step=2.0)
    v = make_valley_raster(tmp_path, main, res=1.0, margin=50)
    joint = main.interpolate(250.0)
    trib = shapely.LineString([(joint.x + 60, joint.y - 60), (joint.x, joint.y)])
    path = write_lines(tmp_path / "s.gpkg", [main, trib], vertex_spacing=5.0, reverse=True)
    cfg = RunConfig(dem=v.path, streams=path, half_width=40.0, snap_distance=5.0, spacing=10.0)
    net, (m, t) = cut_all(cfg)
    assert m.reach.orientation == "reversed-by-terrain"
    z_used = m.profile.z_used.to_numpy()
    assert np.all(np.diff(z_used) <= 0) and z_used[0] > z_used[-1]
    # the meander's 31 m bend radius is tighter than the 40 m half-width: transects
    # on the inside of bends are cut back and none of them cross each other
    assert sum("shortened" in f for f in m.transect_flags) >= 10
    tr = np.array(m.transects)
    i, j = shapely.STRtree(tr).query(tr, predicate="intersects")
    assert np.all((i == j) | np.isin(m.transect_flags[i], ["crosses-neighbour"]))
    # a transect that still crosses the tributary is flagged
    crossing = shapely.intersects(tr, t.reach.geometry)
    assert np.all(["crosses-neighbour" in f for f in m.transect_flags[crossing]])
    assert net.reaches[1].geometry.coords[-1] == pytest.approx((joint.x, joint.y))
    # every sample's position, cut transects included, reproduces its elevation
    with open_raster(net.raster) as ds:
        again = sampler.sample(ds, m.sample_points()).z
    kept = np.isfinite(m.elevations)
    np.testing.assert_allclose(again[kept], m.elevations[kept], atol=1e-9)
    cut = np.array(["shortened" in f for f in m.transect_flags])
    lens = np.array([g.length for g in m.transects])
    np.testing.assert_allclose(lens, m.reach_left + m.reach_right, rtol=1e-9)
    assert np.all(lens[cut] < 2 * cfg.half_width)
