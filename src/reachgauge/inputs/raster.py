"""The terrain raster (an input edge): open it, check its CRS and elevation
unit, choose the working CRS, and read it so that a damaged file is a clear
answer rather than a bug.

CRS. A raster in a geographic CRS (degrees) is worked in a projected CRS —
``cfg.work_crs`` or its UTM zone — through a warped view (rasterio WarpedVRT,
bilinear), with a warning: metres are never computed from degrees. A raster
without a CRS is an error unless ``cfg.dem_crs`` states it. Horizontal lengths
are metres (``xy_factor`` converts a CRS in feet).

Elevation unit. The band's unit tag (GDAL's band unit type, rasterio
``ds.units``) is read: ``m``/``metre``, ``ft``/``foot`` or US survey feet.
A tag that contradicts ``--vertical-units`` is an error; with no tag the unit is
``--vertical-units``, else metres. ``RasterInfo.z_unit`` and ``z_source`` say
which unit was used and why, and the result's ``run_info`` records both.

Damaged files. :func:`open_raster` yields a dataset whose reads raise
:class:`TerrainReadError` (an :class:`InputError`) naming the window that could
not be read — a corrupt tile under a valid header — and record it for
:func:`read_failures`, so the batch gives that reach a status instead of
counting an internal error.

Remote rasters (a URL, a GDAL virtual path) and mosaics (VRT): see
:mod:`reachgauge.inputs.locations`.
"""

from __future__ import annotations

import math
import os
import threading
import time
from contextlib import contextmanager
from dataclasses import dataclass

import numpy as np
import rasterio
from affine import Affine
from pyproj import CRS, Transformer
from pyproj.aoi import AreaOfInterest
from pyproj.database import query_utm_crs_info
from pyproj.exceptions import CRSError
from rasterio.enums import Resampling
from rasterio.vrt import WarpedVRT

from reachgauge.config import remote_location
from reachgauge.errors import InputError

# GDAL keeps decoded raster blocks in a cache of 5 % of the machine's memory by
# default, per process: over a long run every worker grows to it (measured on
# the benchmark region: +200 MB per 100 reaches a worker). A reach reads its
# window twice (thalweg search, then the sections), a few MB of decoded blocks,
# so 64 MB keeps what is reused and bounds the rest. GDAL_CACHEMAX set by the
# user wins (MB, or a percentage such as "5%").
os.environ.setdefault("GDAL_CACHEMAX", "64")
# check_exists, describe_file and fingerprint are re-exported: callers import them from here
from reachgauge.inputs.locations import (  # noqa: F401
    check_exists, describe_file, display_name, fingerprint, opened)
from reachgauge.manning import FOOT

US_SURVEY_FOOT = 1200 / 3937   # metres (US survey foot, exact by definition)
# band unit tags, lower-cased with spaces, dots, dashes and underscores removed
UNIT_TAGS = {
    **{t: ("m", 1.0) for t in ("m", "metre", "meter", "metres", "meters")},
    **{t: ("ft", FOOT) for t in ("ft", "foot", "feet", "internationalfoot", "intlfoot",
                                 "ftintl", "internationalfeet")},
    **{t: ("US survey ft", US_SURVEY_FOOT)
       for t in ("usft", "ftus", "ussurveyfoot", "ussurveyfeet", "usfoot", "usfeet",
                 "footus", "surveyfoot")},
}


@dataclass(frozen=True)
class RasterInfo:
    """What a worker needs to reopen and read the raster (picklable).

    ``crs``: the raster's own CRS; ``work_crs``: the projected CRS everything
    is computed in; ``warped``: read through a WarpedVRT into ``work_crs`` on
    the grid ``transform`` / ``width`` / ``height``; ``res``: pixel size in
    metres; ``bounds`` (left, bottom, right, top) in ``work_crs``; ``nodata``:
    the file's nodata value; ``z_factor``: metres per vertical unit;
    ``xy_factor``: metres per ``work_crs`` unit; ``fingerprint``: see
    :func:`fingerprint`; ``z_unit`` and ``z_source``: the elevation unit used and
    where it came from. ``path`` is text: a local path, a URL or a GDAL virtual
    path, as given (workers reopen it).
    """

    path: str
    crs: CRS
    work_crs: CRS
    warped: bool
    res: float
    bounds: tuple
    nodata: float | None
    z_factor: float
    xy_factor: float
    fingerprint: str
    transform: Affine
    width: int
    height: int
    crs_stated: bool = False
    z_unit: str = "m"
    z_source: str = ""


# ------------------------------------------------------------------- reading
class TerrainReadError(InputError):
    """Part of the terrain raster cannot be read (a damaged file)."""


_local = threading.local()


@contextmanager
def read_failures():
    """Collect the messages of :class:`TerrainReadError` raised in this thread
    during the block (the reach task catches every exception itself)."""
    prev = getattr(_local, "log", None)
    _local.log = log = []
    try:
        yield log
    finally:
        _local.log = prev


class _Guarded:
    """A rasterio dataset whose ``read`` reports a damaged window clearly."""

    def __init__(self, ds, name):
        self._ds, self._name = ds, name

    def __getattr__(self, attr):
        return getattr(self._ds, attr)

    def read(self, *args, **kwargs):
        t0 = time.perf_counter()
        try:
            return self._ds.read(*args, **kwargs)
        except rasterio.errors.RasterioError as exc:
            where = _window_text(self._ds, kwargs.get("window"))
            cause = exc.__cause__ or exc.__context__ or exc   # GDAL's own words, if chained
            gdal = " ".join(str(cause).split())[:200]
            fix = ("the server did not deliver that part (network or server trouble): run "
                   "again, or download the file and give its local path"
                   if remote_location(self._name) else
                   "the file is damaged there (a corrupt tile?): check it with "
                   "'gdalinfo -checksum' and export or download it again")
            err = TerrainReadError(
                f"the terrain raster {self._name} cannot be read {where} ({gdal})", fix)
            log = getattr(_local, "log", None)
            if log is not None:
                log.append(str(err))
            raise err from None
        finally:
            _local.read_s = getattr(_local, "read_s", 0.0) + time.perf_counter() - t0


def read_seconds() -> float:
    """Seconds this thread has spent reading terrain windows (for the run's timings)."""
    return getattr(_local, "read_s", 0.0)


def _window_text(ds, window):
    if window is None:
        return "at all"
    r0, c0 = int(window.row_off), int(window.col_off)
    r1, c1 = r0 + int(window.height) - 1, c0 + int(window.width) - 1
    left, bottom, right, top = rasterio.windows.bounds(window, ds.transform)
    return (f"in rows {r0}–{r1}, columns {c0}–{c1} (x {left:.1f}–{right:.1f}, "
            f"y {bottom:.1f}–{top:.1f})")


@contextmanager
def open_raster(info: RasterInfo):
    """Open the raster for reading in ``info.work_crs``: the dataset itself, or
    a WarpedVRT (bilinear, nodata NaN, float64) on the grid recorded in ``info``.
    Reads of a damaged window raise :class:`TerrainReadError`."""
    name = display_name(info.path)
    with opened(info.path, TerrainReadError, "cannot open the terrain raster "
                 f"{name}", "check that the file is still there and readable") as src:
        if not info.warped:
            yield _Guarded(src, name)
            return
        with WarpedVRT(src, src_crs=_rio(info.crs), crs=_rio(info.work_crs),
                       transform=info.transform, width=info.width, height=info.height,
                       resampling=Resampling.bilinear, nodata=np.nan, dtype="float64") as vrt:
            yield _Guarded(vrt, name)


def _rio(crs: CRS):
    return rasterio.crs.CRS.from_wkt(crs.to_wkt())


def parse_crs(text, option):
    try:
        return CRS.from_user_input(text)
    except CRSError:
        raise InputError(f"{option} {text!r} is not a CRS that pyproj knows",
                         "give an EPSG code such as EPSG:32633, or a WKT string") from None


def check_raster(path, what):
    """The raster at ``path`` opens and has a CRS (a clear error otherwise)."""
    import rasterio

    try:
        with rasterio.open(path) as ds:
            if ds.crs is None:
                raise InputError(f"{what} {str(path)!r} has no CRS",
                                 "assign one to the file or reproject it")
    except rasterio.errors.RasterioIOError as exc:
        raise InputError(f"cannot open {what} {str(path)!r} ({exc})",
                         "give a raster file rasterio can read") from None


def _unit_factor(crs: CRS) -> float:
    return float(crs.axis_info[0].unit_conversion_factor)


def vertical_unit(tag: str, stated: str | None, name: str) -> tuple[str, float, str]:
    """(unit, metres per unit, source) of the elevations from the band's unit
    ``tag`` and the unit ``stated`` with --vertical-units (None if not given)."""
    key = "".join(ch for ch in (tag or "").lower() if ch not in " ._-()")
    opt = {"m": ("m", 1.0), "ft": ("ft", FOOT)}
    if not key:
        if stated:
            return (*opt[stated], "--vertical-units (the raster states no unit)")
        return "m", 1.0, "assumed: the raster states no unit and --vertical-units was not given"
    if key not in UNIT_TAGS:
        if stated:
            return (*opt[stated], f"--vertical-units (band unit tag {tag!r} not recognised)")
        raise InputError(f"the terrain raster {name} gives its elevation unit as {tag!r}, which "
                         "is not a length unit reachgauge knows (m, ft, US survey ft)",
                         "state the unit with --vertical-units m or ft")
    unit, factor = UNIT_TAGS[key]
    family = "m" if unit == "m" else "ft"
    if stated and stated != family:
        raise InputError(f"the terrain raster {name} says its elevations are in {tag!r} (band "
                         f"unit tag), but --vertical-units is {stated}",
                         "leave --vertical-units out to use the raster's own unit, or correct "
                         "the raster's band unit if it is wrong")
    return unit, factor, f"band unit tag {tag!r}" + ("; --vertical-units agrees" if stated else "")


def describe_raster(cfg, notes: list) -> RasterInfo:
    """Open the raster once, check its CRS and elevation unit and choose the
    working CRS."""
    path = check_exists(cfg.dem, "terrain raster", "--dem")
    name = display_name(path)
    with opened(path, InputError, f"cannot read the terrain raster {path!r}",
                 "give a raster that GDAL reads (GeoTIFF, VRT, ...)") as src:
        if src.count > 1:
            notes.append(f"the terrain raster has {src.count} bands; band 1 is used")
        z_unit, z_factor, z_source = vertical_unit((src.units or ("",))[0], cfg.vertical_units,
                                                   name)
        crs = CRS.from_wkt(src.crs.to_wkt()) if src.crs else None
        if cfg.dem_crs:
            stated = parse_crs(cfg.dem_crs, "--dem-crs")
            if crs is not None and crs != stated:
                notes.append(f"the terrain raster says its CRS is {crs.name}; --dem-crs "
                             f"{cfg.dem_crs} is used instead, as stated")
            crs = stated
        elif crs is None:
            raise InputError(f"the terrain raster {name} has no CRS",
                             "state it with --dem-crs (e.g. EPSG:32633)")
        transform, width, height = src.transform, src.width, src.height
        work, warped = crs, False
        if crs.is_geographic:
            work = (parse_crs(cfg.work_crs, "--work-crs") if cfg.work_crs
                    else _utm_zone(crs, src.bounds))
            if work.is_geographic:
                raise InputError(f"--work-crs {cfg.work_crs} is geographic (degrees)",
                                 "name a projected CRS in metres or feet, e.g. a UTM zone")
            with WarpedVRT(src, src_crs=_rio(crs), crs=_rio(work), resampling=Resampling.bilinear,
                           nodata=np.nan, dtype="float64") as vrt:
                transform, width, height = vrt.transform, vrt.width, vrt.height
            warped = True
            notes.append(f"the terrain raster is in a geographic CRS ({crs.name}); it is read "
                         f"through a bilinear warp into {work.name} so that lengths are in "
                         f"metres")
        elif cfg.work_crs and parse_crs(cfg.work_crs, "--work-crs") != crs:
            notes.append("--work-crs applies only to a geographic raster; the raster's own "
                         "projected CRS is used")
        nodata = src.nodata
    if not crs.is_geographic and not _linear(crs):
        raise InputError(f"the raster's CRS {crs.name} has no linear unit",
                         "reproject the raster to a projected CRS")
    f = _unit_factor(work)
    res = min(math.hypot(transform.a, transform.d), math.hypot(transform.b, transform.e)) * f
    bounds = rasterio.transform.array_bounds(height, width, transform)
    return RasterInfo(path=path, crs=crs, work_crs=work, warped=warped, res=res,
                      bounds=(bounds[0], bounds[1], bounds[2], bounds[3]), nodata=nodata,
                      z_factor=z_factor, xy_factor=f, fingerprint=fingerprint(path),
                      transform=transform, width=width, height=height,
                      crs_stated=bool(cfg.dem_crs), z_unit=z_unit, z_source=z_source)


def _linear(crs):
    return crs.axis_info and crs.axis_info[0].unit_name not in ("degree", "radian", "grad")


def _utm_zone(crs, bounds):
    cx, cy = (bounds.left + bounds.right) / 2, (bounds.bottom + bounds.top) / 2
    lon, lat = Transformer.from_crs(crs, "EPSG:4326", always_xy=True).transform(cx, cy)
    found = query_utm_crs_info(datum_name="WGS 84",
                               area_of_interest=AreaOfInterest(lon, lat, lon, lat))
    if not found:
        raise InputError(f"no UTM zone covers the raster's centre ({lon:.4f}, {lat:.4f})",
                         "name a projected CRS with --work-crs")
    return CRS.from_epsg(int(found[0].code))
