"""Sampler against independent references.

- scipy.ndimage.map_coordinates(order=1) is bilinear interpolation on the pixel
  grid (scipy reference library): our values must agree to rounding.
- rasterio's own DatasetReader.sample returns the pixel value under a point; at
  pixel centres bilinear interpolation must return exactly that.
- A bilinear interpolant reproduces a + b·x + c·y + d·x·y exactly (closed form,
  standard numerical analysis), checked on random planes with hypothesis.
"""

import numpy as np
import pytest
import rasterio
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import ndimage

from reachgauge.inputs import sampler
from terrain_fixtures import north_up

X0, Y0 = 1000.0, 2000.0


def write(path, grid, res=(0.7, 1.3), nodata=None):
    with rasterio.open(path, "w", driver="GTiff", width=grid.shape[1], height=grid.shape[0],
                       count=1, dtype="float64", crs="EPSG:32633", nodata=nodata,
                       transform=north_up(X0, Y0, *res)) as dst:
        dst.write(grid, 1)
    return path


def xy_of(col, row, res=(0.7, 1.3)):
    """Map coordinates of fractional (col, row) measured from pixel (0, 0)'s centre."""
    return np.stack([X0 + (np.asarray(col) + 0.5) * res[0], Y0 - (np.asarray(row) + 0.5) * res[1]],
                    axis=-1)


def test_bilinear_matches_scipy_map_coordinates(tmp_path):
    rng = np.random.default_rng(7)
    grid = rng.normal(100, 5, (40, 60))
    path = write(tmp_path / "r.tif", grid)
    col = rng.uniform(0, 59, 2000)
    row = rng.uniform(0, 39, 2000)
    ref = ndimage.map_coordinates(grid, [row, col], order=1)  # scipy reference
    with rasterio.open(path) as ds:
        got = sampler.sample(ds, xy_of(col, row))
    np.testing.assert_allclose(got.z, ref, rtol=0, atol=1e-9)
    assert not got.outside.any() and not got.nodata.any()


def test_pixel_centres_equal_rasterio_sample(tmp_path):
    rng = np.random.default_rng(8)
    grid = rng.normal(50, 10, (30, 25))
    path = write(tmp_path / "r.tif", grid)
    col = rng.integers(0, 25, 300)
    row = rng.integers(0, 30, 300)
    pts = xy_of(col, row)
    with rasterio.open(path) as ds:
        ref = np.array([v[0] for v in ds.sample(pts)])  # rasterio reference
        got = sampler.sample(ds, pts).z
    np.testing.assert_allclose(got, ref, rtol=0, atol=1e-9)


@settings(max_examples=40, deadline=None)
@given(a=st.floats(-100, 100), b=st.floats(-5, 5), c=st.floats(-5, 5), d=st.floats(-0.1, 0.1),
       seed=st.integers(0, 2**31))
def test_bilinear_exact_for_bilinear_functions(a, b, c, d, seed):
    res = (0.7, 1.3)
    h, w = 12, 9
    cc, rr = np.meshgrid(np.arange(w), np.arange(h))
    xy = xy_of(cc, rr, res)
    def f(p):
        return a + b * p[..., 0] + c * p[..., 1] + d * (p[..., 0] - X0) * (p[..., 1] - Y0)

    grid = f(xy)
    rng = np.random.default_rng(seed)
    pts = xy_of(rng.uniform(0, w - 1, 50), rng.uniform(0, h - 1, 50), res)
    got = sampler.bilinear(grid, north_up(X0, Y0, *res), pts)
    np.testing.assert_allclose(got, f(pts), rtol=1e-10, atol=1e-7)


def test_nodata_poisons_its_four_neighbours_and_outside_is_flagged(tmp_path):
    grid = np.full((10, 10), 5.0)
    grid[4, 4] = -9999.0
    path = write(tmp_path / "r.tif", grid, nodata=-9999.0)
    pts = xy_of([3.5, 4.0, 4.9, 3.0, 2.9, -0.6, 9.4], [4.5, 3.2, 4.9, 4.0, 4.0, 3.0, 3.0])
    with rasterio.open(path) as ds:
        got = sampler.sample(ds, pts)
    # any point whose four surrounding centres include (4, 4) is NaN
    assert np.isnan(got.z[:3]).all() and got.nodata[:3].all()
    # exactly on the centre of pixel (col 3, row 4): its cell reaches (col 4, row 4)
    # only with zero weight, but a nodata neighbour always poisons (design rule)
    assert np.isnan(got.z[3])
    assert got.z[4] == pytest.approx(5.0)
    assert got.outside[5:].all() and np.isnan(got.z[5:]).all() and not got.nodata[5:].any()


def test_z_factor_converts_feet():
    grid = np.full((4, 4), 100.0)
    z = sampler.bilinear(grid * 0.3048, north_up(0, 4, 1, 1), np.array([[1.7, 2.2]]))
    assert z[0] == pytest.approx(30.48)  # 1 ft = 0.3048 m exactly (international foot)


class Recorder:
    """Wraps a dataset and records the windows read from it."""

    def __init__(self, ds):
        self.ds = ds
        self.windows = []

    def __getattr__(self, name):
        return getattr(self.ds, name)

    def read(self, *args, window=None, **kw):
        self.windows.append(window)
        return self.ds.read(*args, window=window, **kw)


def test_reads_only_a_window_and_splits_large_ones(tmp_path, monkeypatch):
    rng = np.random.default_rng(3)
    grid = rng.normal(0, 1, (200, 300))
    path = write(tmp_path / "r.tif", grid, res=(1.0, 1.0))
    pts = xy_of(rng.uniform(100, 110, (7, 20)), rng.uniform(50, 56, (7, 20)), (1.0, 1.0))
    with rasterio.open(path) as ds:
        rec = Recorder(ds)
        whole = sampler.sample(rec, pts).z
        assert len(rec.windows) == 1
        win = rec.windows[0]
        assert win.width * win.height <= 15 * 11  # the points' box plus a margin, not 200 × 300
        monkeypatch.setattr(sampler, "MAX_WINDOW_CELLS", 20)
        rec2 = Recorder(ds)
        split = sampler.sample(rec2, pts).z
    assert len(rec2.windows) > 1
    np.testing.assert_array_equal(split, whole)
    assert whole.shape == (7, 20)


def test_fill_single_pits_removes_a_lone_pit_and_keeps_a_channel():
    g = np.full((9, 9), 10.0)
    g[2, 2] = 3.0                      # lone pit: lower than all eight neighbours
    g[:, 6] = 8.0                      # a one-pixel channel running the grid's height
    g[5, 6] = 7.5                      # a dip along the channel has channel neighbours too
    out = sampler.fill_single_pits(g)
    assert out[2, 2] == 10.0
    # the channel pixels each have lower-or-equal neighbours along it: unchanged,
    # except the one dip lower than all its neighbours, raised to the channel level
    assert np.all(out[:, 6][np.arange(9) != 5] == 8.0) and out[5, 6] == 8.0
    g2 = g.copy()
    g2[0, 0] = np.nan
    assert np.isnan(sampler.fill_single_pits(g2)[0, 0])
