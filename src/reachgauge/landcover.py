"""Land-cover classes at transect sample points (an input edge).

Classes are categorical, so they are read by nearest pixel, never
interpolated. A land-cover raster in another CRS than the working one is read
through a warped view (rasterio.vrt.WarpedVRT, nearest resampling). Only the
window around the points is read.
"""

from __future__ import annotations

import numpy as np
import rasterio
from rasterio.enums import Resampling
from rasterio.vrt import WarpedVRT
from rasterio.windows import Window

from .errors import InputError


def classes_at(path, xy, work_crs) -> np.ndarray:
    """Integer classes at points ``xy`` (..., 2) in ``work_crs``; -1 where the
    point is outside the raster or on nodata."""
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
        ds = src if src.crs == work_crs else WarpedVRT(src, crs=work_crs,
                                                       resampling=Resampling.nearest)
        try:
            pts = xy.reshape(-1, 2)
            fin = np.all(np.isfinite(pts), axis=1)
            if not fin.any():
                return out
            inv = ~ds.transform
            col, row = inv * (pts[:, 0], pts[:, 1])
            col = np.floor(np.asarray(col)).astype(np.int64)
            row = np.floor(np.asarray(row)).astype(np.int64)
            inside = fin & (col >= 0) & (col < ds.width) & (row >= 0) & (row < ds.height)
            if not inside.any():
                return out
            c0, c1 = col[inside].min(), col[inside].max() + 1
            r0, r1 = row[inside].min(), row[inside].max() + 1
            band = ds.read(1, window=Window(c0, r0, c1 - c0, r1 - r0), masked=True)
            vals = np.ma.filled(band.astype(np.int64), -1)
            flat = out.reshape(-1)
            flat[inside] = vals[row[inside] - r0, col[inside] - c0]
        finally:
            if ds is not src:
                ds.close()
    return out
