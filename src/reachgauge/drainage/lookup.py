"""Drainage area at the transects of one reach, from a window of the run's
drainage raster (:class:`~reachgauge.drainage.grid.DrainageSource`).

The centreline and the raster's flow paths rarely coincide: each transect takes
the largest contributing area among the cells whose centre lies within the
snapping distance of its thalweg point, and records the distance to that cell's
centre. Only the window around the reach's points is read.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from reachgauge.errors import InputError


@dataclass
class AtTransects:
    """Per transect: ``area_km2``; ``snap_m``: distance (m) from the thalweg to
    the cell whose area was taken; ``lower_bound``: that area is a lower bound
    (its watershed reaches the raster's edge or nodata). ``source``: terrain,
    raster or field."""

    area_km2: np.ndarray
    snap_m: np.ndarray
    lower_bound: np.ndarray
    source: str


def at_transects(source, xy, radius_m: float, work_crs, xy_factor: float = 1.0) -> AtTransects:
    """Areas at the points ``xy`` (t, 2; work CRS, NaN for a transect without a
    thalweg) within ``radius_m`` metres (``xy_factor``: metres per raster CRS unit)."""
    import rasterio
    from pyproj import CRS, Transformer
    from rasterio.windows import Window

    pts = np.asarray(xy, dtype=float).reshape(-1, 2)
    t = len(pts)
    out = AtTransects(np.full(t, np.nan), np.full(t, np.nan), np.zeros(t, bool), source.kind)
    fin = np.all(np.isfinite(pts), axis=1)
    if not fin.any():
        return out
    try:
        src = rasterio.open(source.path)
    except rasterio.errors.RasterioIOError as exc:
        raise InputError(f"cannot open the drainage raster {source.path!r} ({exc})",
                         "check that the file is still there") from None
    with src:
        if CRS.from_user_input(work_crs) != CRS.from_wkt(src.crs.to_wkt()):
            tr = Transformer.from_crs(CRS.from_user_input(work_crs), CRS.from_wkt(src.crs.to_wkt()),
                                      always_xy=True)
            pts = pts.copy()
            pts[fin, 0], pts[fin, 1] = tr.transform(pts[fin, 0], pts[fin, 1])
        inv = ~src.transform
        col, row = inv @ (pts[:, 0], pts[:, 1])
        res = abs(src.transform.a) * xy_factor
        k = int(np.ceil(radius_m / res)) + 1
        c, r = np.floor(np.where(fin, col, 0)).astype(int), np.floor(np.where(fin, row, 0)).astype(int)
        c0, r0 = max(c[fin].min() - k, 0), max(r[fin].min() - k, 0)
        c1, r1 = min(c[fin].max() + k + 1, src.width), min(r[fin].max() + k + 1, src.height)
        if c1 <= c0 or r1 <= r0:
            return out
        win = Window(c0, r0, c1 - c0, r1 - r0)
        area = np.ma.filled(src.read(1, window=win, masked=True).astype(float), np.nan)
        area *= source.scale
        lower = (np.ma.filled(src.read(2, window=win, masked=True).astype(float), 0.0) > 0
                 if source.lower_band else np.zeros(area.shape, bool))
    return _pick(out, area, lower, col - c0, row - r0, fin, k, radius_m / res, res)


def _pick(out, area, lower, col, row, fin, k, radius_px, res):
    """Fill ``out`` with the largest area within ``radius_px`` pixels of each
    point (col, row: fractional pixel positions in the window)."""
    d = np.arange(-k, k + 1)
    for i in np.nonzero(fin)[0]:
        cc, rr = int(np.floor(col[i])) + d, int(np.floor(row[i])) + d
        ok_c, ok_r = (cc >= 0) & (cc < area.shape[1]), (rr >= 0) & (rr < area.shape[0])
        cc, rr = cc[ok_c], rr[ok_r]
        if not len(cc) or not len(rr):
            continue
        sub = area[np.ix_(rr, cc)]
        dist = np.hypot((cc + 0.5 - col[i])[None, :], (rr + 0.5 - row[i])[:, None])
        sub = np.where((dist <= radius_px + 1e-9) & np.isfinite(sub), sub, -np.inf)
        j = np.argmax(sub)
        if not np.isfinite(sub.flat[j]):
            continue
        a, b = np.unravel_index(j, sub.shape)
        out.area_km2[i] = sub[a, b]
        out.snap_m[i] = dist[a, b] * res
        out.lower_bound[i] = bool(lower[rr[a], cc[b]])
    return out
