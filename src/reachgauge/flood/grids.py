"""Depth grids: one GeoTIFF per reach and flow (tiled, DEFLATE-compressed,
float32, nodata where dry), on the terrain's grid in the work CRS.

Each file is written under a hidden temporary name in its folder and renamed into
place when complete (:func:`reachgauge.lifecycle.temp_path`), so a file under its
final name is always whole. Files are per reach, not mosaicked per flow: a run's
reaches finish in different workers, and one file per flow would need them all
at once. The corridors of neighbouring reaches do not overlap
(:mod:`reachgauge.flood.corridor`), so the files of one flow tile the map
without double counting: a GIS mosaics them as they are (``gdalbuildvrt``).
"""

from __future__ import annotations

import os
import re
from pathlib import Path

import numpy as np
import rasterio

from reachgauge import lifecycle
from reachgauge.errors import InputError
from reachgauge.manning import FOOT

NODATA = -9999.0
BLOCK = 256


def grid_name(reach_id: str, flow: str) -> str:
    """``depth_<flow>_<reach>.tif``, every character that is not a letter, digit,
    dot or hyphen turned into '-': names valid on every file system."""
    def safe(s):
        return re.sub(r"[^A-Za-z0-9.\-]+", "-", str(s)).strip("-") or "x"

    return f"depth_{safe(flow)}_{safe(reach_id)}.tif"


def check_depth_dir(path) -> Path:
    """The folder of the depth grids must exist and be writable: checked before the
    work, so a run does not fail at its first reach."""
    p = Path(path)
    if not p.is_dir():
        raise InputError(f"--depth-grids {str(p)!r} is not a folder",
                         "create the folder first, or give an existing one")
    if not os.access(p, os.W_OK | os.X_OK):
        raise InputError(f"cannot write in the --depth-grids folder {str(p)!r}",
                         "give a folder you can write to")
    return p


def check_no_grids(path) -> None:
    """Depth grids of an earlier run in the folder are not replaced unasked: a run
    writes its grids as its reaches finish, so it refuses before the work."""
    old = sorted(Path(path).glob("depth_*.tif"))
    if old:
        raise InputError(f"the --depth-grids folder {str(path)!r} already holds {len(old)} depth "
                         f"grid(s) (e.g. {old[0].name})",
                         "add --overwrite to replace them, or give an empty folder")


def write_depth(folder, reach_id, flow, depth_m, transform, crs, units="si") -> Path:
    """Write ``depth_m`` (h, w) metres, NaN where dry, as a GeoTIFF in ``folder``;
    values in ft when ``units`` is "us". Returns the file's path."""
    target = Path(folder) / grid_name(reach_id, flow)
    d = np.asarray(depth_m, dtype=float) / (FOOT if units == "us" else 1.0)
    data = np.where(np.isfinite(d), d, NODATA).astype(np.float32)
    h, w = data.shape
    profile = dict(driver="GTiff", width=w, height=h, count=1, dtype="float32", crs=crs,
                   transform=transform, nodata=NODATA, compress="deflate", predictor=3,
                   tiled=True, blockxsize=BLOCK, blockysize=BLOCK)
    tmp = lifecycle.temp_path(target)
    try:
        with rasterio.open(tmp, "w", **profile) as dst:
            dst.write(data, 1)
            dst.update_tags(1, units="ft" if units == "us" else "m", quantity="water depth",
                            reach_id=str(reach_id), flow=str(flow))
        os.replace(tmp, target)
    finally:
        lifecycle.remove_temp(tmp)
    return target
