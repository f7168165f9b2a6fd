"""Speed and memory of cutting reaches from terrain. Prints figures; asserts nothing.

Builds a synthetic valley (tests/terrain_fixtures.py) as a GeoTIFF, once small
and once large around the same reach, then times load_network and cut_reach and
reports the peak Python/numpy memory of one reach (tracemalloc). The per-reach
memory should not grow with the raster: only windows around the reach are read.

Run: .venv/bin/python benchmarks/bench_cutting.py [--big-margin M]
"""

import argparse
import sys
import tempfile
import time
import tracemalloc
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tests"))

from terrain_fixtures import make_valley_raster, meander_line, write_lines  # noqa: E402

from reachgauge.config import RunConfig  # noqa: E402
from reachgauge.inputs.network import open_raster  # noqa: E402
from reachgauge.transects.cutting import CuttingParams, cut_reach  # noqa: E402
from reachgauge.inputs.network import load_network  # noqa: E402


def best_of(fn, repeat=3):
    times = []
    for _ in range(repeat):
        t = time.perf_counter()
        out = fn()
        times.append(time.perf_counter() - t)
    return min(times), out


def peak_memory(fn):
    tracemalloc.start()
    fn()
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    return peak


def _cut(net, reach, cfg):
    with open_raster(net.raster) as ds:
        return cut_reach(ds, net.raster, reach, CuttingParams.from_config(cfg))


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--big-margin", type=float, default=1200.0,
                    help="extra terrain around the reach for the large raster (m)")
    args = ap.parse_args()
    line = meander_line(2000, 30.0, 300.0, angle_deg=10.0, step=5.0)
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        streams = write_lines(tmp / "s.gpkg", [line], offset=3.0, vertex_spacing=10.0, jitter=1.0)
        for label, margin in (("small", 60.0), ("large", args.big_margin)):
            d = tmp / label
            d.mkdir()
            t = time.perf_counter()
            v = make_valley_raster(d, line, res=1.0, margin=margin, noise=0.03)
            build = time.perf_counter() - t
            cfg = RunConfig(dem=v.path, streams=streams, half_width=40.0, spacing=5.0)
            t_load, net = best_of(lambda: load_network(cfg))
            reach = net.reaches[0]
            t_cut, out = best_of(lambda: _cut(net, reach, cfg))
            peak = peak_memory(lambda: _cut(net, reach, cfg))
            cells = net.raster.width * net.raster.height
            n = len(out)
            size = f"{net.raster.width}x{net.raster.height}"
            print(f"{label:5s} raster {size} ({cells / 1e6:.1f} M cells, built in {build:.1f} s)")
            print(f"      load_network                         {t_load * 1e3:8.1f} ms")
            print(f"      cut_reach: {n} transects x {out.offsets.size} samples "
                  f"{t_cut * 1e3:8.1f} ms  ({n / t_cut:,.0f} transects/s)")
            print(f"      peak numpy/Python memory of one reach  {peak / 1e6:8.1f} MB "
                  f"(whole raster as float64 would be {cells * 8 / 1e6:.0f} MB)")


if __name__ == "__main__":
    main()
