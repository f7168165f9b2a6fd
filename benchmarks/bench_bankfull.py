"""Cost per transect of the bankfull step (``bankfull.pick_all``) on one reach.

A reach of noisy transects is built from the synthetic families of
tests/section_fixtures.py (invented data: compound channels of random size, shape,
floodplain widths, 3-12 cm lidar-like noise, some DEM blur and hydro-flattened beds,
V valleys without a floodplain; 1 m sampling, so rows differ in length). Two figures:

- before: the per-transect loop that pick_all used to be (the frozen regression
  reference in tests/test_bankfull_regression.py: scipy find_peaks,
  median_abs_deviation and masked medians per section);
- after: the vectorised pick_all, all transects at once in row blocks.

Per-transect cost is the marginal cost between two reach sizes (start-up cancels),
and the total over the largest reach divided by its transect count (best of a few
runs each). Peak memory of the vectorised call is traced with tracemalloc; its
(transects × stages) work runs in row blocks of at most CHUNK_CELLS cells. The two
answers are checked equal.
Prints figures; asserts nothing.

Run: .venv/bin/python benchmarks/bench_bankfull.py [--transects 2000] [--method bank-top]
"""

from __future__ import annotations

import argparse
import sys
import time
import tracemalloc
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tests"))

from section_fixtures import compound_channel, v_valley  # noqa: E402
from test_bankfull_regression import pad, r_pick_all  # noqa: E402

from reachgauge.hydraulics import bankfull  # noqa: E402
from reachgauge.kernel import sections as K  # noqa: E402


def reach(t: int, seed: int = 0):
    """Profiles of ``t`` noisy synthetic transects (see the module docstring)."""
    rng = np.random.default_rng(seed)
    rows = []
    for i in range(t):
        noise = rng.uniform(0.03, 0.12)
        if rng.random() < 0.08:
            syn = v_valley(side_slope=rng.uniform(1.5, 5.0), depth=rng.uniform(2.0, 6.0),
                           noise=noise, seed=i)
        else:
            syn = compound_channel(
                bottom_width=rng.uniform(2.0, 20.0), bank_height=rng.uniform(0.6, 3.0),
                side_slope=rng.uniform(1.0, 3.0),
                floodplain=(rng.uniform(5.0, 40.0), rng.uniform(0.0, 40.0)),
                bank_rise=(0.0, rng.uniform(0.0, 0.5)), floodplain_slope=rng.uniform(-0.01, 0.02),
                blur=rng.choice([0.0, 0.0, 1.0]), flat_bed=rng.random() < 0.1,
                noise=noise, seed=i)
        rows.append((syn.section.offset, syn.section.elevation))
    return K.profiles(*pad(rows))


def timed(fn, repeat=1):
    best = np.inf
    for _ in range(repeat):
        t0 = time.perf_counter()
        out = fn()
        best = min(best, time.perf_counter() - t0)
    return best, out


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--transects", type=int, default=2000)
    ap.add_argument("--method", default=bankfull.DEFAULT_METHOD)
    ap.add_argument("--baseflow", type=float, default=0.0, help="baseflow depth (m)")
    args = ap.parse_args(argv)
    params = bankfull.BankfullParams(args.method, baseflow_depth=args.baseflow)
    big, small = args.transects, max(args.transects // 4, 1)
    p_big, p_small = reach(big), reach(small)
    print(f"bankfull pick_all, method {args.method}, baseflow {args.baseflow:g} m: reach of {big} "
          f"noisy transects, {int(p_big.size.mean())} points each on average (max {p_big.x.shape[1]})")

    def old(p):
        return lambda: r_pick_all(p, args.method, baseflow_depth=args.baseflow)

    def new(p):
        return lambda: bankfull.pick_all(p, params)

    rows = []
    for name, make, repeat in (("before (loop per transect)", old, 2),
                               ("after (vectorised)", new, 3)):
        t_small, _ = timed(make(p_small), repeat)
        t_big, out = timed(make(p_big), repeat)
        marginal = (t_big - t_small) / (big - small)
        rows.append((name, t_big, t_big / big, marginal, out))
        print(f"  {name:28s} {t_big:8.3f} s for {big}: {t_big / big * 1e3:7.3f} ms per transect "
              f"(marginal {marginal * 1e3:7.3f} ms)")
    print(f"  speed-up (marginal): {rows[0][3] / rows[1][3]:.1f}x")

    tracemalloc.start()
    bankfull.pick_all(p_big, params)
    peak = tracemalloc.get_traced_memory()[1]
    tracemalloc.stop()
    print(f"  peak memory of the vectorised call: {peak / 2 ** 20:.0f} MiB in blocks of "
          f"{bankfull.rows.CHUNK_CELLS:,} cells "
          f"(input profiles {sum(a.nbytes for a in vars(p_big).values()) / 2 ** 20:.0f} MiB)")

    ref, new_out = rows[0][4][0], rows[1][4]
    st = np.array([r["stage"] if r else np.nan for r in ref])
    same = np.allclose(st, new_out.stage, rtol=0, atol=1e-12, equal_nan=True)
    conf = all((r["confidence"] if r else "") == c for r, c in zip(ref, new_out.confidence))
    print(f"  same stages as the loop: {same}; same confidence: {conf}")


if __name__ == "__main__":
    main()
