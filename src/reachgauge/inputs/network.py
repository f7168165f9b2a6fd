"""Load and check the inputs: the terrain raster and the stream centrelines.

This is the input edge: the raster half (any format rasterio reads: GeoTIFF,
cloud-optimised GeoTIFF paths, VRT mosaics; its CRS and elevation unit) lives in
:mod:`reachgauge.inputs.raster`; this module reads the streams (any vector
format geopandas/pyogrio reads), checks them, and returns a :class:`Network` of
plain, picklable descriptions. It keeps nothing open; a worker reopens the
raster from :class:`RasterInfo` alone with :func:`open_raster`.

CRS. The streams are reprojected to the raster's working CRS. A vector without
a CRS is an error unless ``cfg.streams_crs`` states it. Horizontal lengths are
metres (``xy_factor``); elevations are metres (``z_factor``, from the raster's
band unit or ``cfg.vertical_units``).

Reaches. A LineString is one reach; a MultiLineString's parts are merged where
they join, and the rest become separate reaches (``part`` 0, 1, …, ids
``<id>-1``, ``<id>-2``, …). ``cfg.split_length`` cuts long lines into equal
reaches of about that length. A feature that is empty, not a line, of zero
length, shorter than one station spacing, or off the raster still becomes a
reach, with a status from :data:`reachgauge.flags.REACH_STATUS`.

Orientation (``Reach.orientation``, codes our own):

- ``reversed-by-terrain``: the terrain at the line's drawn end stood higher
  than at its start, so the line was reversed to run downstream;
- ``kept-by-terrain``: the drawn start stood higher: kept;
- ``ambiguous-kept``: the ends differ by no more than :data:`ORIENT_TOLERANCE`
  (or one end has no terrain): kept as drawn;
- ``as-digitised``: ``cfg.orientation = "digitised"``: the drawn direction is
  trusted and the terrain not consulted.
- ``by-flow-direction``: a channel derived from the terrain's D8 flow
  directions (:mod:`reachgauge.drainage.channels`), drawn downstream.

The terrain at an end is the median of five samples along the line's first (or
last) stretch of ``min(L/4, 10 pixels)``, so one pit or one spike cannot decide.
"""

from __future__ import annotations

import math
import warnings
from collections import Counter
from dataclasses import dataclass, field
from pathlib import Path

import geopandas
import numpy as np
import pyogrio
import shapely
from pyproj import CRS
from shapely.ops import substring

from reachgauge.errors import InputError, ReachgaugeWarning, shown
from reachgauge.inputs import sampler
from reachgauge.inputs.raster import (  # noqa: F401 - the raster half, re-exported
    RasterInfo, TerrainReadError, check_exists, describe_file, describe_raster, fingerprint,
    open_raster, parse_crs)
from reachgauge.manning import FOOT

# Ends of a line closer in height than this (m) leave its direction to the drawing.
ORIENT_TOLERANCE = 0.1


@dataclass
class Reach:
    """One reach (picklable).

    ``geometry``: LineString in the work CRS, oriented downstream, or None when
    unusable; ``status`` from ``flags.REACH_STATUS`` and ``message`` saying why
    (or a note, e.g. a half-width field value that was replaced);
    ``orientation``: one of the codes in the module docstring ("" when the
    feature has no usable line); ``length_m``, ``half_width_m`` metres;
    ``attributes``: every field of the feature as plain Python values;
    ``source_index``: its row in the input; ``part``: its place among the
    reaches cut from that row (multi-part lines, ``split_length``).
    """

    reach_id: str
    name: str | None
    geometry: shapely.LineString | None
    status: str
    message: str
    orientation: str
    length_m: float
    half_width_m: float
    attributes: dict
    source_index: int
    part: int = 0
    start_chainage_m: float = 0.0  # where this piece starts along its source line
    stream_order: int | None = None  # Strahler order of a channel derived from the terrain


@dataclass
class Network:
    """The checked inputs: the raster, every reach (bad ones included), CRSs
    and the warnings raised while loading."""

    raster: RasterInfo
    reaches: list[Reach]
    source_crs: CRS
    work_crs: CRS
    warnings: list[str] = field(default_factory=list)
    streams_bounds: tuple = ()   # (left, bottom, right, top) of every feature, work CRS
    _tree: object = field(default=None, init=False, repr=False, compare=False)

    def _usable(self):
        return [r for r in self.reaches if r.geometry is not None]

    @property
    def other_streams(self):
        """All usable reach lines as one MultiLineString (work CRS)."""
        return shapely.multilinestrings([r.geometry for r in self._usable()])

    def neighbours(self, reach: Reach, distance_m: float):
        """Lines of the other reaches within ``distance_m`` of ``reach`` (work
        CRS), as one MultiLineString, or None."""
        usable = self._usable()
        if reach.geometry is None or not usable:
            return None
        if self._tree is None:
            self._tree = shapely.STRtree([r.geometry for r in usable])
        idx = self._tree.query(reach.geometry, predicate="dwithin",
                               distance=distance_m / self.raster.xy_factor)
        near = [usable[i].geometry for i in sorted(idx) if usable[i].reach_id != reach.reach_id]
        return shapely.multilinestrings(near) if near else None


def read_streams(cfg, work_crs: CRS, notes: list):
    """Read the streams layer into a GeoDataFrame in ``work_crs``."""
    path = check_exists(cfg.streams, "streams file", "--streams")
    try:
        layers = [str(n) for n in pyogrio.list_layers(path)[:, 0]]
    except Exception as exc:  # pyogrio raises several types for unreadable files
        raise InputError(f"cannot read the streams file {path!r} ({exc})",
                         "give a vector file GDAL reads (GeoPackage, shapefile, GeoJSON, "
                         "FlatGeobuf)") from None
    if cfg.layer is not None and cfg.layer not in layers:
        raise InputError(f"the streams file has no layer {cfg.layer!r}",
                         f"pick one of its layers: {', '.join(layers)}")
    layer = cfg.layer or layers[0]
    gdf = geopandas.read_file(path, layer=layer)
    if not isinstance(gdf, geopandas.GeoDataFrame) or len(gdf) == 0:
        raise InputError(f"layer {layer!r} of the streams file holds no features",
                         "give a layer of stream centrelines")
    if cfg.streams_crs:
        stated = parse_crs(cfg.streams_crs, "--streams-crs")
        if gdf.crs is not None and CRS(gdf.crs) != stated:
            notes.append(f"the streams file says its CRS is {gdf.crs.name}; --streams-crs "
                         f"{cfg.streams_crs} is used instead, as stated")
        gdf = gdf.set_crs(stated, allow_override=True)
    elif gdf.crs is None:
        raise InputError(f"the streams file {Path(path).name} has no CRS",
                         "state it with --streams-crs (e.g. EPSG:4326)")
    if CRS(gdf.crs) != work_crs:
        gdf = gdf.to_crs(work_crs)
    return gdf


def _check_field(gdf, name, option):
    fields = [c for c in gdf.columns if c != gdf.geometry.name]
    if name not in fields:
        raise InputError(f"the streams have no field {name!r} (for {option})",
                         f"pick one of: {', '.join(map(str, fields)) or '(no fields)'}")


def _plain(v):
    """A field value as a plain Python type (None for missing)."""
    if v is None or (isinstance(v, float) and math.isnan(v)):
        return None
    if hasattr(v, "isoformat"):
        return v.isoformat()
    if isinstance(v, np.generic):
        v = v.item()
        return None if isinstance(v, float) and math.isnan(v) else v
    return v


def _id_text(v):
    v = _plain(v)
    if isinstance(v, float) and v.is_integer():
        v = int(v)
    return None if v is None or str(v).strip() == "" else str(v)


def _ids(gdf, cfg):
    if cfg.id_field is None:
        return [str(i + 1) for i in range(len(gdf))]
    _check_field(gdf, cfg.id_field, "--id-field")
    ids = [_id_text(v) for v in gdf[cfg.id_field]]
    missing = [i for i, v in enumerate(ids) if v is None]
    if missing:
        raise InputError(f"{len(missing)} feature(s) have no {cfg.id_field} "
                         f"(first at row {missing[0]})",
                         "fill the ids, or leave --id-field out to have them assigned")
    dup = [v for v, k in Counter(ids).items() if k > 1]
    if dup:
        raise InputError(f"reach ids in {cfg.id_field} are not unique: {', '.join(dup[:5])}"
                         + (" ..." if len(dup) > 5 else ""), "give every feature its own id")
    return ids


def _lines_of(geom, directed):
    """(status, message, parts) of one feature's geometry."""
    if geom is None or geom.is_empty:
        return "empty-geometry", "the feature has no geometry", []
    geom = shapely.force_2d(geom)
    if geom.geom_type in ("LineString", "LinearRing"):
        parts = [shapely.LineString(geom.coords)]
    elif geom.geom_type == "MultiLineString":
        merged = shapely.line_merge(geom, directed=directed)
        parts = [merged] if merged.geom_type == "LineString" else list(merged.geoms)
    else:
        return "not-a-line", f"the feature is a {geom.geom_type}, not a line", []
    parts = [p for p in parts if p.length > 0]
    if not parts:
        return "zero-length", "the line has zero length", []
    return "ok", "", parts


def _end_height(ds, line, info, at_end):
    span = min(0.25 * line.length, 10 * info.res / info.xy_factor)
    d = np.linspace(0.0, span, 5)
    d = line.length - d if at_end else d
    pts = shapely.get_coordinates(shapely.line_interpolate_point(line, d))
    z = sampler.sample(ds, pts, z_factor=info.z_factor).z
    return float(np.median(z[np.isfinite(z)])) if np.isfinite(z).any() else math.nan


def _orient(ds, line, info, cfg):
    if cfg.orientation == "digitised":
        return line, "as-digitised"
    z0, z1 = _end_height(ds, line, info, False), _end_height(ds, line, info, True)
    if z1 - z0 > ORIENT_TOLERANCE:
        return line.reverse(), "reversed-by-terrain"
    if z0 - z1 > ORIENT_TOLERANCE:
        return line, "kept-by-terrain"
    return line, "ambiguous-kept"


def _half_width(attrs, cfg):
    if cfg.half_width_field is None:
        return cfg.half_width, ""
    v = attrs.get(cfg.half_width_field)
    try:
        hw = float(v) * (FOOT if cfg.units == "us" else 1.0)
    except (TypeError, ValueError):
        hw = math.nan
    if not hw > 0:
        return cfg.half_width, (f"{cfg.half_width_field} is {shown(v)}, not a positive length; "
                                f"--half-width {cfg.half_width:g} m used")
    return hw, ""


def _pieces(line, split_m, f):
    if not split_m:
        return [(line, 0.0)]
    k = max(1, round(line.length * f / split_m))
    step = line.length / k
    return [(substring(line, i * step, (i + 1) * step), i * step * f) for i in range(k)]


def load_network(cfg) -> "Network":
    """Read, check, reproject, orient and split the inputs of a run.

    Raises :class:`InputError` for a missing or unreadable file, a missing CRS,
    an unknown layer or field, duplicate ids, or a layer with no line at all.
    """
    notes: list[str] = []
    info = describe_raster(cfg, notes)
    gdf = read_streams(cfg, info.work_crs, notes)
    if cfg.name_field is not None:
        _check_field(gdf, cfg.name_field, "--name-field")
    if cfg.half_width_field is not None:
        _check_field(gdf, cfg.half_width_field, "--half-width-field")
    ids = _ids(gdf, cfg)
    records = gdf.drop(columns=gdf.geometry.name).to_dict("records")
    f = info.xy_factor
    extent = shapely.box(*info.bounds)
    reaches: list[Reach] = []
    with open_raster(info) as ds:
        for row, (geom, base, rec) in enumerate(zip(gdf.geometry.values, ids, records)):
            attrs = {str(k): _plain(v) for k, v in rec.items()}
            name = attrs.get(cfg.name_field) if cfg.name_field else None
            hw, hw_note = _half_width(attrs, cfg)
            status, message, parts = _lines_of(geom, directed=cfg.orientation == "digitised")
            common = dict(name=None if name is None else str(name), half_width_m=hw,
                          attributes=attrs, source_index=row)
            if status != "ok":
                reaches.append(Reach(base, geometry=None, status=status, message=message,
                                     orientation="", length_m=0.0, **common))
                continue
            pieces = []
            for line in parts:
                if not line.intersects(extent):
                    pieces.append((line, 0.0, "outside-raster", "",
                                   "the line lies outside the raster"))
                    continue
                try:
                    line, orient = _orient(ds, line, info, cfg)
                except TerrainReadError as exc:   # a damaged file: this reach says where
                    pieces.append((line, 0.0, "bad-input", "", str(exc)))
                    continue
                pieces += [(p, c0, "ok", orient, hw_note)
                           for p, c0 in _pieces(line, cfg.split_length, f)]
            for k, (line, c0, st, orient, msg) in enumerate(pieces):
                rid = base if len(pieces) == 1 else f"{base}-{k + 1}"
                length = line.length * f
                if st == "ok" and length < cfg.spacing:
                    st, msg = "too-short", (f"the line is {length:.3g} m long, shorter than the "
                                            f"station spacing {cfg.spacing:g} m")
                reaches.append(Reach(rid, geometry=line if st == "ok" else None, status=st,
                                     message=msg, orientation=orient, length_m=length, part=k,
                                     start_chainage_m=c0, **common))
    counts = Counter(r.reach_id for r in reaches)
    if len(counts) < len(reaches):
        clash = sorted(i for i, k in counts.items() if k > 1)
        raise InputError("reach ids clash after splitting lines into parts: "
                         + ", ".join(clash[:5]),
                         "rename the features whose ids end in -1, -2, ...")
    if not any(r.status not in ("empty-geometry", "not-a-line", "zero-length") for r in reaches):
        raise InputError("the streams layer holds no line features",
                         "give LineString or MultiLineString centrelines")
    for note in notes:
        warnings.warn(note, ReachgaugeWarning, stacklevel=2)
    return Network(raster=info, reaches=reaches, source_crs=info.crs, work_crs=info.work_crs,
                   warnings=notes, streams_bounds=tuple(gdf.total_bounds))
