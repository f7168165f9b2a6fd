"""Speed of the whole run against a naive script, and where the time goes (issue 8).
Prints figures; asserts nothing.

Targets (issue 8):
- the marginal cost of one more transect in ``reachgauge run`` (read, compute,
  write, 50-stage rating curves) is at most 1/50 of that of a naive script
  written the way an analyst first writes it, on the same terrain and the same
  transect positions, measured in the same run of this script;
- 10,000 transects with rating curves end to end with ``--jobs 2`` in under 20 s.

Marginal cost = (t(N2) - t(N1)) / (N2 - N1) from two runs on the same reaches
with different ``--spacing``, so start-up (imports, reading the streams, opening
the raster) cancels; each time is the median of a few repeats. The tool runs as
a subprocess through its CLI; the naive script runs in this process. Last, one
cProfile of the batch (``run_to_file``) in this process says where the time goes,
by step: reading, cutting, bankfull, rating curves, design flows, writing.

Terrain: the synthetic valley of tests/terrain_fixtures.py (invented, no real
place), a gently meandering channel 10 km long cut into a floodplain, 1 m
pixels, 2 cm noise, split into four reaches; three design flows per reach.

Run:  PYTHONPATH=src .venv/bin/python benchmarks/bench_speed.py [--quick]
(about 5 minutes on 2 cores; --quick about 1 minute with smaller counts).
"""

from __future__ import annotations

import argparse
import cProfile
import math
import os
import platform
import pstats
import re
import resource
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
SRC = HERE.parent / "src"
sys.path.insert(0, str(SRC))
sys.path.insert(0, str(HERE.parent / "tests"))

HALF_WIDTH = 30.0     # m either side of the centreline: 61 samples a transect at 1 m
N_CHANNEL = 0.035     # Manning's n (the tool's default), used by both
RATING = ["--rating-step", "0.05", "--rating-max-depth", "2.45",   # depths 0, 0.05 .. 2.45
          "--n-overbank", "0.05"]
STAGES = 50
REACHES = 4
FLOWS = {"2-year": 5.0, "10-year": 10.0, "100-year": 25.0}  # m³/s; bankfull is about 17
# (spacing m for N1, for N2, repeats, spacing for 10,000 transects, spacing for the profile)
FULL = dict(n1=10.0, n2=2.0, repeats=3, big=1.0, prof=5.0)
QUICK = dict(n1=20.0, n2=5.0, repeats=1, big=3.0, prof=10.0)
TARGET_RATIO = 50.0
TARGET_BIG_S = 20.0


# ------------------------------------------------------------------ inputs
def make_inputs(d: Path) -> dict:
    """Write the terrain, the reaches and the design flows; return their paths."""
    import shapely
    import terrain_fixtures as tf
    from shapely.ops import substring

    line = tf.meander_line(10_000.0, amplitude=15.0, wavelength=400.0, step=2.0)
    valley = tf.make_valley_raster(d, line, res=1.0, noise=0.02, margin=60.0, name="dem.tif")
    length = line.length
    parts = [shapely.LineString(shapely.get_coordinates(
        substring(line, length * i / REACHES, length * (i + 1) / REACHES))) for i in range(REACHES)]
    ids = [f"R{i}" for i in range(REACHES)]
    streams = tf.write_lines(d / "streams.gpkg", parts, fields={"rid": ids})
    flows = d / "flows.csv"
    flows.write_text("reach_id,flow,discharge\n" + "".join(
        f"{r},{name},{q}\n" for r in ids for name, q in FLOWS.items()))
    return {"dem": valley.path, "streams": streams, "flows": flows, "length": length}


def cli_command() -> list[str]:
    """The installed console script beside this interpreter, else the same entry point."""
    script = Path(sys.executable).with_name("reachgauge")
    if script.exists():
        return [str(script)]
    return [sys.executable, "-c", "import sys; from reachgauge.cli import main; sys.exit(main())"]


def run_tool(inp: dict, out: Path, spacing: float, jobs: int) -> tuple[float, float]:
    """Wall time and CPU time (user + system, all its processes), in s, of one
    ``reachgauge run`` as a subprocess."""
    cmd = cli_command() + [
        "run", "--dem", str(inp["dem"]), "--streams", str(inp["streams"]), "--id-field", "rid",
        "--out", str(out), "--overwrite", "--quiet", "--spacing", f"{spacing:g}",
        "--half-width", f"{HALF_WIDTH:g}", "--design-flows", str(inp["flows"]),
        "--jobs", str(jobs), *RATING]
    env = dict(os.environ, PYTHONPATH=os.pathsep.join(
        [str(SRC)] + [p for p in [os.environ.get("PYTHONPATH")] if p]))
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    t = time.perf_counter()
    done = subprocess.run(cmd, capture_output=True, text=True, env=env)
    dt = time.perf_counter() - t
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    cpu = (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)
    if done.returncode != 0:
        sys.exit(f"reachgauge run failed (exit {done.returncode}):\n{done.stderr}")
    return dt, cpu


def output_counts(out: Path) -> tuple[int, str]:
    """Transects in the output, and how many rating-curve stages each has."""
    import pyogrio

    n = pyogrio.read_info(out, layer="transects")["features"]
    rc = pyogrio.read_dataframe(out, layer="rating_curves", columns=["reach_id", "station"],
                                read_geometry=False)
    per = rc[rc["station"] >= 0].groupby(["reach_id", "station"]).size()
    return n, f"{per.min()}..{per.max()} on {len(per)} of {n} transects"


# ------------------------------------------------------------------ the naive script
def naive_bilinear(grid, west, north, res, x, y):
    """Ground at (x, y) from the four pixel centres around it, one point at a time."""
    c = (x - west) / res - 0.5
    r = (north - y) / res - 0.5
    j, i = int(math.floor(c)), int(math.floor(r))
    fc, fr = c - j, r - i
    top = (1 - fc) * float(grid[i, j]) + fc * float(grid[i, j + 1])
    bottom = (1 - fc) * float(grid[i + 1, j]) + fc * float(grid[i + 1, j + 1])
    return (1 - fr) * top + fr * bottom


def naive_stage(offsets, ground, stage):
    """Flow area, wetted perimeter and top width at ``stage``, segment by segment;
    every wet segment counts (connected to the thalweg or not), as a first script does."""
    area = perimeter = width = 0.0
    for k in range(len(offsets) - 1):
        x1, x2 = offsets[k], offsets[k + 1]
        d1, d2 = stage - ground[k], stage - ground[k + 1]
        if d1 <= 0 and d2 <= 0:
            continue
        dx = x2 - x1
        seg = math.hypot(dx, ground[k + 1] - ground[k])
        if d1 > 0 and d2 > 0:
            area += 0.5 * (d1 + d2) * dx
            perimeter += seg
            width += dx
        else:  # clip the segment at the water line
            wet = d1 if d1 > 0 else d2
            frac = wet / (wet - (d2 if d1 > 0 else d1))
            area += 0.5 * wet * frac * dx
            perimeter += frac * seg
            width += frac * dx
    return area, perimeter, width


def naive_run(dem: Path, result: Path, depths) -> tuple[tuple[float, float], int, list]:
    """The naive script on the transects of ``result``: read the raster once,
    interpolate each sample point in Python, the lowest point as thalweg, a Python
    loop over the stages with Manning's equation (SI; Manning 1891 in the form of
    Chow 1959, Eq. 5-6) for one n over the whole section, no bankfull. Returns
    ((wall s, CPU s), transects, rows of reach, station, stage, depth, area,
    perimeter, top width, radius, discharge)."""
    import geopandas
    import rasterio

    t0, c0 = time.perf_counter(), time.process_time()
    with rasterio.open(dem) as ds:
        grid = ds.read(1)
        res, west, north = ds.transform.a, ds.transform.c, ds.transform.f
    lines = geopandas.read_file(result, layer="transects", columns=["reach_id", "station", "slope"],
                                engine="pyogrio")
    rows = []
    for rid, station, geom, slope in zip(lines["reach_id"], lines["station"], lines.geometry,
                                         lines["slope"]):
        (x0, y0), (x1, y1) = geom.coords[0], geom.coords[-1]
        length = math.hypot(x1 - x0, y1 - y0)
        k = max(1, round(length / res))
        offsets, ground = [], []
        for p in range(k + 1):
            f = p / k
            offsets.append(f * length)
            ground.append(naive_bilinear(grid, west, north, res, x0 + f * (x1 - x0),
                                         y0 + f * (y1 - y0)))
        thalweg = min(ground)
        root_s = math.sqrt(slope if slope > 0 else 1e-4)
        for depth in depths:
            a, p_w, w = naive_stage(offsets, ground, thalweg + depth)
            r = a / p_w if p_w > 0 else 0.0
            q = a * r ** (2 / 3) * root_s / N_CHANNEL
            rows.append((rid, station, thalweg + depth, depth, a, p_w, w, r, q))
    return (time.perf_counter() - t0, time.process_time() - c0), len(lines), rows


# ------------------------------------------------------------------ profile
# A function of the package belongs to a step by its module, else by its name; the
# section kernel and library functions take the step of whoever calls them. Rules
# are tried in order; update them when modules move.
STEPS = [("kernel", "path", r"^/kernel/|crosssection|profiles"),
         ("writing", "path", r"^/results/"),
         ("reading", "path", r"^/inputs/"),
         ("bankfull", "path", r"bankfull"),
         ("design flows", "path", r"capacity|design"),
         ("reading", "name", r"^open_raster$|^read_|^load_|check_raster"),
         ("writing", "name", r"^write|reach_layers|LayerWriter|^flush|^finish$|^typed$"),
         ("rating curves", "name", r"rating|curve"),
         ("bankfull", "name", r"bankfull|^_pick"),
         ("design flows", "name", r"flows"),
         ("cutting", "path", r"^/transects/"),
         ("cutting", "name", r"cut")]
ORDER = ("reading", "cutting", "bankfull", "rating curves", "design flows", "writing")


def step_of(key) -> str | None:
    path, _line, name = key
    path = path.replace("\\", "/")
    if "/reachgauge/" not in path:
        return None
    rel = "/" + path.rsplit("/reachgauge/", 1)[-1]
    for step, where, pattern in STEPS:
        if re.search(pattern, rel if where == "path" else name):
            return None if step == "kernel" else step
    return None


def step_times(stats: dict) -> dict[str, float]:
    """Seconds in each step, its own calls only: time entering the step from
    outside it, less time it spends in other steps it calls."""
    times = dict.fromkeys(ORDER, 0.0)
    for key, (_cc, _nc, _tt, _ct, callers) in stats.items():
        s = step_of(key)
        if s is None:
            continue
        for caller, edge in callers.items():
            c = step_of(caller)
            if c != s:
                times[s] += edge[3]
                if c is not None:
                    times[c] -= edge[3]
    return times


def dominant_step(key, stats, seen=None) -> str:
    """The step of a function, or of its heaviest caller chain."""
    seen = seen or set()
    s = step_of(key)
    if s or key in seen or key not in stats or not stats[key][4]:
        return s or "-"
    seen.add(key)
    callers = stats[key][4]
    return dominant_step(max(callers, key=lambda c: callers[c][3]), stats, seen)


def short(key) -> str:
    path, line, name = key
    if path == "~":
        return name
    p = path.replace("\\", "/")
    p = p.split("/src/", 1)[-1] if "/src/reachgauge/" in p else "/".join(p.split("/")[-2:])
    return f"{p}:{line}({name})"


def profile_run(inp: dict, out: Path, spacing: float, top: int = 15) -> None:
    from reachgauge.batch.pipeline import run_to_file
    from reachgauge.config import RunConfig

    cfg = RunConfig(dem=inp["dem"], streams=inp["streams"], id_field="rid", spacing=spacing,
                    half_width=HALF_WIDTH, rating_step=0.05, rating_max_depth=2.45,
                    design_flows=inp["flows"], n_overbank=0.05, jobs=1)
    prof = cProfile.Profile()
    t = time.perf_counter()
    prof.enable()
    summary = run_to_file(cfg, out, overwrite=True)
    prof.disable()
    total = time.perf_counter() - t
    stats = pstats.Stats(prof).stats
    print(f"\n== where the time goes: run_to_file, {summary.transects} transects, --jobs 1, "
          f"{total:.1f} s under cProfile ==")
    print("(cProfile slows Python-heavy code more than numpy-heavy code; read shares, not seconds)")
    steps = step_times(stats)
    print(f"  {'step':<15}{'seconds':>9}{'share':>8}")
    for s in ORDER:
        print(f"  {s:<15}{steps[s]:9.2f}{100 * steps[s] / total:7.1f}%")
    rest = total - sum(steps.values())
    print(f"  {'other':<15}{rest:9.2f}{100 * rest / total:7.1f}%   "
          "(driver, roughness, figures at bankfull, tables)")
    for title, col in (("cumulative", 3), ("total (own) time", 2)):
        print(f"\n  top {top} functions by {title}:")
        print(f"  {'cum s':>7}{'own s':>8}{'calls':>10}  {'step':<14}function")
        for key in sorted(stats, key=lambda k: -stats[k][col])[:top]:
            cc, nc, tt, ct, _ = stats[key]
            print(f"  {ct:7.2f}{tt:8.2f}{nc:10d}  {dominant_step(key, stats):<14}{short(key)}")


def same_work(out: Path, rows: list, depth: float = 1.0) -> str:
    """Naive against tool at one in-bank depth, matched by reach and station: both
    must describe the same sections for the timing to compare like with like."""
    import pandas as pd
    import pyogrio

    cols = ["reach_id", "station", "depth", "flow_area", "discharge"]
    tool = pyogrio.read_dataframe(out, layer="rating_curves", columns=cols, read_geometry=False)
    tool = tool[(tool["station"] >= 0) & ((tool["depth"] - depth).abs() < 1e-6)]
    naive = pd.DataFrame([(r[0], r[1], r[4], r[8]) for r in rows if abs(r[3] - depth) < 1e-9],
                         columns=["reach_id", "station", "area_naive", "q_naive"])
    both = tool.merge(naive, on=["reach_id", "station"])
    return (f"same work: at depth {depth:g} m (in bank) over {len(both)} transects, naive / tool "
            f"flow area median {(both['area_naive'] / both['flow_area']).median():.4f}, discharge "
            f"median {(both['q_naive'] / both['discharge']).median():.4f}")


# ------------------------------------------------------------------ main
def marginal(t1, n1, t2, n2) -> float:
    return (t2 - t1) / (n2 - n1)


def compare(inp: dict, d: Path, cfg: dict) -> None:
    import numpy as np

    depths = [float(v) for v in np.arange(0.0, 2.45 + 0.025, 0.05)]  # the tool's 50 depths
    outs = {k: d / f"result_{k}.gpkg" for k in ("n1", "n2")}
    times = {(who, k): [] for who in ("tool", "naive") for k in outs}   # (wall, cpu) pairs
    counts, rows = {}, {}
    for _ in range(cfg["repeats"]):  # interleaved, so drift hits both alike
        for k, out in outs.items():
            times["tool", k].append(run_tool(inp, out, cfg[k], jobs=1))
            counts[k] = output_counts(out)
        for k, out in outs.items():
            dt, _n, rows[k] = naive_run(inp["dem"], out, depths)
            times["naive", k].append(dt)
    # median of the repeats, wall [0] and CPU [1] apart
    med = {key: [statistics.median(v[i] for v in vals) for i in (0, 1)]
           for key, vals in times.items()}
    n1, n2 = counts["n1"][0], counts["n2"][0]
    print(f"\n== marginal cost per transect, --jobs 1, median of {cfg['repeats']}; "
          "wall s (CPU s) ==")
    for k in outs:
        n, stages = counts[k]
        print(f"  spacing {cfg[k]:>4g} m: {n:6d} transects; rating-curve stages per transect "
              f"{stages} (want {STAGES}); {len(rows[k])} naive rows")
        for who in ("tool", "naive"):
            each = ", ".join(f"{w:.2f}" for w, _c in times[who, k])
            print(f"    {who:<6}{med[who, k][0]:7.2f} s ({med[who, k][1]:6.2f} s)   runs [{each}]")
    m = {who: [marginal(med[who, "n1"][i], n1, med[who, "n2"][i], n2) * 1e3 for i in (0, 1)]
         for who in ("tool", "naive")}
    print(f"  reachgauge run (read, cut, bankfull, 50-stage rating curves, 3 design flows, write): "
          f"{m['tool'][0]:7.3f} ms/transect ({m['tool'][1]:.3f} CPU)")
    print(f"  naive script (per-point interpolation, Python loop over 50 stages, no bankfull, "
          f"no writing): {m['naive'][0]:7.3f} ms/transect ({m['naive'][1]:.3f} CPU)")
    print("  " + same_work(outs["n1"], rows["n1"]))
    ratio = [m["naive"][i] / m["tool"][i] if m["tool"][i] > 0 else float("inf") for i in (0, 1)]
    print(f"  ratio naive / reachgauge: {ratio[0]:6.1f}x ({ratio[1]:.1f}x by CPU)   target >= "
          f"{TARGET_RATIO:g}x   {'PASS' if ratio[0] >= TARGET_RATIO else 'MISS'}")


def end_to_end(inp: dict, d: Path, spacing: float) -> None:
    out = d / "result_big.gpkg"
    dt, cpu = run_tool(inp, out, spacing, jobs=2)
    n, stages = output_counts(out)
    print(f"\n== end to end, --jobs 2, spacing {spacing:g} m ==")
    print(f"  {n} transects; rating-curve stages per transect {stages}")
    print(f"  wall {dt:.1f} s "
          f"({n / dt:.0f} transects/s; CPU {cpu:.1f} s over all processes)   target under "
          f"{TARGET_BIG_S:g} s {'PASS' if dt < TARGET_BIG_S and n >= 10_000 else 'MISS'}"
          + ("" if n >= 10_000 else " (fewer than 10,000 transects: --quick)"))


def _load() -> str:
    return " ".join(f"{v:.2f}" for v in os.getloadavg()) if hasattr(os, "getloadavg") else "n/a"


def main(argv=None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="smaller counts, one repeat")
    args = ap.parse_args(argv)
    cfg = QUICK if args.quick else FULL
    start = time.perf_counter()
    print(f"bench_speed{' --quick' if args.quick else ''}: Python {platform.python_version()}, "
          f"{os.cpu_count()} cores, {platform.machine()}; load average {_load()}")
    with tempfile.TemporaryDirectory() as tmp:
        d = Path(tmp)
        inp = make_inputs(d)
        print(f"terrain: synthetic valley, 1 m pixels, 2 cm noise; {REACHES} reaches, "
              f"{inp['length'] / 1000:.1f} km of channel; half-width {HALF_WIDTH:g} m; "
              f"design flows {', '.join(f'{k} {v:g} m³/s' for k, v in FLOWS.items())}")
        compare(inp, d, cfg)
        end_to_end(inp, d, cfg["big"])
        profile_run(inp, d / "result_profile.gpkg", cfg["prof"])
    print(f"\nbench_speed took {time.perf_counter() - start:.0f} s; load average {_load()} "
          "(other work on the machine inflates every time above)")


if __name__ == "__main__":
    main()
