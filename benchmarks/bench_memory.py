"""Peak memory as reaches are added: does it stay flat? (issue 11). Prints figures;
asserts nothing.

Target (issue 11): memory is bounded by the work in flight, not by the size of the
run, so the peak resident memory of every process stays flat as reaches are added.

Terrain: the region of ``region_data.py`` (invented, no real place; cached), the
same settings as bench_region.py (half-width 30 m, 50-stage rating curves, three
design flows a reach, the spacing that gives 10,000 transects on the whole region).
The run uses the first 25, 50, 100 and 200 reaches of the streams file (as many of
those counts as the region has, then all of its reaches), each written to a
temporary GeoPackage with its rows of the design flows; ``--jobs 2``. ``--quick``:
the 4 km region with 4, 8 and all 16 of its reaches.

Peak memory is measured as in bench_region.py (psutil polls of the run's process
tree every 50 ms, with the kernel's VmHWM high-water mark): of the largest process
and of the parent. The slope is a least-squares line through the peaks against the
number of reaches, in MB per 100 reaches: near 0 when memory is flat.

Run:  PYTHONPATH=src .venv/bin/python benchmarks/bench_memory.py [--quick]
(about a minute after the region exists).
"""

from __future__ import annotations

import argparse
import os
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))

import bench_region as br  # noqa: E402
import region_data  # noqa: E402

FULL = dict(br.FULL, counts=(25, 50, 100, 200))
QUICK = dict(br.QUICK, counts=(4, 8, 16))
JOBS = 2


def subset(region, n: int, d: Path) -> tuple[Path, Path, int, float]:
    """The first ``n`` reaches of the region and their design flows, in ``d``;
    returns (streams, flows, reaches, km of centreline)."""
    import pandas as pd
    import pyogrio

    lines = pyogrio.read_dataframe(region.streams).iloc[:n]
    streams = d / f"streams_{n}.gpkg"
    pyogrio.write_dataframe(lines, streams, layer="streams", driver="GPKG")
    flows = pd.read_csv(region.flows, comment="#")
    path = d / f"flows_{n}.csv"
    with open(path, "w") as f:
        f.write("# units: si\n")
        flows[flows["reach_id"].isin(set(lines["rid"]))].to_csv(f, index=False)
    return streams, path, len(lines), float(lines.geometry.length.sum()) / 1000


def slope_per_100(xs, ys) -> float:
    import numpy as np

    if len(xs) < 2:
        return float("nan")
    return float(np.polyfit(np.asarray(xs, float), np.asarray(ys, float), 1)[0]) * 100


def main(argv=None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="the 4 km region, 4 to 16 reaches")
    ap.add_argument("--folder", type=Path, help="region cache folder")
    args = ap.parse_args(argv)
    cfg = QUICK if args.quick else FULL
    start = time.perf_counter()
    region = region_data.ensure_region(args.folder or cfg["folder"], cfg["size"])
    print(f"bench_memory{' --quick' if args.quick else ''}: {os.cpu_count()} cores")
    print(region_data.describe(region))
    spacing, _ = br.choose_spacing(region.streams, cfg["transects"])
    counts = sorted({min(c, region.reaches) for c in cfg["counts"]})
    print(f"spacing {spacing:g} m, half-width {br.HALF_WIDTH:g} m, {br.STAGES}-stage rating "
          f"curves, 3 design flows a reach, --jobs {JOBS}")
    print(f"\n  {'reaches':>7}{'km':>7}{'transects':>11}{'wall s':>8}{'largest MB':>12}"
          f"{'parent MB':>11}{'worker MB':>11}  largest process")
    rows = []
    with tempfile.TemporaryDirectory() as tmp:
        d = Path(tmp)
        for n in counts:
            streams, flows, got, km = subset(region, n, d)
            r = br.measure_run(region.dem, streams, d / f"out_{n}.gpkg", spacing=spacing,
                               jobs=JOBS, flows=flows)
            rows.append((got, r))
            print(f"  {got:>7}{km:7.1f}{r['summary']['transects']:>11}{r['wall']:8.1f}"
                  f"{r['peak_mb']:12.0f}{r['parent_mb']:11.0f}{r['child_mb']:11.0f}  "
                  f"{r['peak_who']}")
    xs = [n for n, _ in rows]
    print(f"\n  slope, MB per 100 reaches: largest process "
          f"{slope_per_100(xs, [r['peak_mb'] for _, r in rows]):+.0f}, parent "
          f"{slope_per_100(xs, [r['parent_mb'] for _, r in rows]):+.0f}, largest worker "
          f"{slope_per_100(xs, [r['child_mb'] for _, r in rows]):+.0f} "
          "(flat: near 0)")
    print(f"\nbench_memory took {time.perf_counter() - start:.0f} s")


if __name__ == "__main__":
    main()
