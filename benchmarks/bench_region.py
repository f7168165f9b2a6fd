"""The whole run on a large synthetic region: speed, memory, and the bare cost of
reading the terrain it needs (issue 11). Prints figures; asserts nothing.

Targets (issue 11, on the 2-core machine):
- 10,000 transects with 50-stage rating curves end to end (read, compute, write)
  in under 20 s with ``--jobs 2``;
- peak resident memory of any process of the run under 1 GiB;
- the whole run under 3 × the bare time of reading the raster windows it needs.

Terrain: the region of ``region_data.py`` (invented, no real place), made once
and cached in ``--folder``: 10,000 × 10,000 pixels at 1 m, tiled 512 × 512,
compressed, with about 20 meandering channels in about 120 reaches (over 200 km);
three design flows per reach. ``--quick`` uses a 4,000 m square region (its own
cache folder) and aims at 2,000 transects.

What runs: ``reachgauge.run`` (the Python call ``reachgauge run`` on the command
line is a thin layer over) in a fresh subprocess, so start-up (interpreter,
imports, worker spawn) counts, as it does for a user; the spacing is the largest
multiple of 0.5 m that gives at least the target number of transects; half-width
30 m; rating curves at depths 0, 0.05 .. 2.45 m (50 stages), as in bench_speed.py.
The subprocess prints the run's summary, including ``timings`` (seconds reading,
computing -- both summed over workers -- writing, and the run's own wall time)
where the tool provides them, else "n/a".

Peak memory: this script polls the run's process tree with psutil every 50 ms
(the parent and every child, e.g. pool workers) and keeps, for each process, the
larger of its resident set size and, on Linux, the kernel's own high-water mark
(VmHWM in /proc/PID/status: exact for the process's life up to the last poll, so a
spike between two polls is not missed). Printed: the largest process and the parent.

Bare window reading: in a fresh process, open the GeoTIFF with rasterio and, for
each reach, read (``ds.read(1, window=...)``, native float32, GDAL's default block
cache) the window covering the reach's bounding box padded by the run's
half-width; the time covers opening the raster and these reads, i.e. fetching and
decompressing every tile the windows touch, and excludes the interpreter, imports
and reading the streams. Cold: after asking the kernel to drop the file's pages
from the page cache (posix_fadvise DONTNEED, this file only); warm: the same again
with the file in the page cache. The run/bare ratio uses the warm figure (the run
itself finds the file in the page cache, as the bare read has just loaded it).

Run:  PYTHONPATH=src .venv/bin/python benchmarks/bench_region.py [--quick] [--folder DIR] [--profile]
(first call generates the region, about half a minute; then about a minute; --profile
adds a cProfile of one --jobs 1 run by step, as bench_speed.py does).
"""

from __future__ import annotations

import argparse
import json
import math
import os
import platform
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
SRC = HERE.parent / "src"
sys.path.insert(0, str(HERE))

import region_data  # noqa: E402

HALF_WIDTH = 30.0
SETTINGS = dict(id_field="rid", half_width=HALF_WIDTH, rating_step=0.05, rating_max_depth=2.45,
                n_overbank=0.05)
STAGES = 50
FULL = dict(size=10_000, transects=10_000, folder=region_data.FOLDER)
QUICK = dict(size=4_000, transects=2_000, folder=Path(f"{region_data.FOLDER}-quick"))
TARGET_S = 20.0
TARGET_MB = 1024.0
TARGET_RATIO = 3.0
POLL_S = 0.05

RUNNER = r"""
import json, sys, time
a = json.loads(sys.argv[1])
sys.path.insert(0, a.pop("src"))
out = a.pop("out")
import reachgauge
t = time.perf_counter()
s = reachgauge.run(out, overwrite=True, **a)
wall = time.perf_counter() - t
tm = getattr(s, "timings", None)
tm = None if tm is None else dict(tm if isinstance(tm, dict) else vars(tm))
num = lambda v: float(v) if hasattr(v, "__float__") else str(v)
print("SUMMARY " + json.dumps({"wall": wall, "transects": s.transects, "ok": s.transects_ok,
      "reaches": s.reaches, "reaches_ok": s.reaches_ok, "elapsed": s.elapsed,
      "timings": tm}, default=num))
"""

BARE = r"""
import json, math, sys, time
import geopandas, rasterio
from rasterio.windows import Window
dem, streams, hw = sys.argv[1], sys.argv[2], float(sys.argv[3])
bounds = geopandas.read_file(streams, engine="pyogrio").geometry.bounds.to_numpy()
t = time.perf_counter()
cells = 0
with rasterio.open(dem) as ds:
    inv = ~ds.transform
    full = Window(0, 0, ds.width, ds.height)
    for x0, y0, x1, y1 in bounds:
        c0, r0 = inv * (x0 - hw, y1 + hw)
        c1, r1 = inv * (x1 + hw, y0 - hw)
        win = Window(math.floor(c0), math.floor(r0), math.ceil(c1) - math.floor(c0),
                     math.ceil(r1) - math.floor(r0)).intersection(full)
        cells += ds.read(1, window=win).size
print(json.dumps({"seconds": time.perf_counter() - t, "cells": cells, "windows": len(bounds)}))
"""


# ------------------------------------------------------------------ measuring a run
def child_env() -> dict:
    return dict(os.environ, PYTHONPATH=os.pathsep.join(
        [str(SRC)] + [p for p in [os.environ.get("PYTHONPATH")] if p]))


def high_water_kb(proc) -> float:
    """The larger of a process's resident set now and its peak so far (kB)."""
    rss = proc.memory_info().rss / 1024
    try:
        with open(f"/proc/{proc.pid}/status") as f:
            hwm = next((float(l.split()[1]) for l in f if l.startswith("VmHWM")), 0.0)
    except OSError:
        hwm = 0.0
    return max(rss, hwm)


def watch(popen, every: float = POLL_S) -> dict:
    """Poll the process tree of ``popen`` until it ends: {pid: (peak MB, name)}."""
    import psutil

    root = psutil.Process(popen.pid)
    peaks: dict[int, list] = {}
    while popen.poll() is None:
        try:
            procs = [root] + root.children(recursive=True)
        except psutil.NoSuchProcess:
            break
        for p in procs:
            try:
                kb = high_water_kb(p)
                entry = peaks.setdefault(p.pid, [0.0, " ".join(p.cmdline()[-2:])[-60:]])
                entry[0] = max(entry[0], kb / 1024)
            except (psutil.NoSuchProcess, psutil.AccessDenied, ProcessLookupError):
                pass
        time.sleep(every)
    return {pid: tuple(v) for pid, v in peaks.items()}


def measure_run(dem, streams, out: Path, *, spacing: float, jobs: int, flows=None) -> dict:
    """One ``reachgauge.run`` in a subprocess: wall s (outside), CPU s (all its
    processes), peak MB of the largest process and of the parent, and its summary."""
    args = dict(SETTINGS, src=str(SRC), out=str(out), dem=str(dem), streams=str(streams),
                spacing=spacing, jobs=jobs)
    if flows is not None:
        args["design_flows"] = str(flows)
    with tempfile.TemporaryFile("w+") as so, tempfile.TemporaryFile("w+") as se:
        before = resource.getrusage(resource.RUSAGE_CHILDREN)
        t = time.perf_counter()
        p = subprocess.Popen([sys.executable, "-c", RUNNER, json.dumps(args)], stdout=so,
                             stderr=se, env=child_env())
        peaks = watch(p)
        p.wait()
        wall = time.perf_counter() - t
        after = resource.getrusage(resource.RUSAGE_CHILDREN)
        so.seek(0)
        se.seek(0)
        text, err = so.read(), se.read()
    if p.returncode != 0:
        sys.exit(f"the run failed (exit {p.returncode}):\n{err[-3000:]}")
    summary = json.loads(next(l for l in text.splitlines() if l.startswith("SUMMARY "))[8:])
    parent = peaks.get(p.pid, (math.nan, ""))[0]
    largest = max(peaks.items(), key=lambda kv: kv[1][0])
    return {"wall": wall, "cpu": (after.ru_utime - before.ru_utime)
            + (after.ru_stime - before.ru_stime), "peak_mb": largest[1][0],
            "peak_who": "parent" if largest[0] == p.pid else f"child ({largest[1][1]})",
            "parent_mb": parent, "processes": len(peaks), "summary": summary,
            "child_mb": max([v[0] for pid, v in peaks.items() if pid != p.pid], default=0.0)}


# ------------------------------------------------------------------ bare reading
def drop_from_page_cache(path: Path) -> bool:
    """Ask the kernel to drop this file's cached pages (clean pages only)."""
    if not hasattr(os, "posix_fadvise"):
        return False
    fd = os.open(path, os.O_RDONLY)
    try:
        os.fsync(fd)
        os.posix_fadvise(fd, 0, 0, os.POSIX_FADV_DONTNEED)
    finally:
        os.close(fd)
    return True


def bare_read(dem, streams, cold: bool) -> dict:
    dropped = drop_from_page_cache(Path(dem)) if cold else False
    done = subprocess.run([sys.executable, "-c", BARE, str(dem), str(streams), str(HALF_WIDTH)],
                          capture_output=True, text=True, check=True)
    r = json.loads(done.stdout.strip().splitlines()[-1])
    r["dropped"] = dropped
    return r


# ------------------------------------------------------------------ printing
def choose_spacing(streams, target: int) -> tuple[float, int]:
    """The largest multiple of 0.5 m giving at least ``target`` transects (stations
    every ``spacing`` m from each reach's upstream end: floor(L / s) + 1 a reach)."""
    import numpy as np
    import pyogrio

    lengths = pyogrio.read_dataframe(streams).geometry.length.to_numpy()
    for s in np.arange(100.0, 0.49, -0.5):
        n = int(np.sum(np.floor(lengths / s + 1e-9) + 1))
        if n >= target:
            return float(s), n
    return 0.5, int(np.sum(np.floor(lengths / 0.5) + 1))


def stage_counts(out: Path) -> str:
    """How many rating-curve stages each transect has in the output."""
    import pyogrio

    rc = pyogrio.read_dataframe(out, layer="rating_curves", columns=["reach_id", "station"],
                                read_geometry=False)
    per = rc[rc["station"] >= 0].groupby(["reach_id", "station"]).size()
    return f"{per.min()}..{per.max()} stages on {len(per)} transects"


def split_text(t: dict | None) -> str:
    if not t:
        return "n/a (the run summary has no timings)"
    g = {k: float(t.get(k) if t.get(k) is not None else math.nan)
         for k in ("read", "compute", "keep", "write", "wall")}
    busy = g["read"] + g["compute"]

    def share(a, b):
        return f"{100 * a / b:.0f}%" if b > 0 else "n/a"

    return (f"read {g['read']:.2f} s, compute {g['compute']:.2f} s (both summed over workers; "
            f"read {share(g['read'], busy)} of their sum), keep (shaping rows, checkpoint parts) "
            f"{g['keep']:.2f} s, write {g['write']:.2f} s "
            f"({share(g['write'], g['wall'])} of the run's wall {g['wall']:.2f} s)")


def mark(ok: bool) -> str:
    return "PASS" if ok else "MISS"


def report_runs(runs: dict, bare_warm: float, bare_cold: float, target_n: int) -> None:
    print(f"\n  {'jobs':>4}{'transects':>11}{'wall s':>9}{'transects/s':>13}{'CPU s':>8}"
          f"{'peak MB':>9}{'parent MB':>11}{'child MB':>10}{'procs':>7}{'run/bare':>10}")
    for jobs, r in runs.items():
        n = r["summary"]["transects"]
        print(f"  {jobs:>4}{n:>11}{r['wall']:9.2f}{n / r['wall']:13.0f}{r['cpu']:8.1f}"
              f"{r['peak_mb']:9.0f}{r['parent_mb']:11.0f}{r['child_mb']:10.0f}{r['processes']:>7}"
              f"{r['wall'] / bare_warm:10.1f}")
    for jobs, r in runs.items():
        s = r["summary"]
        print(f"  --jobs {jobs}: largest process: {r['peak_who']}; reaches {s['reaches_ok']} of "
              f"{s['reaches']}, transects with figures {s['ok']} of {s['transects']}; "
              f"inside the run {s['wall']:.2f} s")
        print(f"    time split: {split_text(s.get('timings'))}")
    r2 = runs.get(2)
    peak = max(r["peak_mb"] for r in runs.values())
    print("\n== targets ==")
    if r2 is not None:
        n = r2["summary"]["transects"]
        print(f"  {n} transects, 50-stage rating curves, --jobs 2: {r2['wall']:.1f} s, target "
              f"< {TARGET_S:g} s with >= {target_n} transects   "
              + (mark(r2['wall'] < TARGET_S) if n >= 10_000
                 else "not judged (fewer than 10,000 transects: --quick)"))
        print(f"  run / bare window reading: {r2['wall'] / bare_warm:.1f}x warm "
              f"({r2['wall'] / bare_cold:.1f}x cold), target < {TARGET_RATIO:g}x   "
              f"{mark(r2['wall'] / bare_warm < TARGET_RATIO)}")
    print(f"  peak memory of any process: {peak:.0f} MB, target < {TARGET_MB:g} MB   "
          f"{mark(peak < TARGET_MB)}")


def profile_run(region, spacing: float, out: Path, top: int = 15) -> None:
    """cProfile of the batch (``run_to_file``, --jobs 1) in this process, by step,
    with the step rules of bench_speed.py."""
    import cProfile
    import pstats

    import bench_speed as bs
    from reachgauge.batch.pipeline import run_to_file
    from reachgauge.config import RunConfig

    cfg = RunConfig(dem=region.dem, streams=region.streams, spacing=spacing,
                    design_flows=region.flows, jobs=1, **SETTINGS)
    prof = cProfile.Profile()
    t = time.perf_counter()
    prof.enable()
    summary = run_to_file(cfg, out, overwrite=True)
    prof.disable()
    total = time.perf_counter() - t
    stats = pstats.Stats(prof).stats
    print(f"\n== where the time goes: run_to_file, {summary.transects} transects, --jobs 1, "
          f"{total:.1f} s under cProfile (read shares, not seconds) ==")
    steps = bs.step_times(stats)
    for s in bs.ORDER:
        print(f"  {s:<15}{steps[s]:9.2f} s {100 * steps[s] / total:6.1f}%")
    rest = total - sum(steps.values())
    print(f"  {'other':<15}{rest:9.2f} s {100 * rest / total:6.1f}%")
    for title, col in (("cumulative", 3), ("own", 2)):
        print(f"\n  top {top} functions by {title} time:\n  {'cum s':>7}{'own s':>8}{'calls':>10}"
              f"  {'step':<14}function")
        for key in sorted(stats, key=lambda k: -stats[k][col])[:top]:
            _cc, nc, tt, ct, _ = stats[key]
            print(f"  {ct:7.2f}{tt:8.2f}{nc:10d}  {bs.dominant_step(key, stats):<14}"
                  f"{bs.short(key)}")


def _load() -> str:
    return " ".join(f"{v:.2f}" for v in os.getloadavg()) if hasattr(os, "getloadavg") else "n/a"


def main(argv=None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="a 4 km region, 2,000 transects")
    ap.add_argument("--folder", type=Path, help="region cache folder")
    ap.add_argument("--jobs", type=int, nargs="+", default=[1, 2])
    ap.add_argument("--profile", action="store_true",
                    help="also profile one --jobs 1 run in this process (about 2x its time)")
    args = ap.parse_args(argv)
    cfg = QUICK if args.quick else FULL
    start = time.perf_counter()
    print(f"bench_region{' --quick' if args.quick else ''}: Python {platform.python_version()}, "
          f"{os.cpu_count()} cores; load average {_load()}")
    region = region_data.ensure_region(args.folder or cfg["folder"], cfg["size"])
    print(region_data.describe(region))
    spacing, expect = choose_spacing(region.streams, cfg["transects"])
    print(f"spacing {spacing:g} m (about {expect} transects), half-width {HALF_WIDTH:g} m, "
          f"rating curves 0..2.45 m by 0.05 m ({STAGES} stages), 3 design flows a reach")

    cold = bare_read(region.dem, region.streams, cold=True)
    warm = bare_read(region.dem, region.streams, cold=False)
    print(f"\n== bare window reading: {warm['windows']} windows, "
          f"{warm['cells'] / 1e6:.0f} M cells (reach bounds + {HALF_WIDTH:g} m) ==")
    print(f"  cold {cold['seconds']:.2f} s"
          + ("" if cold["dropped"] else " (could not drop the page cache: as warm)")
          + f", warm {warm['seconds']:.2f} s")

    runs = {}
    with tempfile.TemporaryDirectory() as tmp:
        for jobs in args.jobs:
            out = Path(tmp) / f"result_j{jobs}.gpkg"
            runs[jobs] = measure_run(region.dem, region.streams, out, spacing=spacing,
                                     jobs=jobs, flows=region.flows)
        print("\n== end to end (subprocess: start-up, read, compute, write) ==")
        print(f"  output: {stage_counts(out)} (want {STAGES})")
        report_runs(runs, warm["seconds"], cold["seconds"], cfg["transects"])
        if args.profile:
            profile_run(region, spacing, Path(tmp) / "result_profile.gpkg")
    print(f"\nbench_region took {time.perf_counter() - start:.0f} s; load average {_load()} "
          "(other work on the machine inflates every time above)")


if __name__ == "__main__":
    main()
