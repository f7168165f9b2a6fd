"""Cost and precision of the windowed slope. Prints figures; asserts nothing.

A straight grade (slope 0.002) 5 km long with Gaussian noise (σ = 0.05 m),
stations every 20, 5, 1 and 0.5 m, a 200 m window. For each spacing: the time
per station of the bounded Theil–Sen windows (slope.theil_sen_windows) and of
the whole slope step (slope.profile_slopes: windows, reach fit, floor), best
of three; the same windows with every pair (the quadratic estimate, timed on
the first 1 km only); and the precision of the bounded estimate against the
exact one (scipy.stats.theilslopes over each full window, every 50th station):
the spread of each about the true slope and their rms difference in standard
errors of the exact estimate. The cost is linear when the time per station
stays flat as the spacing shrinks.

Run: .venv/bin/python benchmarks/bench_slope.py
"""

import time

import numpy as np
from scipy import stats

from reachgauge.transects import slope

SLOPE, SIGMA, WINDOW, LENGTH = 0.002, 0.05, 200.0, 5000.0


def best_of(fn, repeat=3):
    times = []
    for _ in range(repeat):
        t = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t)
    return min(times)


def precision(c, z, got):
    idx = np.arange(0, c.size, 50)
    wins = [np.abs(c - c[k]) <= WINDOW / 2 for k in idx]
    ref = np.array([stats.theilslopes(z[w], c[w]).slope for w in wins])
    se = np.array([SIGMA * np.sqrt(np.pi / 3 / np.sum((c[w] - c[w].mean()) ** 2)) for w in wins])
    spread = np.std(got[idx] + SLOPE) / np.std(ref + SLOPE)
    return spread, float(np.sqrt(np.mean(((got[idx] - ref) / se) ** 2)))


def main():
    rng = np.random.default_rng(1)
    print(f"slope windows: {LENGTH / 1000:.0f} km grade, noise {SIGMA} m, window {WINDOW:.0f} m, "
          f"pair budget {slope.PAIR_BUDGET}")
    print("spacing  stations  per-window  pairs/stn  windows   slope step  every pair    "
          "spread vs   rms diff")
    print("    (m)                stations   (bounded)  (us/stn)  (us/stn)    (us/stn, 1 km) exact      (se)")
    for dx in (20.0, 5.0, 1.0, 0.5):
        c = np.arange(0.0, LENGTH + 1e-9, dx)
        z = 100.0 - SLOPE * c + rng.normal(0, SIGMA, c.size)
        n = int(np.sum(np.abs(c - c[c.size // 2]) <= WINDOW / 2))
        pairs = slope._pairs(np.array([n]), slope.PAIR_BUDGET)[2].sum()  # interior windows
        t_win = best_of(lambda: slope.theil_sen_windows(c, z, WINDOW))
        t_step = best_of(lambda: slope.profile_slopes(c, z, WINDOW, 1e-4))
        short = c <= 1000.0
        every = n * (n - 1) // 2
        t_all = best_of(lambda: slope.theil_sen_windows(c[short], z[short], WINDOW, budget=every),
                        repeat=1)
        spread, rms = precision(c, z, slope.theil_sen_windows(c, z, WINDOW))
        print(f"{dx:7.1f}  {c.size:8d}  {n:10d}  {pairs:9d}  {t_win / c.size * 1e6:8.1f}  "
              f"{t_step / c.size * 1e6:8.1f}    {t_all / short.sum() * 1e6:10.1f}    "
              f"{spread:6.2f}x     {rms:5.2f}")


if __name__ == "__main__":
    main()
