"""Cost and precision of the windowed slope, and the evidence behind the
profile conditioning. Prints figures; asserts nothing.

Part 1 (speed):

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

Part 2 (conditioning): a 2 km grade (0.002, stations every 10 m, 200 m window,
2 cm Gaussian noise) with a road embankment 1.5 m high over 3 stations, a pit
0.5 m deep over 2 stations, a kettle-like sequence of depressions (sin² bowls
0.5–2.5 m deep, 30–80 m long, 50–200 m apart), no feature, and an embankment
with a 0.8 m plunge pool over the next 3 stations; 30 noise draws each. Each
way of making the profile monotone is followed by the same slope fit; printed
are medians over the draws of: the largest station-slope error over the reach,
the largest within 150 m upstream of the feature (%), the length whose slope
fell below half the truth (m), the stations moved by more than 5 cm, the
reach-slope error (%) and the share of stations moved more than 0.25 m (%).

Run: .venv/bin/python benchmarks/bench_slope.py [--part speed|conditioning]
"""

import argparse
import time

import numpy as np
from scipy import stats
from scipy.optimize import isotonic_regression

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


def isotonic(c, z):
    """Least-squares monotone fit (pool-adjacent-violators, scipy)."""
    return isotonic_regression(z, increasing=False).x


def isotonic_grade(c, z):
    """Stations pooled by the least-squares fit put on the straight grade
    between the stations it left alone."""
    blocks = isotonic_regression(z, increasing=False).blocks
    alone = np.zeros(z.size, bool)
    alone[blocks[:-1][np.diff(blocks) == 1]] = True
    return np.interp(c, c[alone], z[alone])


def stretch_choice(c, z):
    """Each stretch between stations that need no move either breached or
    filled whole, whichever moves less."""
    low, high = slope._breach(c, z), slope._fill(c, z)
    stretch = np.cumsum((low == z) & (high == z))
    use_low = np.bincount(stretch, z - low) <= np.bincount(stretch, high - z)
    return np.where(use_low[stretch], low, high)


METHODS = {
    "breach only (before)": slope._breach,
    "least squares (isotonic)": isotonic,
    "isotonic pools -> grade": isotonic_grade,
    "breach or fill a stretch": stretch_choice,
    "least change (chosen)": lambda c, z: slope.carve(c, z)[0],
}


def conditioning_cases(c, rng):
    grade = 100.0 - SLOPE * c
    box = lambda a, b: (c >= a) & (c < b)  # noqa: E731
    kettles = grade.copy()
    pos = 100.0
    while pos < c[-1] - 100.0:
        length, depth = rng.uniform(30, 80), rng.uniform(0.5, 2.5)
        m = (c >= pos) & (c <= pos + length)
        kettles[m] -= depth * np.sin(np.pi * (c[m] - pos) / length) ** 2
        pos += length + rng.uniform(50, 200)
    return {
        "embankment 1.5 m x 3 st": grade + 1.5 * box(1000, 1030),
        "pit 0.5 m x 2 st": grade - 0.5 * box(1000, 1020),
        "kettle-like depressions": kettles,
        "clean grade": grade,
        "embankment + plunge pool": grade + 1.5 * box(1000, 1030) - 0.8 * box(1030, 1060),
    }


def conditioning():
    c = np.arange(0.0, 2000.0 + 1e-9, 10.0)
    up = (c >= 850.0) & (c < 1000.0)
    rows = {}
    for seed in range(30):
        rng = np.random.default_rng(100 + seed)
        for case, z0 in conditioning_cases(c, rng).items():
            z = z0 + rng.normal(0, 0.02, c.size)
            for name, method in METHODS.items():
                y = method(c, z)
                fit = slope.profile_slopes(c, y, WINDOW, 1e-4)
                err = np.abs(fit.station / SLOPE - 1) * 100
                move = np.abs(y - z)
                rows.setdefault((case, name), []).append((
                    err.max(), err[up].max(), np.sum(fit.station < SLOPE / 2) * 10.0,
                    np.sum(move > 0.05), abs(fit.reach / SLOPE - 1) * 100,
                    np.mean(move > slope.RESHAPE_MOVE) * 100))
    print("\nconditioning: 2 km grade 0.002, 10 m stations, 200 m window, 2 cm noise; "
          "medians of 30 draws")
    print(f"{'case':26s}{'method':27s}{'max err %':>10s}{'upstream %':>11s}{'<half m':>8s}"
          f"{'moved':>6s}{'reach %':>8s}{'>0.25 m %':>10s}")
    for (case, name), vals in rows.items():
        v = np.median(np.array(vals), axis=0)
        print(f"{case:26s}{name:27s}{v[0]:10.1f}{v[1]:11.1f}{v[2]:8.0f}{v[3]:6.0f}{v[4]:8.1f}"
              f"{v[5]:10.1f}")


if __name__ == "__main__":
    ap = argparse.ArgumentParser()
    ap.add_argument("--part", choices=["speed", "conditioning"], help="run one part only")
    part = ap.parse_args().part
    if part != "conditioning":
        main()
    if part != "speed":
        conditioning()
