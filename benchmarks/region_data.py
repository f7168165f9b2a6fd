"""A large synthetic region for the regional-scale benchmarks (issue 11), cached on disk.

Invented scenario, no real place: a square upland of ``--size`` × ``--size`` metres
(default 10,000) drained by parallel valleys 500 m apart, each holding one gently
meandering single-thread channel that runs west to east, downhill.

Files written into the folder given on the command line (default
``/tmp/reachgauge-region``):

- ``terrain.tif``: 1 m pixels, float32 metres, tiled 512 × 512, ZSTD (else DEFLATE)
  with the floating-point predictor, EPSG:32615 (UTM 15N, metres). Written tile by
  tile with rasterio windowed writes and a small GDAL cache, so generating it holds
  a few tiles, never the whole (400 MB at the default size) array.
- ``streams.gpkg``: the channel centrelines (LineStrings, drawn upstream first), each
  channel split into reaches of about 1.8 km of valley; fields ``rid`` (reach id,
  e.g. ``C03-R2``) and ``channel``.
- ``flows.csv``: design flows (``reach_id, flow, discharge``, m³/s), three per reach,
  as fractions of the reach's bankfull discharge.
- ``params.json``: the parameters the files were made with; a second call with the
  same parameters reuses the files.

Terrain, per channel i (lengths in m): centreline y = y0 + A sin(2π x / λ + φ), with
A 15–35 m and λ 300–600 m (gentle meanders: the line never turns back on itself, so
a single thread); a trapezoidal channel of top width 8–12 m, depth 1–1.5 m and banks
at 1.5 H : 1 V, in a floodplain 60–100 m either side that rises 0.3 % away from the
channel, then valley sides at 10 %; the floodplain falls down-valley (x) at
0.2–0.5 %. Where valleys meet, the ground is the lowest of the neighbouring valleys'
surfaces, which makes a divide between them. Distance to the channel is the
vertical offset from the sinusoid scaled by cos(atan(dy/dx)): the horizontal
distance to the tangent line, close to the true distance for such gentle meanders
near the channel. Noise: 2 cm (standard deviation) from a numpy Generator seeded
per tile, so each tile's values do not depend on the order tiles are made.

Run:  .venv/bin/python benchmarks/region_data.py [FOLDER] [--size 10000] [--force]
(the default size takes about a minute on one core; --size 2000 a few seconds).
"""

from __future__ import annotations

import argparse
import json
import math
import resource
import sys
import time
from dataclasses import asdict, dataclass
from pathlib import Path

import numpy as np

FOLDER = Path("/tmp/reachgauge-region")
FORMAT = 1                     # bump when the terrain or the files change
CRS = "EPSG:32615"
WEST, SOUTH = 400_000.0, 4_600_000.0   # an invented spot in UTM 15N
VALLEY_SPACING = 500.0         # m between neighbouring channels
MARGIN = 40.0                  # m between a line's ends and the raster's edge
REACH_VALLEY_LENGTH = 1800.0   # m of valley per reach (about 1.9 km of channel)
BANK_SLOPE = 1.5               # H : V of the channel banks
FLOODPLAIN_RISE = 0.003        # floodplain cross-slope away from the channel
VALLEY_SIDE = 0.10             # valley side slope beyond the floodplain
NOISE = 0.02                   # m, standard deviation
Z0 = 300.0                     # m, floodplain at the west edge
N_CHANNEL = 0.035              # Manning's n for the design flows
FLOW_SHARES = {"2-year": 0.5, "10-year": 0.9, "100-year": 1.6}  # of bankfull discharge
BLOCK = 512
LINE_STEP = 2.0                # m between centreline vertices (along x)


@dataclass(frozen=True)
class Channel:
    """One valley's channel (lengths in m, slopes dimensionless)."""

    y0: float            # valley axis, m north of the region's south edge
    amplitude: float
    wavelength: float
    phase: float         # radians
    top_width: float
    depth: float
    floodplain: float    # half-width of the floodplain from the centreline
    slope: float         # down-valley slope of the floodplain

    def centre(self, x):
        """y of the centreline and dy/dx at valley distance ``x`` (m)."""
        k = 2 * math.pi / self.wavelength
        arg = k * x + self.phase
        return self.y0 + self.amplitude * np.sin(arg), self.amplitude * k * np.cos(arg)

    def surface(self, x, y):
        """Ground (m) this valley would have at (x, y), region-local metres."""
        yc, dydx = self.centre(x)
        d = np.abs(y - yc) / np.sqrt(1.0 + dydx * dydx)
        half_bottom = self.top_width / 2 - BANK_SLOPE * self.depth
        h = np.where(d <= half_bottom, -self.depth,
                     -self.depth + (d - half_bottom) / BANK_SLOPE)
        h = np.minimum(h, 0.0)
        plain = (np.clip(d, self.top_width / 2, self.floodplain) - self.top_width / 2)
        h = h + plain * FLOODPLAIN_RISE + np.maximum(d - self.floodplain, 0.0) * VALLEY_SIDE
        return Z0 - self.slope * x + h

    def bankfull_discharge(self) -> float:
        """Manning discharge (m³/s) of the full trapezoid at the mean channel slope
        (SI Manning, Chow 1959 Eq. 5-6; the trapezoid's A and P by plane geometry)."""
        b = self.top_width - 2 * BANK_SLOPE * self.depth
        area = (b + BANK_SLOPE * self.depth) * self.depth
        perimeter = b + 2 * self.depth * math.hypot(1.0, BANK_SLOPE)
        # the channel is longer than its valley: its slope is the valley's over the sinuosity
        k = 2 * math.pi * self.amplitude / self.wavelength
        sinuosity = float(np.mean(np.hypot(1.0, k * np.cos(np.linspace(0, 2 * math.pi, 721)))))
        s = self.slope / sinuosity
        return area * (area / perimeter) ** (2 / 3) * math.sqrt(s) / N_CHANNEL


def make_channels(size: float, seed: int) -> list[Channel]:
    """One channel per 500 m valley across a region ``size`` m square."""
    rng = np.random.default_rng(seed)
    n = max(1, int(size // VALLEY_SPACING))
    out = []
    for i in range(n):
        depth = rng.uniform(1.0, 1.5)
        out.append(Channel(
            y0=size - (i + 0.5) * size / n,
            amplitude=rng.uniform(15.0, 35.0), wavelength=rng.uniform(300.0, 600.0),
            phase=rng.uniform(0, 2 * math.pi), top_width=rng.uniform(8.0, 12.0), depth=depth,
            floodplain=rng.uniform(60.0, 100.0), slope=rng.uniform(0.002, 0.005)))
    return out


def ground_block(channels, row0: int, col0: int, rows: int, cols: int, size: float,
                 seed: int) -> np.ndarray:
    """Ground (float32 m) of the pixels [row0, row0 + rows) × [col0, col0 + cols) of
    a 1 m raster whose top-left corner is region-local (0, size)."""
    x = (col0 + np.arange(cols) + 0.5)[None, :]
    y = (size - (row0 + np.arange(rows) + 0.5))[:, None]
    y_lo, y_hi = size - row0 - rows, size - row0
    near = [c for c in channels
            if y_lo - 1.5 * VALLEY_SPACING <= c.y0 <= y_hi + 1.5 * VALLEY_SPACING]
    z = np.full((rows, cols), np.inf)
    for c in near:
        np.minimum(z, c.surface(x, y), out=z)
    rng = np.random.default_rng([seed, row0, col0])
    z += rng.normal(0.0, NOISE, size=z.shape)
    return z.astype(np.float32)


def compression() -> str:
    """ZSTD when this GDAL has it, else DEFLATE."""
    from rasterio.enums import Compression
    return "zstd" if "zstd" in {c.name for c in Compression} else "deflate"


def write_terrain(path: Path, channels, size: int, seed: int) -> None:
    """The terrain GeoTIFF, tile by tile (see the module docstring)."""
    import rasterio
    from affine import Affine

    profile = dict(driver="GTiff", width=size, height=size, count=1, dtype="float32",
                   crs=CRS, transform=Affine(1.0, 0.0, WEST, 0.0, -1.0, SOUTH + size),
                   tiled=True, blockxsize=BLOCK, blockysize=BLOCK, compress=compression(),
                   predictor=3, nodata=-9999.0, BIGTIFF="IF_SAFER")
    # a small block cache: GDAL writes each finished tile out instead of holding it
    with rasterio.Env(GDAL_CACHEMAX=64), rasterio.open(path, "w", **profile) as dst:
        for _ij, win in dst.block_windows(1):
            block = ground_block(channels, win.row_off, win.col_off, win.height, win.width,
                                 size, seed)
            dst.write(block, 1, window=win)
        dst.update_tags(1, UNITTYPE="metre")


def reach_lines(channels, size: float) -> tuple[list, list, list, list]:
    """The channels' centrelines in reaches: (lines in EPSG:32615, reach ids,
    channel numbers, bankfull discharge m³/s)."""
    import shapely

    lines, ids, chan, qbf = [], [], [], []
    x = np.arange(MARGIN, size - MARGIN + LINE_STEP / 2, LINE_STEP)
    n_reach = max(1, round((x[-1] - x[0]) / REACH_VALLEY_LENGTH))
    cuts = np.linspace(0, len(x) - 1, n_reach + 1).round().astype(int)
    for i, c in enumerate(channels):
        y, _ = c.centre(x)
        xy = np.column_stack([WEST + x, SOUTH + y])
        for j in range(n_reach):
            lines.append(shapely.LineString(xy[cuts[j]:cuts[j + 1] + 1]))
            ids.append(f"C{i + 1:02d}-R{j + 1}")
            chan.append(i + 1)
            qbf.append(c.bankfull_discharge())
    return lines, ids, chan, qbf


def write_vectors(folder: Path, channels, size: float) -> tuple[int, float]:
    """streams.gpkg and flows.csv; returns (reaches, km of centreline)."""
    import geopandas

    lines, ids, chan, qbf = reach_lines(channels, size)
    gdf = geopandas.GeoDataFrame({"rid": ids, "channel": chan}, geometry=lines, crs=CRS)
    gdf.to_file(folder / "streams.gpkg", layer="streams", driver="GPKG", engine="pyogrio")
    rows = [f"{rid},{name},{share * q:.3f}\n"
            for rid, q in zip(ids, qbf) for name, share in FLOW_SHARES.items()]
    (folder / "flows.csv").write_text("# units: si\nreach_id,flow,discharge\n" + "".join(rows))
    return len(lines), float(sum(g.length for g in lines)) / 1000


@dataclass
class Region:
    """The files of a region and what they hold."""

    folder: Path
    dem: Path
    streams: Path
    flows: Path
    size: int
    reaches: int
    km: float
    made: bool          # True when this call generated the files
    seconds: float      # generation time (0 when reused)


def params_of(size: int, seed: int) -> dict:
    return {"format": FORMAT, "size": size, "seed": seed, "res": 1.0, "crs": CRS,
            "west": WEST, "south": SOUTH, "block": BLOCK, "compress": compression(),
            "valley_spacing": VALLEY_SPACING, "reach_valley_length": REACH_VALLEY_LENGTH,
            "noise": NOISE, "flows": FLOW_SHARES}


def ensure_region(folder=FOLDER, size: int = 10_000, seed: int = 11,
                  force: bool = False) -> Region:
    """The region's files in ``folder``, made unless they exist with the same
    parameters (``params.json``)."""
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    files = [folder / n for n in ("terrain.tif", "streams.gpkg", "flows.csv")]
    meta = folder / "params.json"
    want = params_of(size, seed)
    if not force and meta.exists() and all(f.exists() for f in files):
        held = json.loads(meta.read_text())
        if held.get("params") == want:
            return Region(folder, *files, size, held["reaches"], held["km"], False, 0.0)
    meta.unlink(missing_ok=True)   # a half-made region must not pass as whole
    t = time.perf_counter()
    channels = make_channels(size, seed)
    write_terrain(files[0], channels, size, seed)
    reaches, km = write_vectors(folder, channels, size)
    dt = time.perf_counter() - t
    meta.write_text(json.dumps({"params": want, "reaches": reaches, "km": km,
                                "channels": [asdict(c) for c in channels]}, indent=1))
    return Region(folder, *files, size, reaches, km, True, dt)


def describe(r: Region) -> str:
    sizes = ", ".join(f"{p.name} {p.stat().st_size / 2**20:.1f} MB"
                      for p in (r.dem, r.streams, r.flows))
    how = f"generated in {r.seconds:.1f} s" if r.made else "reused from the cache"
    return (f"region {r.folder}: {r.size} x {r.size} px at 1 m, {r.reaches} reaches, "
            f"{r.km:.1f} km of centreline; {how}; {sizes}")


def main(argv=None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("folder", nargs="?", type=Path, default=FOLDER,
                    help=f"where to write the files (default: {FOLDER})")
    ap.add_argument("--size", type=int, default=10_000,
                    help="side of the region in pixels = metres (default: 10000)")
    ap.add_argument("--seed", type=int, default=11)
    ap.add_argument("--force", action="store_true", help="generate even when cached")
    args = ap.parse_args(argv)
    if args.size < 2 * MARGIN + 100:
        sys.exit(f"error: --size {args.size} is too small; give at least {int(2 * MARGIN + 100)}")
    r = ensure_region(args.folder, args.size, args.seed, args.force)
    print(describe(r))
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024   # kB on Linux
    print(f"peak resident memory of this process: {peak:.0f} MB")


if __name__ == "__main__":
    main()
