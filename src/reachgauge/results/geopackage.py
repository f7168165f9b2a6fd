"""Writing results (an output edge of the tool).

Every write goes to a temporary file beside the target and is renamed into
place only when complete, so an existing result is never half-overwritten and a
failed run leaves nothing behind.
"""

from __future__ import annotations

import os
import tempfile
import time
from pathlib import Path

import pandas as pd

from reachgauge.errors import InputError
from reachgauge.manning import FOOT as FOOT_


def check_target(path, overwrite: bool) -> Path:
    """Refuse to replace an existing file unless ``overwrite``."""
    p = Path(path)
    if p.exists() and not overwrite:
        raise InputError(f"{str(p)!r} already exists", "choose another path or pass --overwrite")
    if p.exists() and p.is_dir():
        raise InputError(f"{str(p)!r} is a directory", "give a file path")
    if not p.parent.exists():
        raise InputError(f"folder {str(p.parent)!r} does not exist", "create it first")
    return p


class atomic_path:
    """Context manager yielding a temporary path beside ``target``; on success
    it is renamed onto the target, on failure removed."""

    def __init__(self, target, overwrite: bool = False):
        self.target = check_target(target, overwrite)

    def __enter__(self) -> Path:
        # keep the target's extension last: GDAL checks it (".part.gpkg")
        fd, name = tempfile.mkstemp(prefix=f".{self.target.stem}.",
                                    suffix=".part" + self.target.suffix, dir=self.target.parent)
        os.close(fd)
        os.unlink(name)  # writers such as GDAL want to create the file themselves
        self.tmp = Path(name)
        return self.tmp

    def __exit__(self, exc_type, exc, tb):
        if exc_type is None:
            os.replace(self.tmp, self.target)
        else:
            self.tmp.unlink(missing_ok=True)
        return False


def write_csv_atomic(table: pd.DataFrame, path, overwrite: bool = False) -> Path:
    """Write ``table`` as CSV to ``path`` atomically."""
    with atomic_path(path, overwrite) as tmp:
        table.to_csv(tmp, index=False, float_format="%.6g")
    return Path(path)


# ------------------------------------------------------------ the GeoPackage
def write_geopackage(path, layers: dict, crs, *, overwrite: bool = False) -> Path:
    """Write ``layers`` ({name: GeoDataFrame or DataFrame}) to one GeoPackage.

    Spatial layers are written with their geometry in ``crs``; plain frames
    become attribute tables. The file is built beside the target and renamed
    into place only when every layer is written.
    """
    import geopandas as gpd
    import pyogrio

    with atomic_path(path, overwrite) as tmp:
        for name, frame in layers.items():
            if isinstance(frame, gpd.GeoDataFrame):
                frame = frame.set_crs(crs, allow_override=True) if frame.crs is None else frame
            # the Arrow path writes a batch at a time (about 2.5x faster than row by row)
            pyogrio.write_dataframe(_plain_types(frame), tmp, layer=name, driver="GPKG",
                                    use_arrow=True)
    return Path(path)


def _plain_types(frame):
    """Columns as types GDAL writes as expected: bool stays bool, object → text."""
    out = frame.copy()
    for col in out.columns:
        if col == getattr(out, "_geometry_column_name", None):
            continue
        if out[col].dtype == object:
            out[col] = out[col].where(out[col].notna(), "").astype(str)
    return out


def write_csv_dir(folder, tables: dict, *, overwrite: bool = False) -> list[Path]:
    """Write each table as ``folder/<name>.csv`` (geometry as WKT), atomically each."""
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    paths = []
    for name, frame in tables.items():
        df = pd.DataFrame(frame)
        if "geometry" in df.columns:
            df["geometry"] = [g.wkt if g is not None else "" for g in df["geometry"]]
        paths.append(write_csv_atomic(df, folder / f"{name}.csv", overwrite=overwrite))
    return paths


# --------------------------------------------------------- assembling layers
def build_layers(run, cfg) -> dict:
    """The result layers of a run (see :mod:`reachgauge.schema`), in the run's
    units and the terrain raster's own CRS."""
    import geopandas as gpd
    import shapely

    from reachgauge.results import schema

    net = run.network
    work, source = net.work_crs, net.source_crs
    tr_frames, pt_frames, reach_rows, reach_geoms = [], [], [], []
    rating, stages, design, profile, cal, samples = [], [], [], [], [], []
    geom_by_id = {str(r.reach_id): r.geometry for r in net.reaches}
    for out in run.outputs:
        reach_rows.append(out.reach_row)
        reach_geoms.append(geom_by_id.get(out.reach_id))
        res = out.result
        if res is None:
            continue
        tr = res.transects.copy()
        tr_frames.append(gpd.GeoDataFrame(tr, geometry=list(out.transect_lines), crs=work))
        xy = out.thalweg_xy
        pts = shapely.points(xy[:, 0], xy[:, 1])
        pt_frames.append(gpd.GeoDataFrame(
            tr[["reach_id", "station", "chainage", "thalweg_z", "thalweg_shift", "status"]],
            geometry=pts, crs=work))
        rating.append(res.rating)
        samples.append(_sample_sections(out))
        stages.append(res.stages)
        design.append(res.design)
        profile.append(res.profile)
        cal.append(res.calibration)

    def cat(frames, fields):
        frames = [f for f in frames if f is not None and len(f)]
        df = pd.concat(frames, ignore_index=True) if frames else schema.empty_frame(fields)
        return schema.column_order(schema.to_units(df, fields, cfg.units), fields)

    def geo(frames, fields):
        frames = [f for f in frames if len(f)]
        if frames:
            g = gpd.GeoDataFrame(pd.concat(frames, ignore_index=True), crs=work)
        else:
            g = gpd.GeoDataFrame(schema.empty_frame(fields), geometry=gpd.GeoSeries([], crs=work))
        g = g.to_crs(source) if source != work else g
        df = schema.column_order(schema.to_units(pd.DataFrame(g), fields, cfg.units), fields)
        return gpd.GeoDataFrame(df, geometry="geometry", crs=source)

    reaches = gpd.GeoDataFrame(pd.DataFrame(reach_rows), geometry=reach_geoms, crs=work)
    if source != work:
        reaches = reaches.to_crs(source)
    reaches = gpd.GeoDataFrame(
        schema.column_order(schema.to_units(pd.DataFrame(reaches), schema.REACH_FIELDS, cfg.units),
                            schema.REACH_FIELDS), geometry="geometry", crs=source)
    layers = {
        "transects": geo(tr_frames, schema.TRANSECT_FIELDS),
        "reaches": reaches,
        "thalweg_points": geo(pt_frames, schema.TRANSECT_FIELDS),
        "rating_curves": cat(rating, schema.RATING_FIELDS),
        "stage_figures": cat(stages, schema.STAGE_FIELDS),
        "design_checks": cat(design, schema.DESIGN_FIELDS),
        "profile": cat(profile, schema.PROFILE_FIELDS),
        "calibration": cat(cal, schema.CALIBRATION_FIELDS),
        "sample_sections": cat(samples, schema.SAMPLE_SECTION_FIELDS),
    }
    layers["run_info"] = run_info(run, cfg)
    return layers


def _sample_sections(out, count: int = 4) -> pd.DataFrame:
    """Ground points of a few evenly spaced valid transects of a reach, so the
    report can draw sections from the GeoPackage alone."""
    import numpy as np

    res = out.result
    ok = np.nonzero((res.transects["status"] == "ok").to_numpy())[0]
    if ok.size == 0:
        return pd.DataFrame()
    pick = np.unique(ok[np.linspace(0, ok.size - 1, min(count, ok.size)).round().astype(int)])
    frames = []
    for i in pick:
        x, z = res.offsets[i], res.sections_z[i]
        keep = np.isfinite(z)
        frames.append(pd.DataFrame({"reach_id": out.reach_id, "station": int(i),
                                    "offset": x[keep], "elevation": z[keep]}))
    return pd.concat(frames, ignore_index=True)


def run_info(run, cfg) -> pd.DataFrame:
    """Key–value table: parameters, units, versions and input fingerprints."""
    import dataclasses
    import json
    import platform

    import geopandas
    import numpy
    import pyproj
    import rasterio
    import scipy
    import shapely

    from reachgauge import __version__
    from reachgauge.results import schema
    from reachgauge.config import PATH_FIELDS
    from reachgauge.inputs.network import describe_file
    from reachgauge.notices import CAUTION_LINE

    rows = [("reachgauge_version", __version__), ("created_utc", time.strftime("%Y-%m-%dT%H:%M:%SZ",
                                                                           time.gmtime())),
            ("units", cfg.units),
            ("unit_labels", json.dumps(schema.UNIT_LABELS[cfg.units], ensure_ascii=False)),
            ("crs", run.network.source_crs.to_string()),
            ("work_crs", run.network.work_crs.to_string()),
            ("elapsed_s", f"{run.elapsed:.2f}"), ("caution", CAUTION_LINE)]
    for f in dataclasses.fields(cfg):
        v = getattr(cfg, f.name)
        if f.metadata.get("length") and v is not None and cfg.units == "us":
            v = tuple(x / FOOT_ for x in v) if isinstance(v, tuple) else v / FOOT_
        rows.append((f"param.{f.name}", json.dumps(v if not isinstance(v, Path) else str(v),
                                                   default=str)))
    for name, mod in (("python", None), ("numpy", numpy), ("scipy", scipy), ("pandas", pd),
                      ("shapely", shapely), ("pyproj", pyproj), ("rasterio", rasterio),
                      ("geopandas", geopandas)):
        rows.append((f"version.{name}", platform.python_version() if mod is None
                     else mod.__version__))
    rows.append(("version.gdal", rasterio.__gdal_version__))
    for key in PATH_FIELDS:
        p = getattr(cfg, key)
        if p:
            rows.append((f"input.{key}", json.dumps(describe_file(p))))
    for w in run.warnings:
        rows.append(("warning", w))
    return pd.DataFrame(rows, columns=["key", "value"])
