"""Speed of the cross-section engine. Prints figures; asserts nothing.

Targets (issue 2): a 500-stage rating curve on a 1,000-point profile in
milliseconds; (issue 4) a reach of 200 transects × 100 stages in well under a
second; (issue 8) the kernel at O(log m) per (transect, stage).
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
    print(f"reach, one at a time: 200 x 100 stages  {t * 1e3:8.2f} ms")

    from reachgauge.kernel import sections as K
    from reachgauge.kernel import solver

    z = np.array([s.elevation for s in sections])
    p = K.profiles(xs, z)
    stages = p.thalweg[:, None] + st[None, :]
    t = best_of(lambda: K.wet(p, stages), 3)
    print(f"reach, kernel: 200 x 100 stages         {t * 1e3:8.2f} ms")
    t = best_of(lambda: solver.normal_stage(p, np.full(200, 5.0), 0.002, 0.035), 3)
    print(f"reach, kernel: normal depth x 200       {t * 1e3:8.2f} ms")
    banks = np.tile([20.0, 40.0], (200, 1))
    t = best_of(lambda: K.flow(p, stages, 0.002, (0.06, 0.035, 0.06), banks), 3)
    print(f"reach, divided channel: 200 x 100       {t * 1e3:8.2f} ms")
    big = K.profiles(xs, np.tile(z, (50, 1)))
    st50 = big.thalweg[:, None] + np.linspace(0, 5, 50)[None, :]
    t = best_of(lambda: K.flow(big, st50, 0.002, (0.06, 0.035, 0.06), np.tile(banks, (50, 1))), 3)
    print(f"10,000 transects x 50 stages, divided   {t * 1e3:8.2f} ms")

if __name__ == "__main__":
    main()
