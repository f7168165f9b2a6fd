"""Cost of the Monte Carlo uncertainty (issue 12): the whole run with
``--uncertainty 200`` against the same run without it. Prints figures; asserts
nothing.

Target: with 200 draws the whole run stays within 2x the run without uncertainty.

Terrain: the synthetic valley of benchmarks/bench_speed.py (tests/terrain_fixtures.py;
invented, no real place), a meandering channel 10 km long, 1 m pixels, 2 cm noise, four
reaches, three design flows per reach, 50-stage rating curves; transects every 5 m
(about 2,000). Three runs through the CLI, each the median of ``--repeats``:
without uncertainty; 200 draws of n, slope and stage (exact ground); 200 draws with
``--vertical-accuracy 0.1`` (every draw's sections rebuilt with noise on every sample).
``--region DIR`` runs on the larger region of benchmarks/region_data.py instead.

Run:  PYTHONPATH=src .venv/bin/python benchmarks/bench_uncertainty.py [--repeats 3]
"""

from __future__ import annotations

import argparse
import os
import platform
import resource
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))
import bench_speed  # noqa: E402  (the same inputs as the speed benchmark)

DRAWS = 200
SPACING = 5.0
TARGET = 2.0


def timed(args: list, out: Path, repeats: int) -> tuple[float, float]:
    """Median wall time and median CPU time (user + system of the child) in s: the CPU
    time is what other work on the machine disturbs least."""
    env = dict(os.environ, PYTHONPATH=str(bench_speed.SRC))
    times, cpu = [], []
    for _ in range(repeats):
        t0 = time.perf_counter()
        r0 = resource.getrusage(resource.RUSAGE_CHILDREN)
        r = subprocess.run([sys.executable, "-c",
                            "import sys; from reachgauge.cli import main; sys.exit(main())",
                            *map(str, args), "--out", str(out), "--overwrite", "--quiet"],
                           env=env, capture_output=True, text=True)
        times.append(time.perf_counter() - t0)
        r1 = resource.getrusage(resource.RUSAGE_CHILDREN)
        cpu.append(r1.ru_utime - r0.ru_utime + r1.ru_stime - r0.ru_stime)
        if r.returncode != 0:
            raise SystemExit(r.stderr)
    return statistics.median(times), statistics.median(cpu)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeats", type=int, default=1)
    ap.add_argument("--jobs", type=int, default=1)
    ap.add_argument("--region", type=Path, help="folder made by benchmarks/region_data.py")
    a = ap.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        d = Path(tmp)
        if a.region:
            import bench_region

            spacing, _n = bench_region.choose_spacing(a.region / "streams.gpkg", 10_000)
            base = ["run", "--dem", a.region / "terrain.tif", "--streams",
                    a.region / "streams.gpkg", "--design-flows", a.region / "flows.csv",
                    "--spacing", spacing, "--id-field", "rid", "--half-width",
                    bench_region.HALF_WIDTH, *bench_speed.RATING]
            what = f"region of benchmarks/region_data.py, transects every {spacing:g} m"
        else:
            inp = bench_speed.make_inputs(d)
            base = ["run", "--dem", inp["dem"], "--streams", inp["streams"], "--id-field", "rid",
                    "--half-width", bench_speed.HALF_WIDTH, "--spacing", SPACING,
                    "--design-flows", inp["flows"], *bench_speed.RATING]
            what = f"meandering valley 10 km, transects every {SPACING:g} m"
        base += ["--jobs", a.jobs]
        plain = timed(base, d / "plain.gpkg", a.repeats)
        exact = timed(base + ["--uncertainty", DRAWS], d / "exact.gpkg", a.repeats)
        ground = timed(base + ["--uncertainty", DRAWS, "--vertical-accuracy", 0.1],
                       d / "ground.gpkg", a.repeats)
        import geopandas

        t = len(geopandas.read_file(d / "plain.gpkg", layer="transects", columns=["station"]))
    print(f"{what}; {t} transects; {platform.processor() or platform.machine()}, "
          f"--jobs {a.jobs}, median of {a.repeats}")
    print(f"{'run':<44}{'wall s':>8}{'cpu s':>8}{'ratio (wall)':>14}{'ratio (cpu)':>13}")
    for name, (w, c) in ((("without uncertainty"), plain),
                         (f"--uncertainty {DRAWS} (n, slope, stage)", exact),
                         (f"--uncertainty {DRAWS} --vertical-accuracy 0.1", ground)):
        print(f"{name:<44}{w:8.1f}{c:8.1f}{w / plain[0]:14.2f}{c / plain[1]:13.2f}")
    print(f"target: ratio <= {TARGET:g}")


if __name__ == "__main__":
    main()
