"""Channel centrelines derived from the terrain when no streams are given
(issue 12: ``--drainage-area terrain --channel-area A`` without ``--streams``).

A channel is every cell whose contributing area (the run's routed raster,
:mod:`reachgauge.drainage.grid`) is at least ``A`` km². pyflwdir cuts the
channel cells into segments along the D8 directions (``FlwdirRaster.streams``:
a segment runs from a channel head or a confluence down to the next
confluence or outlet, so reaches are split at confluences and end where the
water leaves the raster) and gives each its Strahler order
(``FlwdirRaster.stream_order``; Strahler 1957, "Quantitative analysis of
watershed geomorphology"). The lines run downstream, through pixel centres.

Smoothing: a D8 path is a staircase of 45° and 90° steps; a transect cut
square to such a line swings by 45° from one station to the next unless the
direction is smoothed over several pixels. Each line's vertices are replaced
by their moving average over :data:`SMOOTH_CELLS` cells (scipy's
``uniform_filter1d``), its two ends kept in place so reaches still meet at
confluences. On a straight valley at any angle the average of a staircase lies
within half a pixel of the valley's line (the staircase itself is within one
pixel of it), and the line's direction turns by at most 9° from vertex to
vertex on the test's valleys at 29° and 33° off the grid, against 45° without
(measured with ``tests/test_channels.py``'s terrain).

Memory (``benchmarks/bench_channels.py``, pyflwdir's flow-direction object,
stream order and segments): 28 bytes per routed cell on 1 M and 4 M cells, 42
on 16 M (641 MB), on top of the area and D8 bands read back (9 bytes per cell);
the routing before it has freed its own arrays, so a run's peak stays about
the routing's (:mod:`reachgauge.drainage.grid`).

The lines are written (atomically) as a GeoPackage in the run's checkpoint
folder, named from the routed raster and the threshold, so ``--resume`` reads
them back instead of deriving them again; the run then loads them as its
streams (:func:`derived_network`).
"""

from __future__ import annotations

import hashlib
import os
from pathlib import Path

import numpy as np

from reachgauge.errors import InputError

LAYER = "channels"
ID_FIELD = "channel_id"
ORDER_FIELD = "strahler_order"
SMOOTH_CELLS = 5          # vertices in the moving average (odd: centred)
ORIENTATION = "by-flow-direction"   # the reaches' orientation code (inputs/network.py)


def derives(cfg) -> bool:
    """True when the run derives its channels from the terrain (no streams given)."""
    return cfg.streams is None and getattr(cfg, "channel_area", None) is not None


def channel_lines(d8: np.ndarray, area: np.ndarray, transform, threshold_km2: float,
                  units: str = "si"):
    """(lines, Strahler orders) of the channels where ``area`` (km², NaN off
    the data) is at least ``threshold_km2``, along the D8 codes ``d8`` (pyflwdir's
    convention); ``transform``: the grid's affine transform. Lines are
    coordinate arrays (n × 2, downstream last) in the transform's CRS, smoothed
    (module docstring), in a stable order: highest order first, then by the
    downstream end's row and column, then the upstream end's."""
    import pyflwdir

    mask = np.isfinite(area) & (area >= threshold_km2)
    if not mask.any():
        from reachgauge.manning import SQ_MILE_KM2

        k, unit = (1 / SQ_MILE_KM2, "mi²") if units == "us" else (1.0, "km²")
        top = float(np.nanmax(area)) if np.isfinite(area).any() else 0.0
        raise InputError(f"no channel drains --channel-area {threshold_km2 * k:.4g} {unit} or "
                         f"more: the largest contributing area on the terrain is "
                         f"{top * k:.4g} {unit}",
                         f"lower --channel-area below {top * k:.4g} {unit}")
    flw = pyflwdir.from_array(d8, ftype="d8", transform=transform, latlon=False,
                              check_ftype=False)
    order = flw.stream_order(mask=mask).astype(np.int32)
    rows = []
    for feat in flw.streams(mask=mask, strord=order):
        xy = np.asarray(feat["geometry"]["coordinates"], float)
        if len(xy) < 2 or np.all(xy[0] == xy[-1]):
            continue          # pyflwdir marks an outlet with a zero-length line
        idx = flw.index(xy[[-1, 0], 0], xy[[-1, 0], 1])   # downstream, upstream cell
        rc = np.column_stack(np.unravel_index(idx, d8.shape)).ravel()
        rows.append((-int(feat["properties"]["strord"]), *map(int, rc), _smooth(xy)))
    rows.sort(key=lambda r: r[:5])
    return [r[5] for r in rows], [-r[0] for r in rows]


def _smooth(xy: np.ndarray) -> np.ndarray:
    if len(xy) <= 2:
        return xy
    from scipy.ndimage import uniform_filter1d

    out = uniform_filter1d(xy, size=SMOOTH_CELLS, axis=0, mode="nearest")
    out[0], out[-1] = xy[0], xy[-1]
    return out


def write_channels(source_path, threshold_km2: float, path: Path, units: str = "si") -> None:
    """Derive the channels from the routed raster ``source_path`` (band 1 area
    km², band 3 D8 codes) and write them to the GeoPackage ``path`` (layer
    :data:`LAYER`: ids ``c0001``…, Strahler order), under a temporary name first."""
    import geopandas
    import rasterio
    import shapely

    with rasterio.open(source_path) as src:
        area = src.read(1)
        d8 = src.read(3).astype(np.uint8)
        transform, crs = src.transform, src.crs
    lines, orders = channel_lines(d8, area, transform, threshold_km2, units)
    del area, d8
    ids = [f"c{i + 1:04d}" for i in range(len(lines))]
    gdf = geopandas.GeoDataFrame({ID_FIELD: ids, ORDER_FIELD: np.asarray(orders, np.int32)},
                                 geometry=[shapely.LineString(c) for c in lines], crs=crs)
    tmp = path.with_name(path.stem + ".part.gpkg")
    tmp.unlink(missing_ok=True)
    gdf.to_file(tmp, layer=LAYER, driver="GPKG")
    os.replace(tmp, path)


def derived_network(cfg, folder):
    """The run's :class:`~reachgauge.inputs.network.Network` of channels derived
    from the terrain: routes it into ``folder`` (or reuses the routed raster
    there), derives the lines (or reuses their file there) and loads them as
    streams, oriented as derived (downstream)."""
    from reachgauge.drainage.grid import prepare
    from reachgauge.inputs import network

    notes: list[str] = []
    info = network.describe_raster(cfg, notes)
    source = prepare(cfg, info, folder)
    key = hashlib.sha256(repr((Path(source.path).name, float(cfg.channel_area), SMOOTH_CELLS,
                               "channels-v1")).encode()).hexdigest()[:16]
    path = Path(folder) / f"channels-{key}.gpkg"
    if not path.exists():
        write_channels(source.path, cfg.channel_area, path, cfg.units)
    net = network.load_network(cfg.replace(streams=path, layer=LAYER, id_field=ID_FIELD,
                                           orientation="digitised", streams_crs=None))
    for r in net.reaches:
        r.stream_order = int(r.attributes[ORDER_FIELD])
        if r.orientation:
            r.orientation = ORIENTATION
    return net
