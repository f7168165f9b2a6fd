"""Synthetic terrain and centrelines with known answers, written in ``tmp_path``.

Invented data for tests only. The terrain is a valley whose floodplain falls
down-valley at a known slope, with a trapezoidal channel cut into it along a
centreline (straight or sinuous): at distance ``d`` from the channel centreline
the channel is ``bank_height`` deep for ``d <= b/2``, then rises at
``side_slope`` (horizontal : vertical) to the floodplain. The ground at every
pixel centre is evaluated exactly (distance to the polyline by projection on its
segments), so a section cut perpendicular to the line has closed-form geometry:
A = (b + z y) y, T = b + 2 z y at depth y (standard plane geometry; REFERENCES.md
"Closed forms").

Options add seeded noise, single-pixel pits, a road embankment across the
valley, hydro-flattened water in the channel, a nodata hole, a raster in feet,
and any projected CRS. :func:`write_lines` writes centrelines (optionally
offset from the true channel, jittered or reversed) to any vector format.
"""

from __future__ import annotations

import warnings
from contextlib import contextmanager
from dataclasses import dataclass, field
from pathlib import Path

import geopandas
import numpy as np
import rasterio
import shapely
from pyproj import CRS
from affine import Affine
from rasterio.warp import Resampling, calculate_default_transform, reproject
from scipy.spatial import cKDTree

FOOT = 0.3048
ORIGIN = (500_000.0, 5_000_000.0)  # UTM 33N, near 15°E 45°N


@contextmanager
def _quiet():
    """Silence the library warnings test fixtures provoke on purpose (a file
    without a CRS) or cannot avoid (rasterio's own affine arithmetic)."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", PendingDeprecationWarning)
        warnings.simplefilter("ignore", UserWarning)
        yield


def north_up(west, north, xres, yres):
    """Affine transform of a north-up grid (built directly: rasterio's from_origin
    multiplies affines with an operator that newer affine versions deprecate)."""
    return Affine(xres, 0.0, west, 0.0, -yres, north)


def straight_line(length, angle_deg=0.0, origin=ORIGIN, n=2):
    """A straight centreline of ``length`` (CRS units) from ``origin`` at
    ``angle_deg`` anticlockwise from east."""
    a = np.radians(angle_deg)
    s = np.linspace(0, length, n)
    return shapely.LineString(np.column_stack([origin[0] + s * np.cos(a), origin[1] + s * np.sin(a)]))


def meander_line(valley_length, amplitude, wavelength, angle_deg=0.0, origin=ORIGIN, step=1.0):
    """A sine meander y = A sin(2π x / λ) along a valley axis at ``angle_deg``."""
    x = np.arange(0.0, valley_length + step / 2, step)
    y = amplitude * np.sin(2 * np.pi * x / wavelength)
    a = np.radians(angle_deg)
    c, s = np.cos(a), np.sin(a)
    return shapely.LineString(np.column_stack([origin[0] + x * c - y * s, origin[1] + x * s + y * c]))


@dataclass
class Valley:
    """The truth behind a synthetic raster (lengths in metres unless noted)."""

    path: Path
    crs: str
    res: float                      # pixel size, CRS units
    centreline: shapely.LineString  # true channel centre, CRS units, upstream first
    bottom_width: float
    bank_height: float
    side_slope: float
    valley_slope: float
    z0: float                       # floodplain elevation at the upstream end (m)
    xy_factor: float                # metres per CRS unit
    nodata: float | None
    extras: dict = field(default_factory=dict)

    @property
    def length_m(self):
        return self.centreline.length * self.xy_factor

    @property
    def channel_slope(self):
        """Mean bed slope along the channel: the valley drop over the channel length."""
        a, b = np.asarray(self.centreline.coords[0]), np.asarray(self.centreline.coords[-1])
        return self.valley_slope * np.hypot(*(b - a)) / self.centreline.length

    def bed(self, chainage_m):
        """True bed elevation (m) at chainage (m) along the channel centreline."""
        c = np.asarray(chainage_m, dtype=float)
        p = shapely.get_coordinates(shapely.line_interpolate_point(
            self.centreline, np.atleast_1d(c) / self.xy_factor))
        return (self.floodplain(p) - self.bank_height).reshape(c.shape)

    def floodplain(self, xy):
        a = np.asarray(self.centreline.coords[0])
        b = np.asarray(self.centreline.coords[-1])
        axis = (b - a) / np.hypot(*(b - a))
        return self.z0 - self.valley_slope * ((np.asarray(xy) - a) @ axis) * self.xy_factor

    def area(self, y):
        return (self.bottom_width + self.side_slope * y) * y

    def top_width(self, y):
        return self.bottom_width + 2 * self.side_slope * y


def distance_and_chainage(line, xy):
    """Exact distance from points ``xy`` (k, 2) to a polyline and the chainage of
    the nearest point on it (both in the line's units): nearest vertex by a
    k-d tree, then projection on the two segments that meet there."""
    v = np.asarray(line.coords)
    seg = np.diff(v, axis=0)
    seglen = np.hypot(seg[:, 0], seg[:, 1])
    cum = np.concatenate([[0.0], np.cumsum(seglen)])
    _, k = cKDTree(v).query(xy)
    best_d = np.full(len(xy), np.inf)
    best_s = np.zeros(len(xy))
    for j in (np.maximum(k - 1, 0), np.minimum(k, len(seg) - 1)):
        p = xy - v[j]
        tt = np.clip(np.einsum("ij,ij->i", p, seg[j]) / seglen[j] ** 2, 0, 1)
        d = np.hypot(*(p - tt[:, None] * seg[j]).T)
        better = d < best_d
        best_d = np.where(better, d, best_d)
        best_s = np.where(better, cum[j] + tt * seglen[j], best_s)
    return best_d, best_s


def make_valley_raster(directory, centreline, *, res=1.0, bottom_width=6.0, bank_height=1.5,
                       side_slope=2.0, valley_slope=0.002, z0=100.0, margin=60.0, noise=0.0,
                       seed=0, embankment=None, water=None, pits=(), nodata_box=None,
                       crs="EPSG:32633", vertical_units="m", nodata=-9999.0, dtype="float32",
                       name="dem.tif") -> Valley:
    """Write a GeoTIFF of a valley with a trapezoidal channel along ``centreline``.

    ``embankment``: dict(chainage=m, height=m above floodplain, crest=m, side=H:V)
    — a road across the valley, perpendicular to the channel at that chainage.
    ``water``: dict(depth=m, step=m) — hydro-flattened water: inside the channel
    where the bed is more than ``depth`` below the water line, the ground is
    replaced by a flat water surface ``depth`` above the bed, stepping down every
    ``step`` m of chainage. ``pits``: (x, y, depth) single-pixel pits.
    ``nodata_box``: (xmin, ymin, xmax, ymax) set to nodata.
    """
    directory = Path(directory)
    f = CRS(crs).axis_info[0].unit_conversion_factor if crs else 1.0
    xmin, ymin, xmax, ymax = centreline.bounds
    xmin, ymin = xmin - margin, ymin - margin
    width = int(np.ceil((xmax + margin - xmin) / res))
    height = int(np.ceil((ymax + margin - ymin) / res))
    transform = north_up(xmin, ymin + height * res, res, res)
    cols, rows = np.meshgrid(np.arange(width) + 0.5, np.arange(height) + 0.5)
    xs = xmin + cols.ravel() * res
    ys = ymin + height * res - rows.ravel() * res
    xy = np.column_stack([xs, ys])
    valley = Valley(path=directory / name, crs=crs, res=res, centreline=centreline,
                    bottom_width=bottom_width, bank_height=bank_height, side_slope=side_slope,
                    valley_slope=valley_slope, z0=z0, xy_factor=f, nodata=nodata)
    d, s = distance_and_chainage(centreline, xy)
    d, s = d * f, s * f
    cut = np.clip(bank_height - (d - bottom_width / 2) / side_slope, 0.0, bank_height) \
        if side_slope > 0 else np.where(d <= bottom_width / 2, bank_height, 0.0)
    ground = valley.floodplain(xy) - cut
    if water is not None:
        step = water["step"]
        s_step = np.floor(s / step) * step
        level = valley.bed(np.minimum(s_step, valley.length_m)) + water["depth"]
        wet = (d <= bottom_width / 2 + side_slope * water["depth"]) & (ground < level)
        ground = np.where(wet, level, ground)
        valley.extras["water"] = water
    if embankment is not None:
        e = embankment
        p0 = shapely.get_coordinates(centreline.interpolate(e["chainage"] / f))[0]
        p1 = shapely.get_coordinates(centreline.interpolate(e["chainage"] / f + 0.01))[0]
        tang = (p1 - p0) / np.hypot(*(p1 - p0))
        along = np.abs((xy - p0) @ tang) * f
        crest_z = valley.floodplain(p0[None, :])[0] + e["height"]
        road = crest_z - np.maximum(along - e["crest"] / 2, 0.0) / e["side"]
        ground = np.maximum(ground, road)
        valley.extras["embankment"] = e
    if noise:
        ground = ground + np.random.default_rng(seed).normal(0.0, noise, ground.shape)
    grid = ground.reshape(height, width)
    for x, y, depth in pits:
        grid[int((ymin + height * res - y) // res), int((x - xmin) // res)] -= depth
    if vertical_units == "ft":
        grid = grid / FOOT
    if nodata_box is not None:
        bx0, by0, bx1, by1 = nodata_box
        inbox = ((xs >= bx0) & (xs <= bx1) & (ys >= by0) & (ys <= by1)).reshape(height, width)
        grid = np.where(inbox, nodata, grid)
    profile = dict(driver="GTiff", width=width, height=height, count=1, dtype=dtype,
                   crs=crs, transform=transform, nodata=nodata)
    if crs is None:
        profile.pop("crs")
    with rasterio.open(valley.path, "w", **profile) as dst:
        dst.write(grid.astype(dtype), 1)
    return valley


def write_lines(path, lines, crs="EPSG:32633", *, fields=None, layer="streams", driver=None,
                offset=0.0, jitter=0.0, reverse=False, seed=0, vertex_spacing=None):
    """Write centrelines to a vector file (format from the extension, or ``driver``).

    ``lines``: shapely geometries (None allowed: a feature without geometry).
    ``offset``: shift every line sideways by this much (CRS units; positive to
    the left of its direction); ``vertex_spacing``: redraw the line with
    vertices this far apart (as a person digitising would), before ``jitter``:
    seeded noise on the inner vertices; ``reverse``: draw the lines upstream;
    ``fields``: dict of column lists.
    """
    rng = np.random.default_rng(seed)
    out = []
    for g in lines:
        if g is not None and g.geom_type == "LineString" and not g.is_empty:
            if offset:
                g = g.offset_curve(offset)
            if vertex_spacing:
                k = max(2, int(round(g.length / vertex_spacing)) + 1)
                g = shapely.LineString(shapely.get_coordinates(
                    shapely.line_interpolate_point(g, np.linspace(0, g.length, k))))
            if jitter:
                c = np.asarray(g.coords)
                c[1:-1] += rng.normal(0.0, jitter, c[1:-1].shape)
                g = shapely.LineString(c)
            if reverse:
                g = g.reverse()
        out.append(g)
    gdf = geopandas.GeoDataFrame(dict(fields or {}), geometry=out, crs=crs)
    path = Path(path)
    kw = {"layer": layer} if path.suffix.lower() in (".gpkg",) else {}
    with _quiet():
        gdf.to_file(path, driver=driver, **kw)
    return path


def warp_raster(src_path, dst_path, dst_crs, resolution=None):
    """Reproject a raster file to ``dst_crs`` (bilinear) — e.g. to make a
    geographic copy of a projected test raster."""
    with rasterio.open(src_path) as src, _quiet():
        transform, width, height = calculate_default_transform(
            src.crs, dst_crs, src.width, src.height, *src.bounds, resolution=resolution)
        profile = src.profile | dict(crs=dst_crs, transform=transform, width=width, height=height)
        with rasterio.open(dst_path, "w", **profile) as dst:
            reproject(rasterio.band(src, 1), rasterio.band(dst, 1), src_nodata=src.nodata,
                      dst_nodata=src.nodata, resampling=Resampling.bilinear)
    return Path(dst_path)


def tile_as_vrt(src_path, directory, nx=2, ny=2, name="mosaic.vrt"):
    """Cut a raster into ``nx`` × ``ny`` GeoTIFF tiles and write a VRT mosaic
    of them (GDAL's VRT format, written by hand: one SimpleSource per tile)."""
    directory = Path(directory)
    with rasterio.open(src_path) as src, _quiet():
        w, h = src.width, src.height
        xs = np.linspace(0, w, nx + 1).astype(int)
        ys = np.linspace(0, h, ny + 1).astype(int)
        gt = src.transform.to_gdal()
        dtype = {"float32": "Float32", "float64": "Float64"}[src.dtypes[0]]
        nodata = "" if src.nodata is None else f"<NoDataValue>{src.nodata!r}</NoDataValue>"
        sources = []
        for i in range(ny):
            for j in range(nx):
                win = rasterio.windows.Window(xs[j], ys[i], xs[j + 1] - xs[j], ys[i + 1] - ys[i])
                tile = directory / f"tile_{i}_{j}.tif"
                prof = src.profile | dict(width=win.width, height=win.height,
                                          transform=src.window_transform(win))
                with rasterio.open(tile, "w", **prof) as dst:
                    dst.write(src.read(1, window=win), 1)
                sources.append(
                    f'<SimpleSource><SourceFilename relativeToVRT="1">{tile.name}</SourceFilename>'
                    f'<SourceBand>1</SourceBand>'
                    f'<SrcRect xOff="0" yOff="0" xSize="{win.width}" ySize="{win.height}"/>'
                    f'<DstRect xOff="{win.col_off}" yOff="{win.row_off}" xSize="{win.width}" '
                    f'ySize="{win.height}"/></SimpleSource>')
        srs = src.crs.to_wkt().replace("&", "&amp;").replace("<", "&lt;").replace(">", "&gt;")
    xml = (f'<VRTDataset rasterXSize="{w}" rasterYSize="{h}"><SRS>{srs}</SRS>'
           f'<GeoTransform>{", ".join(repr(float(v)) for v in gt)}</GeoTransform>'
           f'<VRTRasterBand dataType="{dtype}" band="1">{nodata}{"".join(sources)}'
           f'</VRTRasterBand></VRTDataset>')
    path = directory / name
    path.write_text(xml)
    return path
