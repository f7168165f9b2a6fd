"""The ``run_info`` table: parameters, units, versions and input fingerprints
of a run, so a result can be traced to what made it.

The table holds what decides the result and nothing about how the run was
executed (worker count, scheduler, elapsed time), so the same inputs and
settings give the same file on any executor. The creation time is the run's
clock, or ``SOURCE_DATE_EPOCH`` where that is set (the reproducible-builds
convention, https://reproducible-builds.org/specs/source-date-epoch/), which
makes two runs byte-for-byte comparable.
"""

from __future__ import annotations

import dataclasses
import json
import os
import time
from pathlib import Path

import pandas as pd

from reachgauge.manning import FOOT, SQ_MILE_KM2


def created_utc() -> str:
    """The run's creation time, ISO 8601 UTC (``SOURCE_DATE_EPOCH`` when set)."""
    epoch = os.environ.get("SOURCE_DATE_EPOCH", "").strip()
    t = int(epoch) if epoch.isdigit() else time.time()
    return time.strftime("%Y-%m-%dT%H:%M:%SZ", time.gmtime(t))


def settings(cfg) -> dict:
    """Every setting that decides the result ({name: JSON-ready value}, lengths
    and areas in the run's units); the ``running`` group (jobs, scheduler) is left out."""
    out = {}
    for f in dataclasses.fields(cfg):
        if f.metadata.get("group") == "running":
            continue
        v = getattr(cfg, f.name)
        if f.metadata.get("length") and v is not None and cfg.units == "us":
            v = tuple(x / FOOT for x in v) if isinstance(v, tuple) else v / FOOT
        if f.metadata.get("area") and v is not None and cfg.units == "us":
            v = v / SQ_MILE_KM2
        out[f.name] = json.loads(json.dumps(str(v) if isinstance(v, Path) else v, default=str))
    return out


def inputs(cfg) -> dict:
    """Fingerprints of every input file the settings name ({setting: description})."""
    from reachgauge.config import PATH_FIELDS
    from reachgauge.inputs.raster import describe_file

    return {key: describe_file(getattr(cfg, key)) for key in PATH_FIELDS if getattr(cfg, key)}


def run_info(run, cfg, created: str | None = None) -> pd.DataFrame:
    """Key–value table: parameters, units, versions and input fingerprints."""
    import platform

    import geopandas
    import numpy
    import pyproj
    import rasterio
    import scipy
    import shapely

    from reachgauge import __version__
    from reachgauge.notices import CAUTION_LINE
    from reachgauge.results import schema

    rows = [("reachgauge_version", __version__), ("created_utc", created or created_utc()),
            ("units", cfg.units),
            ("unit_labels", json.dumps(schema.UNIT_LABELS[cfg.units], ensure_ascii=False)),
            ("vertical_units", getattr(run.network.raster, "z_unit", "m")),
            ("vertical_units_source", getattr(run.network.raster, "z_source", "")),
            ("crs", run.network.source_crs.to_string()),
            ("work_crs", run.network.work_crs.to_string()),
            ("caution", CAUTION_LINE)]
    rows += [(f"param.{k}", json.dumps(v)) for k, v in settings(cfg).items()]
    for name, mod in (("python", None), ("numpy", numpy), ("scipy", scipy), ("pandas", pd),
                      ("shapely", shapely), ("pyproj", pyproj), ("rasterio", rasterio),
                      ("geopandas", geopandas)):
        rows.append((f"version.{name}", platform.python_version() if mod is None
                     else mod.__version__))
    rows.append(("version.gdal", rasterio.__gdal_version__))
    rows += [(f"input.{k}", json.dumps(v)) for k, v in inputs(cfg).items()]
    rows += [("warning", w) for w in run.warnings]
    return pd.DataFrame(rows, columns=["key", "value"])
