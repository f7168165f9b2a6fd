"""Writing results (an output edge of the tool).

Every write goes to a temporary file beside the target and is renamed into
place only when complete, so an existing result is never half-overwritten and a
failed run leaves nothing behind.
"""

from __future__ import annotations

import errno
import os
import shutil
from pathlib import Path

import pandas as pd

from reachgauge import lifecycle
from reachgauge.errors import InputError, OutputError


def check_target(path, overwrite: bool) -> Path:
    """Refuse to replace an existing file unless ``overwrite``; refuse a target
    whose folder is missing or cannot be written, before any work is done."""
    p = Path(path)
    if p.is_dir():
        raise InputError(f"{str(p)!r} is a folder", "give a file path inside it")
    if p.exists() and not overwrite:
        raise InputError(f"{str(p)!r} already exists", "choose another path or pass --overwrite")
    if not p.parent.exists():
        raise InputError(f"folder {str(p.parent)!r} does not exist", "create it first")
    check_writable(p.parent)
    return p


def check_writable(folder) -> None:
    """Create and remove a file in ``folder``: the surest test that results
    can be written there (permissions, a read-only disk). Stale temporary
    files of ended runs in the folder are removed on the way
    (:mod:`reachgauge.lifecycle`)."""
    folder = Path(folder)
    if not folder.is_dir():
        raise InputError(f"{str(folder)!r} is not a folder", "give a path inside a folder")
    try:
        lifecycle.probe(folder)
    except OSError as exc:
        raise OutputError(f"cannot write in folder {str(folder)!r} ({exc.strerror})",
                          _fix_for(exc)) from None
    lifecycle.clean_stale(folder)


WRITE_ERRNOS = {errno.ENOSPC, errno.EDQUOT, errno.EFBIG, errno.EACCES, errno.EPERM, errno.EROFS,
                errno.EIO, errno.ENOENT, errno.ENOTDIR, errno.EISDIR}


def _fix_for(exc) -> str:
    if getattr(exc, "errno", None) in (errno.ENOSPC, errno.EDQUOT, errno.EFBIG):
        return "free some disk space or choose another folder, then run again"
    if getattr(exc, "errno", None) in (errno.EACCES, errno.EPERM, errno.EROFS):
        return "choose a folder you can write to"
    return "check the disk and the folder, then run again"


def write_failed(target, exc) -> OutputError:
    """The one-line error for a write that failed; the partial file is gone."""
    reason = getattr(exc, "strerror", None) or " ".join(str(exc).split()) or type(exc).__name__
    try:
        free = shutil.disk_usage(Path(target).parent).free
        space = f"; {free / 2**20:.0f} MB free there" if free < 2**30 else ""
    except OSError:
        space = ""
    return OutputError(f"cannot write {str(target)!r} ({reason}{space}); nothing was written "
                       "and any earlier file there is unchanged", _fix_for(exc))


def is_write_error(exc) -> bool:
    """A failure of the disk or the file system, not a bug: OSError with a
    write errno, or a GDAL write error from pyogrio."""
    if isinstance(exc, OSError):
        return exc.errno in WRITE_ERRNOS
    mod = type(exc).__module__ or ""
    return mod.startswith("pyogrio")


class atomic_path:
    """Context manager yielding a temporary path beside ``target``; on success
    it is renamed onto the target, on failure removed. A failed write becomes
    an :class:`OutputError`."""

    def __init__(self, target, overwrite: bool = False):
        self.target = check_target(target, overwrite)

    def __enter__(self) -> Path:
        # the target's extension stays last: GDAL picks the driver from it
        lifecycle.hold(self.target.parent)
        self.tmp = lifecycle.temp_path(self.target)
        return self.tmp

    def __exit__(self, exc_type, exc, tb):
        try:
            return self._finish(exc_type, exc)
        finally:
            lifecycle.release(self.target.parent)

    def _finish(self, exc_type, exc):
        if exc_type is None:
            try:
                with lifecycle.deferred():
                    os.replace(self.tmp, self.target)
                    lifecycle.STATE.written.append(self.target)
            except OSError as err:
                lifecycle.remove_temp(self.tmp)
                raise write_failed(self.target, err) from None
            return False
        lifecycle.remove_temp(self.tmp)
        if is_write_error(exc):
            raise write_failed(self.target, exc) from None
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
    with atomic_path(path, overwrite) as tmp:
        write_layers(tmp, layers, crs)
    return Path(path)


def write_layers(path, layers: dict, crs) -> None:
    """Write ``layers`` into the GeoPackage at ``path`` as it stands (no renaming)."""
    import geopandas as gpd
    import pyogrio

    for i, (name, frame) in enumerate(layers.items()):
        if isinstance(frame, gpd.GeoDataFrame):
            frame = frame.set_crs(crs, allow_override=True) if frame.crs is None else frame
        # the Arrow path writes a batch at a time (about 2.5x faster than row by row)
        pyogrio.write_dataframe(_plain_types(frame), path, layer=name, driver="GPKG",
                                use_arrow=True)
        if i == 0:
            lifecycle.checkpoint("writing")


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
        paths.append(write_csv_atomic(csv_frame(frame), folder / f"{name}.csv",
                                      overwrite=overwrite))
    return paths


def csv_frame(frame) -> pd.DataFrame:
    """A layer as a plain table for CSV: geometry as WKT text."""
    df = pd.DataFrame(frame)
    if "geometry" in df.columns:
        df["geometry"] = [g.wkt if g is not None else "" for g in df["geometry"]]
    return df


# ----------------------------------------------------- writing as reaches finish
class LayerWriter:
    """Append result rows to a GeoPackage (and CSV copies) in batches.

    Rows come a reach at a time (:func:`reachgauge.results.layers.reach_layers`)
    in the order the file keeps; they are held until ``batch_rows`` rows are
    waiting, then every waiting layer is appended (pyogrio's Arrow path: a batch
    at a time, about 2.5x faster than row by row). Memory is bounded by one
    batch, whatever the size of the run. ``csv``: {layer: path} of CSV copies,
    appended alongside.
    """

    def __init__(self, path, crs, units: str, csv: dict | None = None,
                 batch_rows: int = 200_000):
        self.path, self.crs, self.units = Path(path), crs, units
        self.csv = dict(csv or {})
        self.batch_rows = batch_rows
        self.pending: dict[str, list] = {}
        self.waiting = 0
        self.created: set[str] = set()
        self.rows: dict[str, int] = {}

    def add(self, layers: dict) -> None:
        for name, frame in layers.items():
            self.pending.setdefault(name, []).append(frame)
            self.waiting += len(frame)
        if self.waiting >= self.batch_rows:
            self.flush()

    def flush(self) -> None:
        from reachgauge.results.layers import LAYERS

        for name in LAYERS:
            frames = self.pending.pop(name, None)
            if frames:
                self._write(name, pd.concat(frames, ignore_index=True) if len(frames) > 1
                            else frames[0])
        self.waiting = 0

    def close(self, extra: dict) -> None:
        """Write what waits, every layer that got no row (empty, with its fields),
        and the plain tables of ``extra`` ({name: DataFrame}, e.g. run_info)."""
        from reachgauge.results.layers import LAYERS, empty

        self.flush()
        for name in LAYERS:
            if name not in self.created:
                self._write(name, empty(name, self.units, self.crs))
        for name, frame in extra.items():
            self._write(name, frame)

    def _write(self, name: str, frame) -> None:
        import geopandas as gpd
        import pyogrio

        if isinstance(frame, gpd.GeoDataFrame) and frame.crs is None:
            frame = frame.set_crs(self.crs)
        first = name not in self.created
        if first:
            _create_layer(self.path, name, _plain_types(frame), self.units)
        else:
            pyogrio.write_dataframe(_plain_types(frame), self.path, layer=name, driver="GPKG",
                                    use_arrow=True, append=True)
        if name in self.csv:
            csv_frame(frame).to_csv(self.csv[name], mode="w" if first else "a", header=first,
                                    index=False, float_format="%.6g")
        if not self.created:
            lifecycle.checkpoint("writing")
        self.created.add(name)
        self.rows[name] = self.rows.get(name, 0) + len(frame)


def _create_layer(path, name: str, frame, units: str) -> None:
    """Create layer ``name`` with its first rows, its description in
    ``gpkg_contents`` and a title and description of every schema field (with
    its unit) in ``gpkg_data_columns``, the OGC GeoPackage schema extension
    (http://www.geopackage.org/spec/#extension_schema), which desktop GIS show
    beside the fields. GDAL writes both: the layer's DESCRIPTION option and the
    ``GDAL:OGR:comment`` / ``GDAL:OGR:alternative_name`` metadata of the Arrow
    fields (https://gdal.org/en/stable/drivers/vector/gpkg.html)."""
    import geopandas as gpd
    import pyarrow as pa
    import pyogrio

    from reachgauge.results import schema
    from reachgauge.results.layers import LAYERS

    fields = LAYERS[name][0] if name in LAYERS else {}
    geo = isinstance(frame, gpd.GeoDataFrame)
    if geo:
        table = pa.table(frame.to_arrow(index=False, geometry_encoding="WKB"))
    else:
        table = pa.Table.from_pandas(pd.DataFrame(frame), preserve_index=False)
    described = []
    for f in table.schema:
        meta = dict(f.metadata or {})
        if f.name in fields:
            unit = schema.unit_of(fields, f.name, units)
            meaning = fields[f.name][1] + (f" ({unit})" if unit else "")
            meta[b"GDAL:OGR:comment"] = meaning.encode()
            meta[b"GDAL:OGR:alternative_name"] = f.name.replace("_", " ").encode()
        described.append(f.with_metadata(meta or None))
    table = table.cast(pa.schema(described)).replace_schema_metadata(None)
    kw = {}
    if geo:
        kinds = set(frame.geom_type.dropna())
        kw = dict(geometry_name="geometry", crs=frame.crs.to_wkt() if frame.crs else None,
                  geometry_type=kinds.pop() if len(kinds) == 1 else "Unknown")
    note = schema.LAYER_NOTES.get(name, "")
    pyogrio.write_arrow(table, path, layer=name, driver="GPKG",
                        layer_options={"DESCRIPTION": note} if note else None, **kw)
