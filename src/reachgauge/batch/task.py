"""One reach's whole job, as a task any executor can run.

A reach is the unit of work: :func:`process_reach` gets one reach's geometry
and parameters (all picklable, and only this reach's rows of the run-wide
tables), opens the raster itself, reads only the window around the reach, and
returns plain tables. Nothing holds the whole raster.

Open rasters are kept per thread between reaches (:func:`opened`): opening
costs on every reach otherwise (measured on the demo terrain: 1.8 ms to open
and read a 200 × 200 window, 0.06 ms to read it from a dataset kept open; 9.6
and 0.2 ms through a VRT of 64 tiles; more over HTTP, where each open is a
round trip). GDAL datasets are not safe to share between threads, hence one
cache per thread.
"""

from __future__ import annotations

import threading
import time
import traceback
from collections import OrderedDict
from contextlib import ExitStack
from dataclasses import dataclass, field

import numpy as np

from reachgauge.transects import cutting
from reachgauge.hydraulics import reach as hydraulics
from reachgauge.drainage.areas import drainage_area
from reachgauge.inputs import raster as raster_mod
from reachgauge.config import RunConfig
from reachgauge.errors import InputError


# datasets kept open per thread: a run reads one terrain; a long-lived Dask worker
# may serve a second run before the first one's dataset is dropped
KEEP_OPEN = 2
_threads = threading.local()


def _key(info) -> tuple:
    # the fingerprint (size, mtime, start of the file) tells a rewritten file from the old one
    return (info.path, info.fingerprint, info.warped, info.transform, info.width, info.height,
            info.crs.srs, info.work_crs.srs)


class _Kept:
    """An open dataset and what closes it. A thread that ends with datasets
    still kept (a Dask worker's thread, say) drops them when its thread-local
    storage goes, maybe after rasterio's own per-thread GDAL environment has
    gone: GDAL has closed the file by then and only rasterio's bookkeeping of
    that environment fails, so that failure is let pass."""

    def __init__(self, info):
        self.stack = ExitStack()
        self.ds = self.stack.enter_context(raster_mod.open_raster(info))

    def close(self):
        try:
            self.stack.close()
        except Exception:  # noqa: BLE001 - see the class docstring
            pass

    __del__ = close


def opened(info: raster_mod.RasterInfo):
    """:func:`reachgauge.inputs.raster.open_raster`, kept open in this thread for
    the next reach on the same raster (at most :data:`KEEP_OPEN`, the least
    recently used closed first). Reads still raise and record
    :class:`~reachgauge.inputs.raster.TerrainReadError`; see :func:`discard`."""
    cache = getattr(_threads, "open", None)
    if cache is None:
        cache = _threads.open = OrderedDict()
    key = _key(info)
    kept = cache.pop(key, None) or _Kept(info)
    cache[key] = kept
    while len(cache) > KEEP_OPEN:
        cache.popitem(last=False)[1].close()
    return kept.ds


def discard(info: raster_mod.RasterInfo) -> None:
    """Close this thread's kept dataset of ``info``: after a damaged read, or an
    unexpected error, the next reach starts from a freshly opened file."""
    kept = (getattr(_threads, "open", None) or {}).pop(_key(info), None)
    if kept is not None:
        kept.close()


def close_rasters() -> None:
    """Close the datasets this thread keeps open (the end of a serial run). A pool
    worker's end closes its own: the files are only read, nothing waits to be
    written."""
    cache = getattr(_threads, "open", None) or {}
    while cache:
        cache.popitem()[1].close()


@dataclass
class ReachOutput:
    """What one reach task returns: its tables (SI) and the geometry of its lines
    (work CRS)."""

    reach_id: str
    result: hydraulics.ReachResult | None
    reach_row: dict
    transect_lines: list = field(default_factory=list)
    thalweg_xy: np.ndarray | None = None
    offsets: np.ndarray | None = None
    error: str | None = None
    seconds: float = 0.0
    read_seconds: float = 0.0
    footprints: object = None    # reachgauge.flood.reach.Footprints, with --footprints


def run_task(finish, *args):
    """:func:`process_reach` on ``args``, the seconds spent reading terrain
    recorded, then ``finish(output, reach)`` where given (in the worker: see
    :class:`reachgauge.batch.keep.Keeper`)."""
    r0 = raster_mod.read_seconds()
    out = process_reach(*args)
    out.read_seconds = raster_mod.read_seconds() - r0
    return out if finish is None else finish(out, args[1])


def _footprints(raster, rs, res, cfg, neighbours):
    """The reach's design-flow footprints (:mod:`reachgauge.flood`), when asked for.
    A damaged terrain window costs the footprints only: the reach's message says so."""
    from reachgauge.flood.reach import FootprintParams, reach_footprints

    params = FootprintParams.from_config(cfg)
    if params is None:
        return None
    try:
        return reach_footprints(opened(raster), raster, rs, res, neighbours, params)
    except raster_mod.TerrainReadError as exc:
        discard(raster)
        res.reach["message"] = "; ".join(m for m in (res.reach.get("message"),
                                                      f"no footprints: {exc}") if m)
        return None


def process_reach(raster, reach, cfg: RunConfig, inputs: hydraulics.ReachInputs,
                  neighbours=None, landcover=None) -> ReachOutput:
    """The whole job for one reach. Never raises: a bad reach gets a status, an
    unexpected error is caught and reported as ``failed``."""
    t0 = time.perf_counter()
    rid = str(reach.reach_id)
    base = {"reach_id": rid, "name": reach.name or "", "status": reach.status,
            "message": reach.message, "orientation": reach.orientation,
            "reach_length": reach.length_m, "transects": 0, "transects_ok": 0,
            "stream_order": np.nan if reach.stream_order is None else float(reach.stream_order),
            "drainage_area": drainage_area(hydraulics.ReachParams.from_config(cfg),
                                           reach.attributes)}
    if reach.status != "ok":
        return ReachOutput(rid, None, base)
    try:
        with raster_mod.read_failures() as unreadable:
            rs = cutting.cut_reach(opened(raster), raster, reach,
                                   cutting.CuttingParams.from_config(cfg), neighbours)
        if unreadable:   # a damaged file, not a bug: the reach says where
            discard(raster)
            base.update(status="bad-input", message=unreadable[0], transects=len(rs.chainage))
            return ReachOutput(rid, None, base, seconds=time.perf_counter() - t0)
        if rs.status != "ok" or len(rs.chainage) == 0:
            base.update(status=rs.status, message=rs.message, transects=len(rs.chainage))
            # cut_reach turns its own unexpected errors into status "failed": still a bug
            return ReachOutput(rid, None, base, error=rs.message if rs.status == "failed" else None,
                               seconds=time.perf_counter() - t0)
        if landcover is not None and inputs.class_table:
            from reachgauge.inputs.landcover import classes_at

            inputs.classes = classes_at(landcover, rs.sample_points(), raster.work_crs)
        if inputs.drainage_source is not None:   # issue 12: a window of the area raster
            from reachgauge.drainage import at_transects

            inputs.drainage = at_transects(inputs.drainage_source, rs.thalweg_xy,
                                           cfg.snap_distance, raster.work_crs, raster.xy_factor)
        res = hydraulics.analyse_reach(rs, hydraulics.ReachParams.from_config(cfg), inputs)
        res.reach["stream_order"] = base["stream_order"]   # derived channels (issue 12)
        return ReachOutput(rid, res, res.reach, transect_lines=list(rs.transects),
                           thalweg_xy=np.asarray(rs.thalweg_xy), offsets=np.asarray(rs.offsets),
                           footprints=_footprints(raster, rs, res, cfg, neighbours),
                           seconds=time.perf_counter() - t0)
    except InputError as exc:
        base.update(status="bad-input", message=str(exc))
        return ReachOutput(rid, None, base, seconds=time.perf_counter() - t0)
    except Exception as exc:  # a bug: keep the batch going, report it
        discard(raster)
        base.update(status="failed", message=f"{type(exc).__name__}: {exc}")
        return ReachOutput(rid, None, base, error=traceback.format_exc(),
                           seconds=time.perf_counter() - t0)


