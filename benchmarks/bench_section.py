"""Speed of the cross-section engine. Prints figures; asserts nothing.

Targets (issue 2): a 500-stage rating curve on a 1,000-point profile in
milliseconds; (issue 4) a reach of 200 transects × 100 stages in well under a
second.
"""

import time

import numpy as np

from reachgauge import CrossSection


def best_of(fn, repeat=5):
    times = []
    for _ in range(repeat):
        t = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t)
    return min(times)


def main():
    rng = np.random.default_rng(1)
    x = np.linspace(0, 1000, 1000)
    z = (x - 500) ** 2 / 2e4 + rng.normal(0, 0.05, x.size)
    cs = CrossSection(x, z)
    stages = np.linspace(cs.thalweg, cs.top, 500)
    t = best_of(lambda: cs.geometry(stages))
    print(f"geometry: 500 stages x 1000 points      {t * 1e3:8.2f} ms")
    t = best_of(lambda: cs.discharge(stages, 0.001, 0.035))
    print(f"discharge: 500 stages x 1000 points     {t * 1e3:8.2f} ms")
    t = best_of(lambda: cs.stage_for_discharge(50.0, 0.001, 0.035))
    print(f"normal depth: one discharge             {t * 1e3:8.2f} ms")

    xs = np.linspace(-30, 30, 61)
    sections = [CrossSection(xs, np.abs(xs) / 5 + rng.normal(0, 0.02, xs.size)) for _ in range(200)]
    st = np.linspace(0, 5, 100)

    def reach():
        for s in sections:
            s.geometry(s.thalweg + st)

    t = best_of(reach, 3)
    print(f"reach: 200 transects x 100 stages       {t * 1e3:8.2f} ms")


if __name__ == "__main__":
    main()
