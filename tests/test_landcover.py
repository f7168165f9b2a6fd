"""Land-cover classes at points: nearest pixel, read through a warped view when the
raster's CRS is not the working one.

Reference: rasterio's own ``DatasetReader.sample`` (pixel containing the point)."""

import numpy as np
import rasterio
from affine import Affine

from reachgauge.inputs.landcover import classes_at


def write_classes(path, crs="EPSG:32633"):
    data = (np.arange(40 * 30).reshape(30, 40) % 7 + 1).astype("uint8")
    data[0, 0] = 0
    with rasterio.open(path, "w", driver="GTiff", width=40, height=30, count=1, dtype="uint8",
                       crs=crs, transform=Affine(10.0, 0.0, 500000.0, 0.0, -10.0, 5000300.0), nodata=0) as ds:
        ds.write(data, 1)
    return path


def test_nearest_pixel_matches_rasterio_sample(tmp_path):
    path = write_classes(tmp_path / "lc.tif")
    rng = np.random.default_rng(0)
    xy = np.column_stack([rng.uniform(500000, 500400, 200), rng.uniform(5000000, 5000300, 200)])
    got = classes_at(path, xy.reshape(20, 10, 2), rasterio.crs.CRS.from_epsg(32633))
    with rasterio.open(path) as ds:
        ref = np.array([v[0] for v in ds.sample(xy)])
    ref = np.where(ref == 0, -1, ref)           # nodata → -1
    assert got.shape == (20, 10)
    np.testing.assert_array_equal(got.ravel(), ref)


def test_outside_and_other_crs(tmp_path):
    path = write_classes(tmp_path / "lc.tif")
    out = classes_at(path, np.array([[0.0, 0.0], [500005.0, 5000295.0]]),
                     rasterio.crs.CRS.from_epsg(32633))
    assert out.tolist() == [-1, -1]             # off the raster; nodata pixel
    # the same points asked in another CRS: read through a nearest-neighbour warp
    import pyproj

    to_ll = pyproj.Transformer.from_crs(32633, 4326, always_xy=True)
    centres = np.array([[500155.0, 5000155.0], [500305.0, 5000045.0]])
    lon, lat = to_ll.transform(centres[:, 0], centres[:, 1])
    got = classes_at(path, np.column_stack([lon, lat]), rasterio.crs.CRS.from_epsg(4326))
    with rasterio.open(path) as ds:
        ref = [v[0] for v in ds.sample(centres)]
    assert got.tolist() == ref
