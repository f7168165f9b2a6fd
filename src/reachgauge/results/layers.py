"""One reach's rows of every result layer, in their final form.

A reach's task returns tables in SI units and the working CRS; here they become
the rows the GeoPackage holds: the run's units, the raster's own CRS, the
schema's column order and one type per field (:func:`typed`), so that rows of
many reaches, written in batches as the reaches finish, always agree with the
layer the first batch created.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from pandas.api.types import infer_dtype

from reachgauge.results import schema

THALWEG_COLUMNS = ["reach_id", "station", "chainage", "thalweg_z", "thalweg_shift", "status"]
# layer name -> (fields, geometry type or None for a plain table); the order of the file
LAYERS = {
    "transects": (schema.TRANSECT_FIELDS, "LineString"),
    "reaches": (schema.REACH_FIELDS, "LineString"),
    "thalweg_points": ({k: schema.TRANSECT_FIELDS[k] for k in THALWEG_COLUMNS}, "Point"),
    "rating_curves": (schema.RATING_FIELDS, None),
    "stage_figures": (schema.STAGE_FIELDS, None),
    "design_checks": (schema.DESIGN_FIELDS, None),
    "profile": (schema.PROFILE_FIELDS, None),
    "calibration": (schema.CALIBRATION_FIELDS, None),
    "sample_sections": (schema.SAMPLE_SECTION_FIELDS, None),
    "footprints": (schema.FOOTPRINT_FIELDS, "MultiPolygon"),
}


def typed(df: pd.DataFrame, fields: dict) -> pd.DataFrame:
    """``df`` with one storage type per field kind, whatever the values of this
    batch: text as text ('' for none), flags as nullable booleans, counts as
    nullable integers, every other kind as float. Columns outside the schema are
    kept, as text when they hold objects. Columns already of their type are not
    copied (a run converts millions of values)."""
    out = {}
    for col in df.columns:
        s = df[col]
        kind = fields.get(col, (None,))[0]
        if col == "geometry":
            out[col] = s
        elif kind == "text" or (kind is None and s.dtype == object):
            out[col] = s if infer_dtype(s, skipna=False) == "string" else \
                s.where(s.notna(), "").astype(str)
        elif kind == "flag":
            out[col] = _booleans(s)
        elif kind == "count":
            out[col] = s.astype("Int64") if s.dtype.kind in "iu" else \
                pd.to_numeric(s, errors="coerce").round().astype("Int64")
        elif kind is not None:
            out[col] = s if s.dtype == np.float64 else pd.to_numeric(s, errors="coerce").astype(float)
        else:
            out[col] = s
    frame = pd.DataFrame(out, index=df.index, copy=False)
    if hasattr(df, "geometry"):
        import geopandas as gpd

        return gpd.GeoDataFrame(frame, geometry="geometry", crs=df.crs)
    return frame


def _booleans(s: pd.Series) -> pd.Series:
    if s.dtype == bool:
        return s.astype("boolean")
    if s.dtype.kind in "iuf":         # 0/1 with NaN for none
        v = s.to_numpy(dtype=float)
        return pd.Series(pd.arrays.BooleanArray(v != 0, np.isnan(v)), index=s.index)
    v = s.to_numpy(dtype=object)
    missing = pd.isna(v)
    # 'True'/'False' text (from a CSV round trip) reads as what it says
    truth = np.array([str(x).strip().lower() in ("true", "1", "1.0", "yes") for x in v], bool)
    return pd.Series(pd.arrays.BooleanArray(truth, missing), index=s.index)


def finish(df: pd.DataFrame, name: str, units: str) -> pd.DataFrame:
    """A frame of layer ``name`` (SI) in ``units``, in schema order and storage types."""
    fields = LAYERS[name][0]
    # every schema column in every batch: the first batch fixes the layer's fields
    df = df.assign(**{k: (None if kind == "text" else np.nan) for k, (kind, _m) in fields.items()
                      if k not in df.columns})
    out = schema.column_order(df if units == "si" else schema.to_units(df, fields, units), fields)
    if hasattr(df, "geometry"):
        import geopandas as gpd

        out = gpd.GeoDataFrame(out, geometry="geometry", crs=df.crs)
    return typed(out, fields)


def empty(name: str, units: str, crs):
    """The layer ``name`` with no rows (every schema column, its storage type)."""
    fields, geom = LAYERS[name]
    df = schema.empty_frame(fields)
    if geom is None:
        return finish(df, name, units)
    import geopandas as gpd

    return finish(gpd.GeoDataFrame(df, geometry=gpd.GeoSeries([], crs=crs)), name, units)


def reach_layers(out, line, units: str, work, source) -> dict:
    """Every layer's rows for one reach's output ``out`` (a
    :class:`~reachgauge.batch.task.ReachOutput`): in ``units`` ("si" or "us"), CRS
    ``source``.
    ``line``: the reach's centreline in ``work``. Layers the reach has no rows
    of are left out."""
    import geopandas as gpd
    import shapely

    def geo(df, geometry, name):
        g = gpd.GeoDataFrame(df.reset_index(drop=True), geometry=list(geometry), crs=work)
        return finish(g.to_crs(source) if source != work else g, name, units)

    layers = {"reaches": geo(pd.DataFrame([out.reach_row]), [line], "reaches")}
    res = out.result
    if res is None:
        return layers
    tr = res.transects
    layers["transects"] = geo(tr, out.transect_lines, "transects")
    xy = np.asarray(out.thalweg_xy, dtype=float).reshape(-1, 2)
    layers["thalweg_points"] = geo(tr[THALWEG_COLUMNS], shapely.points(xy[:, 0], xy[:, 1]),
                                   "thalweg_points")
    for name, frame in (("rating_curves", res.rating), ("stage_figures", res.stages),
                        ("design_checks", res.design), ("profile", res.profile),
                        ("calibration", res.calibration), ("sample_sections", sample_sections(out))):
        if frame is not None and len(frame):
            layers[name] = finish(frame.reset_index(drop=True), name, units)
    fp = getattr(out, "footprints", None)
    if fp is not None and len(fp.rows):
        layers["footprints"] = geo(fp.rows, fp.geometry, "footprints")
    return layers


def sample_sections(out, count: int = 4) -> pd.DataFrame:
    """Ground points of a few evenly spaced valid transects of a reach, so the
    report can draw sections from the GeoPackage alone."""
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
