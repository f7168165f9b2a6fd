"""Terrain elevations at many points: one windowed raster read, bilinear interpolation.

Points come as an array of any leading shape ending in 2 (x, y in the raster's
working CRS): all transects of a reach are one ``(t, n, 2)`` array and one read.
Only the window of the raster around the points is read (rasterio windowed read,
plus a one-pixel margin); a window larger than :data:`MAX_WINDOW_CELLS` is split
in halves along the points so memory stays bounded however long the reach.

Convention: a pixel's value belongs to its centre, which is at pixel coordinates
(col + 0.5, row + 0.5) of the affine transform (the GDAL "area" convention).
Interpolation is bilinear between the four surrounding pixel centres; if any of
them is nodata the result is NaN. Points beyond the outermost pixel centres are
*outside* the raster (NaN, reported separately from nodata).
Elevations come back in metres (the raster's values times ``z_factor``).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from affine import Affine
from rasterio.windows import Window
from scipy import ndimage

# Largest window read at once (cells of float64): 16 M cells is 128 MB.
MAX_WINDOW_CELLS = 16_000_000


@dataclass(frozen=True)
class Samples:
    """Sampled elevations, same leading shape as the points.

    ``z`` metres (NaN where there is no value); ``outside``: the point lies
    beyond the raster's outermost pixel centres; ``nodata``: inside, but a
    pixel it depends on is nodata.
    """

    z: np.ndarray
    outside: np.ndarray
    nodata: np.ndarray


def bilinear(grid, transform, xy) -> np.ndarray:
    """Bilinear interpolation of ``grid`` (2-D, NaN = no data) at points ``xy``.

    ``transform`` is the affine transform of ``grid`` (pixel corner (0, 0) at
    ``transform * (0, 0)``). Values are at pixel centres; any NaN among the four
    neighbours gives NaN, and so does a point beyond the outer pixel centres.
    Returns an array of shape ``xy.shape[:-1]``.
    """
    grid = np.asarray(grid, dtype=float)
    xy = np.asarray(xy, dtype=float)
    c, r = _fractional_index(transform, xy)
    h, w = grid.shape
    inside = (c >= 0) & (c <= w - 1) & (r >= 0) & (r <= h - 1)
    c = np.where(inside, c, 0.0)
    r = np.where(inside, r, 0.0)
    # The last row/column of centres is reached from the cell before it, so the
    # upper neighbour index never runs past the grid.
    j0 = np.clip(np.floor(c).astype(np.intp), 0, max(w - 2, 0))
    i0 = np.clip(np.floor(r).astype(np.intp), 0, max(h - 2, 0))
    j1 = np.minimum(j0 + 1, w - 1)
    i1 = np.minimum(i0 + 1, h - 1)
    fc = c - j0
    fr = r - i0
    # NaN times a zero weight is still NaN: a nodata neighbour always poisons.
    val = ((1 - fr) * ((1 - fc) * grid[i0, j0] + fc * grid[i0, j1])
           + fr * ((1 - fc) * grid[i1, j0] + fc * grid[i1, j1]))
    return np.where(inside, val, np.nan)


def _fractional_index(transform, xy):
    """Column and row of points, in units of pixels, measured from the centre
    of pixel (0, 0)."""
    a, b, c, d, e, f = (~transform)[:6]
    x, y = xy[..., 0], xy[..., 1]
    return a * x + b * y + c - 0.5, d * x + e * y + f - 0.5


def fill_single_pits(grid) -> np.ndarray:
    """Raise every pixel lower than all eight neighbours to the lowest of them.

    Single-cell sink filling, common practice in terrain preprocessing: a lone
    low pixel (a lidar blunder) cannot then pass for the thalweg, while a
    channel, whose bottom pixels have lower or equal neighbours along it, is
    untouched. NaN pixels stay NaN and never count as a neighbour.
    """
    g = np.asarray(grid, dtype=float)
    ring = np.ones((3, 3), dtype=bool)
    ring[1, 1] = False
    low = ndimage.minimum_filter(np.where(np.isnan(g), np.inf, g), footprint=ring,
                                 mode="constant", cval=np.inf)
    out = np.where(np.isfinite(low) & (g < low), low, g)
    return np.where(np.isnan(g), np.nan, out)


def read_window(ds, z_factor, xy, margin=1):
    """Read the raster window that covers points ``xy`` (plus ``margin`` pixels).

    Returns ``(grid, transform)``: the window as float64 metres with NaN for
    nodata, and the window's affine transform; ``(None, None)`` when the points
    miss the raster entirely.
    """
    pts = xy.reshape(-1, 2)
    pts = pts[np.all(np.isfinite(pts), axis=1)]
    if pts.size == 0:
        return None, None
    c, r = _fractional_index(ds.transform, pts)
    c0 = max(int(np.floor(c.min())) - margin, 0)
    r0 = max(int(np.floor(r.min())) - margin, 0)
    c1 = min(int(np.ceil(c.max())) + 1 + margin, ds.width)
    r1 = min(int(np.ceil(r.max())) + 1 + margin, ds.height)
    if c1 <= c0 or r1 <= r0:
        return None, None
    win = Window(c0, r0, c1 - c0, r1 - r0)
    band = ds.read(1, window=win, masked=True, out_dtype="float64")
    grid = np.ma.filled(band, np.nan) * z_factor
    a, b, c, d, e, f = ds.transform[:6]
    return grid, Affine(a, b, c + a * c0 + b * r0, d, e, f + d * c0 + e * r0)


def _window_cells(ds, xy):
    c, r = _fractional_index(ds.transform, xy.reshape(-1, 2))
    ok = np.isfinite(c) & np.isfinite(r)
    if not ok.any():
        return 0
    cc = np.clip(c[ok], 0, ds.width)
    rr = np.clip(r[ok], 0, ds.height)
    return (cc.max() - cc.min() + 3) * (rr.max() - rr.min() + 3)


def sample(ds, xy, *, z_factor=1.0, fill_pits=False) -> Samples:
    """Elevations (m) at points ``xy`` (shape ``(..., 2)``, working-CRS units)
    from the open dataset ``ds`` (a rasterio dataset or WarpedVRT).

    ``fill_pits`` fills single-pixel pits in the window first
    (:func:`fill_single_pits`), for the thalweg search.
    """
    xy = np.asarray(xy, dtype=float)
    shape = xy.shape[:-1]
    flat = xy.reshape(-1, 2)
    z = np.full(flat.shape[0], np.nan)
    _sample_into(ds, flat, z, np.arange(flat.shape[0]), z_factor, fill_pits)
    c, r = _fractional_index(ds.transform, flat)
    outside = ~((c >= 0) & (c <= ds.width - 1) & (r >= 0) & (r <= ds.height - 1))
    z = z.reshape(shape)
    outside = outside.reshape(shape)
    return Samples(z=z, outside=outside, nodata=np.isnan(z) & ~outside)


def _sample_into(ds, pts, out, idx, z_factor, fill_pits):
    # Split the points in halves until each window is small enough: a long,
    # diagonal reach never reads its whole bounding box at once.
    if idx.size > 1 and _window_cells(ds, pts[idx]) > MAX_WINDOW_CELLS:
        half = idx.size // 2
        _sample_into(ds, pts, out, idx[:half], z_factor, fill_pits)
        _sample_into(ds, pts, out, idx[half:], z_factor, fill_pits)
        return
    grid, transform = read_window(ds, z_factor, pts[idx])
    if grid is None:
        return
    if fill_pits:
        grid = fill_single_pits(grid)
    out[idx] = bilinear(grid, transform, pts[idx])
