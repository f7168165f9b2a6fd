"""Cost of design-flow footprints (issue 13): seconds per reach with
``--footprints`` off and on, and with depth grids, on the bundled demo basin
(invented, sample_data/basin: 5 reaches, 3 design flows each, 2 m pixels).
Prints figures; asserts nothing.

Each figure is the median of a few serial runs of every reach through the batch's
own task (:func:`reachgauge.batch.task.process_reach`), so start-up (loading the
network, the tables) is left out.

Run:  PYTHONPATH=src .venv/bin/python benchmarks/bench_footprints.py [--repeats N]
(about 30 s on 2 cores).
"""

from __future__ import annotations

import argparse
import statistics
import tempfile
import time
import warnings
from pathlib import Path

from reachgauge.api import configure
from reachgauge.batch import dispatch, shared as shared_mod, task
from reachgauge.inputs import network as network_mod

BASIN = Path(__file__).resolve().parents[1] / "sample_data" / "basin"


def per_reach(cfg, repeats):
    net = network_mod.load_network(cfg)
    shared = shared_mod.read_shared_inputs(cfg, net)
    times: dict[str, list] = {}
    for _ in range(repeats):
        for args in dispatch.tasks(cfg, net, shared, net.reaches):
            t0 = time.perf_counter()
            out = task.process_reach(*args)
            times.setdefault(out.reach_id, []).append(time.perf_counter() - t0)
        task.close_rasters()
    return {k: statistics.median(v) for k, v in times.items()}


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeats", type=int, default=3)
    a = ap.parse_args()
    warnings.simplefilter("ignore")
    with tempfile.TemporaryDirectory() as grids:
        cases = {"off": {}, "footprints": {"footprints": True},
                 "footprints + depth grids": {"footprints": True, "depth_grids": Path(grids)}}
        rows = {name: per_reach(configure(BASIN / "config.toml", **kw), a.repeats)
                for name, kw in cases.items()}
    reaches = list(rows["off"])
    print(f"{'reach':8}" + "".join(f"{n:>28}" for n in rows))
    for r in reaches:
        print(f"{r:8}" + "".join(f"{rows[n][r]:>27.3f}s" for n in rows))
    print(f"{'total':8}" + "".join(f"{sum(rows[n].values()):>27.3f}s" for n in rows))


if __name__ == "__main__":
    main()
