"""One reach's whole job, as a task any executor can run.

A reach is the unit of work: :func:`process_reach` gets one reach's geometry
and parameters (all picklable, and only this reach's rows of the run-wide
tables), opens the raster itself, reads only the window around the reach, and
returns plain tables. Nothing holds the whole raster.
"""

from __future__ import annotations

import time
import traceback
from dataclasses import dataclass, field

import numpy as np

from reachgauge.transects import cutting
from reachgauge.hydraulics import reach as hydraulics
from reachgauge.inputs import raster as raster_mod
from reachgauge.config import RunConfig
from reachgauge.errors import InputError


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


def process_reach(raster, reach, cfg: RunConfig, inputs: hydraulics.ReachInputs,
                  neighbours=None, landcover=None) -> ReachOutput:
    """The whole job for one reach. Never raises: a bad reach gets a status, an
    unexpected error is caught and reported as ``failed``."""
    t0 = time.perf_counter()
    rid = str(reach.reach_id)
    base = {"reach_id": rid, "name": reach.name or "", "status": reach.status,
            "message": reach.message, "orientation": reach.orientation,
            "reach_length": reach.length_m, "transects": 0, "transects_ok": 0}
    if reach.status != "ok":
        return ReachOutput(rid, None, base)
    try:
        with raster_mod.read_failures() as unreadable, raster_mod.open_raster(raster) as ds:
            rs = cutting.cut_reach(ds, raster, reach, cutting.CuttingParams.from_config(cfg),
                                   neighbours)
        if unreadable:   # a damaged file, not a bug: the reach says where
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
        res = hydraulics.analyse_reach(rs, hydraulics.ReachParams.from_config(cfg), inputs)
        return ReachOutput(rid, res, res.reach, transect_lines=list(rs.transects),
                           thalweg_xy=np.asarray(rs.thalweg_xy), offsets=np.asarray(rs.offsets),
                           seconds=time.perf_counter() - t0)
    except InputError as exc:
        base.update(status="bad-input", message=str(exc))
        return ReachOutput(rid, None, base, seconds=time.perf_counter() - t0)
    except Exception as exc:  # a bug: keep the batch going, report it
        base.update(status="failed", message=f"{type(exc).__name__}: {exc}")
        return ReachOutput(rid, None, base, error=traceback.format_exc(),
                           seconds=time.perf_counter() - t0)


