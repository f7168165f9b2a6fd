"""Run-level checks of inputs against the loaded network and the terrain,
before any reach runs (an input edge: it reads small raster windows).

Measured flows (observations) are matched to transects by chainage or by
position, and their stage is a water-surface elevation. Three mistakes would
otherwise pass silently: a chainage beyond the end of its reach (matched to the
last transect), a point far from its reach (matched to the nearest transect
anyway), and a stage below the ground (a negative depth in the calibration
table, typically a wrong datum or unit).
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import shapely

from reachgauge.errors import InputError
from reachgauge.inputs.raster import open_raster
from reachgauge.manning import FOOT


def _len(v_m: float, units: str) -> str:
    return f"{v_m / FOOT:.4g} ft" if units == "us" else f"{v_m:.4g} m"


def check_observations(obs, net, cfg) -> None:
    """Raise :class:`InputError` for the first observation that cannot be
    matched truthfully (module docstring). ``obs`` is SI, as read by
    :func:`reachgauge.inputs.tables.read_observations`."""
    if obs is None or not len(obs):
        return
    name = Path(cfg.observations).name if cfg.observations else "observations"
    reaches = {str(r.reach_id): r for r in net.reaches}
    info = net.raster
    f = info.xy_factor
    # the thalweg of the matched transect lies within snap-distance of a station
    # at most half a spacing from the point: no ground in that disc is lower
    radius = math.hypot(cfg.snap_distance, cfg.spacing / 2) + info.res
    with open_raster(info) as ds:
        for row in obs.itertuples(index=False):
            r = reaches.get(str(row.reach_id))
            if r is None or r.geometry is None:
                continue
            where = f"{name} line {getattr(row, 'line', '?')}"
            if np.isfinite(row.chainage):
                if row.chainage > r.length_m * (1 + 1e-9) + 1e-6:
                    raise InputError(
                        f"{where}: chainage {_len(row.chainage, cfg.units)} is beyond the end of "
                        f"reach {r.reach_id} ({_len(r.length_m, cfg.units)} long)",
                        "chainage runs along the reach from its upstream end: check the value, "
                        "its unit and the reach id")
                pt = r.geometry.interpolate(row.chainage / f)
                at = f"chainage {_len(row.chainage, cfg.units)}"
            else:
                pt = shapely.Point(row.x, row.y)
                off = r.geometry.distance(pt) * f
                if off > r.half_width_m:
                    raise InputError(
                        f"{where}: the point ({row.x:.1f}, {row.y:.1f}) is "
                        f"{_len(off, cfg.units)} from reach {r.reach_id}, farther than its "
                        f"half-width ({_len(r.half_width_m, cfg.units)})",
                        f"give x and y in the raster's CRS ({net.work_crs.name}), near the "
                        "reach, or a chainage instead")
                at = f"({row.x:.1f}, {row.y:.1f})"
            if np.isfinite(row.stage):
                low = _lowest_ground(ds, info, pt, radius / f)
                if np.isfinite(low) and row.stage <= low:
                    raise InputError(
                        f"{where}: stage {_len(row.stage, cfg.units)} at reach {r.reach_id}, "
                        f"{at}, is not above the lowest ground within "
                        f"{_len(radius, cfg.units)} of that point ({_len(low, cfg.units)})",
                        "a stage is a water-surface elevation in the terrain's vertical datum: "
                        "check its datum and unit (the file's '# units:' line), or give a depth")


def _lowest_ground(ds, info, pt, radius) -> float:
    """Lowest terrain elevation (m) at pixel centres within ``radius`` (work
    CRS units) of ``pt``; NaN where there is none."""
    from reachgauge.inputs.sampler import read_window

    x, y = pt.x, pt.y
    corners = np.array([[x - radius, y - radius], [x + radius, y + radius],
                        [x - radius, y + radius], [x + radius, y - radius]])
    grid, tr = read_window(ds, info.z_factor, corners)
    if grid is None:
        return math.nan
    rows, cols = np.indices(grid.shape)
    cx = tr.c + (cols + 0.5) * tr.a + (rows + 0.5) * tr.b
    cy = tr.f + (cols + 0.5) * tr.d + (rows + 0.5) * tr.e
    near = np.hypot(cx - x, cy - y) <= radius
    vals = grid[near & np.isfinite(grid)]
    return float(vals.min()) if vals.size else math.nan
