"""Evidence for the default bankfull method. Prints figures; asserts nothing.

Each automatic method of reachgauge.hydraulics.bankfull is run on a family of synthetic
sections whose bankfull stage is known by construction (tests/section_fixtures.py:
invented data, lidar-like 1 m sampling, seeded Gaussian noise), several seeds per
scenario, all seeds of a scenario picked in one call as the transects of one reach:
compound channels with clean and noisy floodplains, a DEM-blurred one, asymmetric and
one-sided floodplains, a terrace, an inset bench, small and large channels, a sloping
floodplain, a hydro-flattened bed; and two sections with no floodplain (a V valley and
a trapezoid cut off at its bank tops), where the right answer is "no break".

Table 1: median |error| of the picked stage (m) per method and scenario, with the share
of seeds where the method found no break ("miss") in brackets. Table 2: false breaks
on the no-floodplain sections. The default is the method with the fewest misses and
false breaks, ties broken by the mean of the per-scenario 90th-percentile errors.

Run: .venv/bin/python benchmarks/bankfull_methods.py [--seeds N]
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tests"))

from section_fixtures import compound_channel, trapezoid, v_valley  # noqa: E402

from reachgauge.hydraulics.bankfull import (AUTOMATIC_METHODS, BankfullParams, candidates,  # noqa: E402
                                            pick_all, pick_bankfull)
from reachgauge.kernel import sections as K  # noqa: E402

SCENARIOS = {
    "clean": lambda s: compound_channel(seed=s),
    "noise 5 cm": lambda s: compound_channel(noise=0.05, seed=s),
    "noise 10 cm": lambda s: compound_channel(noise=0.10, seed=s),
    "blurred 1 m + 3 cm": lambda s: compound_channel(blur=1.0, noise=0.03, seed=s),
    "asymmetric +0.8 m": lambda s: compound_channel(bank_rise=(0.0, 0.8), noise=0.05, seed=s),
    "one-sided": lambda s: compound_channel(floodplain=(25.0, 0.0), noise=0.05, seed=s),
    "terrace +1 m": lambda s: compound_channel(floodplain=(10.0, 10.0), terrace=(1.0, 3.0, 12.0),
                                               noise=0.05, seed=s),
    "bench 3 m": lambda s: compound_channel(bench=(0.8, 3.0, "left"), noise=0.03, seed=s),
    "small 0.6 m": lambda s: compound_channel(bottom_width=2.0, bank_height=0.6, side_slope=1.0,
                                              floodplain=(15.0, 15.0), noise=0.03, seed=s),
    "large 3 m": lambda s: compound_channel(bottom_width=25.0, bank_height=3.0, side_slope=2.0,
                                            floodplain=(30.0, 30.0), noise=0.05, seed=s),
    "sloping plain 2 %": lambda s: compound_channel(floodplain_slope=0.02, noise=0.05, seed=s),
    "flat bed": lambda s: compound_channel(flat_bed=True, noise=0.05, seed=s),
    "levee backslope 2 %": lambda s: compound_channel(floodplain_slope=-0.02, noise=0.05, seed=s),
    "narrow plain 5 m": lambda s: compound_channel(floodplain=(5.0, 5.0), noise=0.05, seed=s),
    "2 m pixels 5 cm": lambda s: compound_channel(spacing=2.0, noise=0.05, seed=s),
    "blurred 2 m + 5 cm": lambda s: compound_channel(blur=2.0, noise=0.05, seed=s),
    "noise 20 cm": lambda s: compound_channel(noise=0.20, seed=s),
}
NO_BREAK = {
    "V valley 5 cm": lambda s: v_valley(noise=0.05, seed=s),
    "V valley clean": lambda s: v_valley(seed=s),
    "steep V 10 cm": lambda s: v_valley(side_slope=1.5, depth=4.0, noise=0.10, seed=s),
    "trapezoid 3 cm": lambda s: trapezoid(noise=0.03, seed=s),
}


def reach_of(sections):
    """One Profiles of sections of unequal length (NaN-padded rows)."""
    m = max(cs.offset.size for cs in sections)
    x = np.full((len(sections), m), np.nan)
    z = np.full((len(sections), m), np.nan)
    for i, cs in enumerate(sections):
        x[i, :cs.offset.size], z[i, :cs.offset.size] = cs.offset, cs.elevation
    return K.profiles(x, z)


def run(seeds: int):
    """Every seed of a scenario is one transect of a reach: candidates and the default
    pick of all of them in one call each."""
    errors, false, confid = {}, {}, {}
    for table, scenarios in ((errors, SCENARIOS), (false, NO_BREAK)):
        for name, build in scenarios.items():
            syn = [build(s) for s in range(seeds)]
            p = reach_of([x.section for x in syn])
            cand = candidates(p)
            truth = np.array([x.bankfull for x in syn])
            table[name] = {m: (cand[:, j] - truth if table is errors
                               else int(np.isfinite(cand[:, j]).sum()))
                           for j, m in enumerate(AUTOMATIC_METHODS)}
            confid[name] = list(pick_all(p, BankfullParams()).confidence)
    return errors, false, confid


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--seeds", type=int, default=20)
    args = ap.parse_args(argv)
    t0 = time.perf_counter()
    errors, false, confid = run(args.seeds)
    w = 19
    print(f"Bankfull methods on synthetic sections ({args.seeds} seeds each; "
          f"median |error| in m, [share missed])")
    print("scenario".ljust(w) + "".join(m.rjust(w + 2) for m in AUTOMATIC_METHODS))
    score = {m: {"miss": 0, "p90": []} for m in AUTOMATIC_METHODS}
    for name, per in errors.items():
        row = name.ljust(w)
        for m in AUTOMATIC_METHODS:
            e = np.abs(np.array(per[m]))
            ok = np.isfinite(e)
            miss = 1 - ok.mean()
            med = np.median(e[ok]) if ok.any() else np.nan
            score[m]["miss"] += int((~ok).sum())
            score[m]["p90"].append(np.percentile(e[ok], 90) if ok.any() else np.nan)
            row += f"{med:12.3f} [{miss:4.0%}]".rjust(w + 2)
        print(row)
    print()
    print("False breaks on sections with no floodplain (share of seeds with a break found)")
    print("scenario".ljust(w) + "".join(m.rjust(w + 2) for m in AUTOMATIC_METHODS))
    for name, per in false.items():
        print(name.ljust(w) + "".join(f"{per[m] / args.seeds:{w + 2}.0%}" for m in AUTOMATIC_METHODS))
        for m in AUTOMATIC_METHODS:
            score[m]["miss"] += per[m]
    print()
    print("Summary: misses + false breaks, mean of per-scenario 90th-percentile |error| (m)")
    for m in AUTOMATIC_METHODS:
        print(f"  {m:22s} {score[m]['miss']:5d}   {np.nanmean(score[m]['p90']):.3f}")
    best = min(AUTOMATIC_METHODS, key=lambda m: (score[m]["miss"], np.nanmean(score[m]["p90"])))
    print(f"Default by this evidence: {best}")
    print()
    print("Confidence of the default pick (share high / medium / low / none)")
    for name, c in confid.items():
        c = np.array(c)
        print(f"  {name:22s} " + " ".join(f"{np.mean(c == k):5.0%}" for k in ("high", "medium", "low", "none")))
    syn = compound_channel(noise=0.05, seed=0)
    reps = 200
    t = time.perf_counter()
    for _ in range(reps):
        pick_bankfull(syn.section)
    one = (time.perf_counter() - t) / reps
    p = reach_of([compound_channel(noise=0.05, seed=s).section for s in range(reps)])
    t = time.perf_counter()
    pick_all(p, BankfullParams())
    per = (time.perf_counter() - t) / reps
    print(f"\npick_bankfull on a 73-point noisy section: {one * 1e3:.2f} ms; pick_all on {reps} "
          f"such sections: {per * 1e3:.3f} ms per section ({time.perf_counter() - t0:.1f} s in all)")

if __name__ == "__main__":
    main()
