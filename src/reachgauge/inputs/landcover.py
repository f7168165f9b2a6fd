"""Land-cover classes at transect sample points (an input edge).

Classes are categorical, so they are read by nearest pixel, never
interpolated. Points in another CRS than the raster's are transformed into it
with pyproj (exact per point; resampling a categorical grid into the working CRS
would shift class edges by up to a pixel). Only the window around the points is
read.
"""

from __future__ import annotations

import numpy as np
import rasterio
from pyproj import CRS, Transformer
from rasterio.windows import Window

from reachgauge.errors import InputError


def classes_at(path, xy, work_crs) -> np.ndarray:
    """Integer classes at points ``xy`` (..., 2) given in ``work_crs``; -1 where
    the point is outside the raster or on nodata."""
    xy = np.asarray(xy, dtype=float)
    out = np.full(xy.shape[:-1], -1, dtype=np.int64)
    try:
        src = rasterio.open(path)
    except rasterio.errors.RasterioIOError as exc:
        raise InputError(f"cannot open land-cover raster {str(path)!r} ({exc})",
                         "give a raster file rasterio can read") from None
    with src:
        if src.crs is None:
            raise InputError(f"land-cover raster {str(path)!r} has no CRS",
                             "assign one (e.g. gdal_edit.py -a_srs) or reproject it")
        pts = xy.reshape(-1, 2)
        fin = np.all(np.isfinite(pts), axis=1)
        if not fin.any():
            return out
        px, py = pts[:, 0].copy(), pts[:, 1].copy()
        if CRS.from_user_input(work_crs) != CRS.from_user_input(src.crs):
            tr = Transformer.from_crs(CRS.from_user_input(work_crs), CRS.from_user_input(src.crs),
                                      always_xy=True)
            px[fin], py[fin] = tr.transform(px[fin], py[fin])
        row, col = rasterio.transform.rowcol(src.transform, np.where(fin, px, 0.0),
                                             np.where(fin, py, 0.0), op=np.floor)
        row, col = np.asarray(row, dtype=np.int64), np.asarray(col, dtype=np.int64)
        inside = fin & (col >= 0) & (col < src.width) & (row >= 0) & (row < src.height)
        if not inside.any():
            return out
        c0, c1 = col[inside].min(), col[inside].max() + 1
        r0, r1 = row[inside].min(), row[inside].max() + 1
        try:
            band = src.read(1, window=Window(c0, r0, c1 - c0, r1 - r0), masked=True)
        except rasterio.errors.RasterioError as exc:   # a damaged file: the reach says so
            raise InputError(f"the land-cover raster {str(path)!r} cannot be read in rows "
                             f"{r0}–{r1 - 1}, columns {c0}–{c1 - 1} ({exc})",
                             "check the file (e.g. gdalinfo -checksum) and export it again"
                             ) from None
        vals = np.ma.filled(band.astype(np.int64), -1)
        flat = out.reshape(-1)
        flat[inside] = vals[row[inside] - r0, col[inside] - c0]
    return out
