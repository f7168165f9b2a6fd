"""Channels derived from the terrain (issue 12, ``--channel-area``): time and
peak memory of :func:`reachgauge.drainage.channels.channel_lines` (pyflwdir's
streams and Strahler order over the routed D8 array, the moving-average
smoothing) on the invented valley terrain of ``bench_drainage.py``, 10 m cells,
channels where at least 1 km² drains. Prints figures; asserts nothing.

Each size runs in a fresh process after a warm-up (numba compiles); the
routing is done first and not counted; peak memory is the kernel's VmHWM
high-water mark over the call alone (reset with /proc/self/clear_refs) minus
the resident size before it.

Run:  PYTHONPATH=src .venv/bin/python benchmarks/bench_channels.py
"""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))
CELL = 10.0
THRESHOLD_KM2 = 1.0


def child(n: int) -> None:
    import time

    from affine import Affine

    from bench_drainage import _hwm, _rss, synthetic
    from reachgauge.drainage import channels, routing

    def routed(z):
        valid = np.ones(z.shape, bool)
        d8 = routing.d8_directions(z, valid, CELL, CELL)
        area, _ = routing.contributing_area(d8, CELL * CELL * 1e-6, routing.open_cells(valid))
        return d8, area

    t = Affine(CELL, 0, 0, 0, -CELL, n * CELL)
    d8, area = routed(synthetic(100))
    channels.channel_lines(d8, area, Affine(CELL, 0, 0, 0, -CELL, 100 * CELL), 0.01)   # warm-up
    d8, area = routed(synthetic(n))
    open("/proc/self/clear_refs", "w").write("5")
    before = _rss()
    t0 = time.perf_counter()
    lines, orders = channels.channel_lines(d8, area, t, THRESHOLD_KM2)
    print(json.dumps({"seconds": time.perf_counter() - t0, "peak_mb": _hwm() - before,
                      "cells": n * n, "reaches": len(lines), "max_order": max(orders)}))


def main() -> None:
    print(f"channels where at least {THRESHOLD_KM2:g} km² drains, 10 m cells")
    print(f"{'cells':>12} {'reaches':>8} {'order':>6} {'seconds':>8} {'peak MB':>8} {'B/cell':>7}")
    for n in (1000, 2000, 4000):
        out = subprocess.run([sys.executable, __file__, str(n)], capture_output=True, text=True)
        if out.returncode:
            print(f"{n * n:>12} failed: {out.stderr.strip().splitlines()[-1]}")
            continue
        r = json.loads(out.stdout.strip().splitlines()[-1])
        print(f"{r['cells']:>12} {r['reaches']:>8} {r['max_order']:>6} {r['seconds']:>8.2f} "
              f"{r['peak_mb']:>8.0f} {r['peak_mb'] * 2**20 / r['cells']:>7.1f}")


if __name__ == "__main__":
    if len(sys.argv) > 1:
        child(int(sys.argv[1]))
    else:
        main()
