"""Flow-routing libraries compared for --drainage-area terrain (issue 12):
correctness on closed-form catchments, time and peak memory. Prints figures;
asserts nothing.

Candidates from PyPI: pyflwdir (its own ``from_dem`` directions, and the
directions reachgauge uses: pyflwdir's depression fill and accumulation with
steepest-descent D8 on the filled surface, :mod:`reachgauge.drainage.routing`)
and pysheds (fill_pits, fill_depressions, resolve_flats, flowdir, accumulation).
richdem 0.3.4 (sdist only) does not build on Python 3.11 and landlab pulls some
40 packages (netCDF4, black, statsmodels, py-richdem): not compared.
pysheds 0.5 calls ``np.in1d``, gone from numpy 2.4: the benchmark lends it
``np.isin`` to be measured at all.

Closed forms (D8, cells of 10 m): a plane tilted due south, area at row r =
(r + 1) cells; a V valley (side slope 0.03, down-valley 0.01: steeper across
than (√2 − 1) × along, so the sides flow straight across), area on the thalweg at
row r = (r + 1) × width cells. Error: largest |area − closed form| / closed form.

Terrain for time and memory: the demo basin (sample_data/basin/terrain.tif,
1200 × 800) and an invented 2000 × 2000 (and 4000 × 4000 for ours) terrain of
valleys with noise (pits). Each case runs in a fresh process after a warm-up
(numba compiles), peak memory is the kernel's VmHWM high-water mark over the
routing call alone (reset with /proc/self/clear_refs), minus the resident size
before it.

Run:  PYTHONPATH=src:<libs> .venv/bin/python benchmarks/bench_drainage.py
"""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
CELL = 10.0


def plane(n):
    y = np.mgrid[0:n, 0:n][0].astype(float)
    return (n - y) * CELL * 0.01, np.arange(1, n + 1)[:, None] * np.ones((1, n))


def valley(n):
    y, x = np.mgrid[0:n, 0:n].astype(float)
    z = np.abs(x - n // 2) * CELL * 0.03 + (n - y) * CELL * 0.01
    exp = np.full((n, n), np.nan)
    exp[:, n // 2] = (np.arange(n) + 1) * n
    return z, exp


def synthetic(n, seed=1):
    from scipy.ndimage import gaussian_filter

    rng = np.random.default_rng(seed)
    y, x = np.mgrid[0:n, 0:n].astype(float) * CELL
    z = 0.004 * y + 15 * np.abs(np.sin(x / 900.0)) + 5 * np.sin(y / 700.0) * np.cos(x / 1300.0)
    return (z + gaussian_filter(rng.normal(0, 3, (n, n)), 4)).astype(np.float32)


def run_lib(lib, z, valid, cell):
    """Contributing area in cells."""
    if lib == "reachgauge (pyflwdir + steepest D8)":
        from reachgauge.drainage.routing import route

        return route(z, valid, cell, cell)[0] / (cell * cell * 1e-6)
    if lib == "pyflwdir from_dem":
        import pyflwdir

        f = pyflwdir.from_dem(np.where(valid, z, -9999).astype(np.float32), nodata=-9999)
        return f.upstream_area("cell").astype(float)
    from affine import Affine
    from pyproj import Proj
    from pysheds.grid import Grid
    from pysheds.sview import Raster, ViewFinder

    np.in1d = np.isin        # pysheds 0.5 on numpy ≥ 2.4
    vf = ViewFinder(affine=Affine(cell, 0, 0, 0, -cell, z.shape[0] * cell), shape=z.shape,
                    nodata=np.float64(-9999), crs=Proj("EPSG:32632"))
    g = Grid.from_raster(Raster(np.where(valid, z, -9999).astype("f8"), viewfinder=vf))
    dem = Raster(np.where(valid, z, -9999).astype("f8"), viewfinder=vf)
    dem = g.resolve_flats(g.fill_depressions(g.fill_pits(dem)))
    return np.asarray(g.accumulation(g.flowdir(dem)), float)


LIBS = ("reachgauge (pyflwdir + steepest D8)", "pyflwdir from_dem", "pysheds")


def _hwm():
    for line in open("/proc/self/status"):
        if line.startswith("VmHWM"):
            return int(line.split()[1]) / 1024
    return float("nan")


def _rss():
    for line in open("/proc/self/status"):
        if line.startswith("VmRSS"):
            return int(line.split()[1]) / 1024
    return float("nan")


def child(lib, case):
    """One case in this process: print JSON (seconds, peak MB, error)."""
    import time

    z0, _ = plane(20)
    run_lib(lib, z0, np.ones(z0.shape, bool), CELL)             # warm-up (numba)
    if case in ("plane", "valley"):
        z, exp = (plane if case == "plane" else valley)(300)
        got = run_lib(lib, z, np.ones(z.shape, bool), CELL)
        m = np.isfinite(exp)
        err = float(np.max(np.abs(got[m] - exp[m]) / exp[m]))
        print(json.dumps({"error": err}))
        return
    if case == "demo":
        import rasterio

        with rasterio.open(HERE.parent / "sample_data/basin/terrain.tif") as src:
            z = src.read(1, masked=True)
            cell = src.res[0]
        valid, z = ~np.ma.getmaskarray(z), np.ma.filled(z.astype(np.float32), np.nan)
    else:
        z, cell = synthetic(int(case)), CELL
        valid = np.ones(z.shape, bool)
    open("/proc/self/clear_refs", "w").write("5")
    before = _rss()
    t0 = time.perf_counter()
    run_lib(lib, z, valid, cell)
    print(json.dumps({"seconds": time.perf_counter() - t0, "peak_mb": _hwm() - before,
                      "cells": int(z.size)}))


def main():
    rows = []
    cases = ["plane", "valley", "demo", "2000"]
    for lib in LIBS:
        for case in cases + (["4000"] if lib.startswith("reachgauge") else []):
            p = subprocess.run([sys.executable, __file__, "--child", lib, case],
                               capture_output=True, text=True)
            out = (json.loads(p.stdout.strip().splitlines()[-1]) if p.returncode == 0
                   else {"failed": (p.stderr.strip().splitlines() or ["?"])[-1][:80]})
            rows.append((lib, case, out))
            print(f"{lib:38s} {case:7s} {out}", flush=True)


if __name__ == "__main__":
    if len(sys.argv) > 1 and sys.argv[1] == "--child":
        child(sys.argv[2], sys.argv[3])
    else:
        main()
