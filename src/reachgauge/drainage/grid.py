"""The run's drainage-area raster, made or checked once before the reach tasks.

``terrain``: the terrain raster is read whole (through the same warped view the
tasks read, so in the working CRS), optionally averaged onto a coarser grid
(``--drainage-coarsen F``: F × F cells into one), routed
(:mod:`reachgauge.drainage.routing`) and written as a tiled GeoTIFF of three
float32 bands, 1: contributing area (km²), 2: 1 where that area is a lower bound
(the watershed reaches the raster's edge or nodata), else 0, 3: the D8 codes
(pyflwdir's convention) the areas were accumulated along, from which channels
are derived when no streams are given (:mod:`reachgauge.drainage.channels`).
The file lives in the run's checkpoint folder under a name made from the
terrain's fingerprint, grid and factor: ``--resume`` finds and reuses it, and a
changed terrain gets a new file. It is written under a temporary name and renamed, so a run stopped
mid-write never leaves a half file to be reused.

A user's flow-accumulation raster is only checked here (CRS, grid, values);
tasks read it by windows like the terrain. Its unit is ``--accumulation-unit``:
``cells`` (counts of contributing cells, the cell itself included, times the cell
area) or ``km2``.

Peak memory of the terrain routing, above the process before it (measured in
``benchmarks/bench_drainage.py``): 34 bytes per cell on the demo's 0.96 M cells,
27 on 4 M cells (106 MB), 48 on 16 M cells (732 MB); plan for about 50 bytes per
cell routed, i.e. about 50 / F² per terrain cell with ``--drainage-coarsen F``.
"""

from __future__ import annotations

import hashlib
import os
import tempfile
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from reachgauge.errors import InputError

TERRAIN = "terrain"


@dataclass(frozen=True)
class DrainageSource:
    """Where the reach tasks read drainage area (picklable). ``path``: a raster
    whose band 1 is area (``scale``: km² per raster value) and, when
    ``lower_band``, band 2 the lower-bound mark; ``kind``: terrain or raster."""

    path: str
    kind: str
    scale: float = 1.0
    lower_band: bool = False


def is_terrain(value) -> bool:
    """``--drainage-area terrain`` (a TOML file may have prefixed its folder)."""
    return value is not None and Path(str(value)).name == TERRAIN and not Path(str(value)).is_file()


def attach(cfg, net, shared, folder):
    """Give ``shared`` (:class:`~reachgauge.batch.shared.SharedInputs`) the run's
    :class:`DrainageSource`, made in ``folder`` (the checkpoint folder; a
    temporary folder when None). Returns ``(shared, keep)``: hold ``keep`` (a
    temporary folder or None) as long as the tasks run."""
    if cfg.drainage_area is None or getattr(shared, "drainage", None) is not None:
        return shared, None
    keep = None
    if folder is None and is_terrain(cfg.drainage_area):
        keep = tempfile.TemporaryDirectory(prefix="reachgauge-drainage-")
        folder = keep.name
    shared.drainage = prepare(cfg, net.raster, folder)
    return shared, keep


def prepare(cfg, raster, folder) -> DrainageSource:
    """The :class:`DrainageSource` of the run: the terrain's routed raster in
    ``folder`` (made, or reused when already there), or the user's checked."""
    if is_terrain(cfg.drainage_area):
        factor = int(cfg.drainage_coarsen or 1)
        path = Path(folder) / f"drainage-{_key(raster, factor)}.tif"
        if not path.exists():
            _route_terrain(raster, factor, path)
        return DrainageSource(str(path), TERRAIN, 1.0, True)
    return check_user_raster(cfg.drainage_area, raster, cfg.accumulation_unit)


def _key(raster, factor: int) -> str:
    from reachgauge import drainage  # noqa: F401 - the package's own version is ours

    text = repr((raster.fingerprint, raster.path, tuple(raster.transform), raster.width,
                 raster.height, raster.work_crs.to_wkt(), factor, "d8-v2"))
    return hashlib.sha256(text.encode()).hexdigest()[:16]


def _read_whole(raster, factor: int):
    """The terrain (float32, NaN nodata) on the routed grid and that grid's transform."""
    from rasterio.enums import Resampling

    from reachgauge.inputs import raster as raster_mod

    shape = (max(raster.height // factor, 1), max(raster.width // factor, 1))
    with raster_mod.open_raster(raster) as ds:
        z = ds.read(1, out_shape=shape, masked=True, out_dtype="float32",
                    resampling=Resampling.average if factor > 1 else Resampling.nearest)
    transform = raster.transform @ raster.transform.scale(raster.width / shape[1],
                                                          raster.height / shape[0])
    return np.ma.filled(z.astype(np.float32), np.nan), transform


def _route_terrain(raster, factor: int, path: Path) -> None:
    import rasterio

    from reachgauge.drainage import routing

    z, transform = _read_whole(raster, factor)
    valid = np.isfinite(z)
    if not valid.any():
        raise InputError("the terrain raster holds no data to route for --drainage-area terrain",
                         "give a terrain raster with elevations")
    f = raster.xy_factor     # metres per unit of the working CRS
    dx, dy = abs(transform.a) * f, abs(transform.e) * f
    d8 = routing.d8_directions(z, valid, dx, dy)
    del z
    area, lower = routing.contributing_area(d8, dx * dy * 1e-6, routing.open_cells(valid))
    profile = {"driver": "GTiff", "width": area.shape[1], "height": area.shape[0], "count": 3,
               "dtype": "float32", "crs": raster.work_crs.to_wkt(), "transform": transform,
               "nodata": np.nan, "tiled": True, "blockxsize": 256, "blockysize": 256,
               "compress": "deflate", "BIGTIFF": "IF_SAFER"}
    tmp = path.with_name(path.name + ".part")
    with rasterio.open(tmp, "w", **profile) as dst:
        dst.write(area, 1)
        dst.write(np.where(valid, lower, np.nan).astype(np.float32), 2)
        dst.write(d8.astype(np.float32), 3)
    os.replace(tmp, path)


def check_user_raster(path, raster, unit: str) -> DrainageSource:
    """Check a user's flow-accumulation raster against the terrain: its CRS and
    pixel grid the terrain's own (so the cells are the same cells), no negative
    value. ``unit``: cells (count × cell area) or km2."""
    import rasterio
    from pyproj import CRS

    from reachgauge.inputs.raster import check_exists

    path = check_exists(path, "flow-accumulation raster", "--drainage-area")
    name = Path(str(path)).name
    try:
        src = rasterio.open(path)
    except rasterio.errors.RasterioIOError as exc:
        raise InputError(f"cannot open the flow-accumulation raster {name} ({exc})",
                         "give a raster file rasterio can read, or --drainage-area terrain"
                         ) from None
    with src:
        crs = CRS.from_wkt(src.crs.to_wkt()) if src.crs else None
        if crs is None or crs != raster.crs:
            raise InputError(f"the flow-accumulation raster {name} is in "
                             f"{crs.name if crs else 'no CRS'}, not the terrain's {raster.crs.name}",
                             "derive it from the terrain raster itself, on its grid "
                             "(or use --drainage-area terrain)")
        if crs.is_geographic:
            raise InputError(f"the flow-accumulation raster {name} is in degrees",
                             "give it on a projected grid in metres or feet")
        t, u = src.transform, _terrain_transform(raster)
        px = (t.c - u.c) / u.a, (t.f - u.f) / u.e
        if (abs(t.a - u.a) > 1e-6 * abs(u.a) or abs(t.e - u.e) > 1e-6 * abs(u.e)
                or any(abs(v - round(v)) > 1e-3 for v in px)):
            raise InputError(f"the flow-accumulation raster {name} is not on the terrain's "
                             f"grid (pixel {t.a:g} × {abs(t.e):g}, terrain {u.a:g} × {abs(u.e):g}, "
                             "or shifted by part of a pixel)",
                             "derive it from the terrain raster itself, on its grid")
        low = _minimum(src)
        cell_km2 = abs(t.a * t.e) * raster.xy_factor ** 2 * 1e-6
    if low < 0:
        raise InputError(f"the flow-accumulation raster {name} holds negative values "
                         f"(down to {low:g})", "give contributing cell counts or areas (≥ 0)")
    return DrainageSource(str(path), "raster", cell_km2 if unit == "cells" else 1.0, False)


def _terrain_transform(raster):
    """The terrain file's own transform (not the warped view's)."""
    import rasterio

    if not raster.warped:
        return raster.transform
    with rasterio.open(raster.path) as src:
        return src.transform


def _minimum(src) -> float:
    """Least valid value of band 1, by blocks (the raster is never read whole)."""
    low = np.inf
    for _, window in src.block_windows(1):
        band = src.read(1, window=window, masked=True)
        if band.count():
            low = min(low, float(band.min()))
    return low
