"""Speed and memory of the whole batch (`pipeline.compute`). Prints figures; asserts nothing.

Targets: thousands of transects a minute on one core; peak memory set by the reach,
not by the raster (a task reads only the window around its reach). The same eight
reaches (4.8 km of channel) are run on a small raster and on one with 16 times the
cells; each run is a fresh process so its peak memory is its own.
"""

import json
import subprocess
import sys
import tempfile
from pathlib import Path

HERE = Path(__file__).resolve().parent
CHILD = r"""
import json, sys, time
sys.path.insert(0, sys.argv[1])
from reachgauge.config import RunConfig
from reachgauge.batch.pipeline import compute
cfg = RunConfig(dem=sys.argv[2], streams=sys.argv[3], half_width=30.0, jobs=int(sys.argv[4]))
t = time.perf_counter()
run = compute(cfg)
dt = time.perf_counter() - t
n = sum(h["tally"]["transects"] for h in run.headers)
# VmHWM: this process's own peak resident memory (ru_maxrss would carry the
# parent's peak across fork and exec)
hwm = next(l for l in open("/proc/self/status") if l.startswith("VmHWM")).split()[1]
print(json.dumps({"seconds": dt, "transects": n, "peak_mb": int(hwm) / 1024}))
"""


def make_inputs(d: Path, margin: float):
    sys.path.insert(0, str(HERE.parent / "tests"))
    import shapely
    import terrain_fixtures as tf

    # eight reaches of 600 m along one valley; the raster reaches ``margin`` m beyond
    line = tf.straight_line(4800.0)
    v = tf.make_valley_raster(d, line, res=1.0, noise=0.02, margin=margin,
                              name=f"dem_{int(margin)}.tif")
    parts = [shapely.LineString([line.interpolate(600.0 * i), line.interpolate(600.0 * (i + 1))])
             for i in range(8)]
    streams = tf.write_lines(d / f"streams_{int(margin)}.gpkg", parts,
                             fields={"rid": [f"R{i}" for i in range(8)]})
    return v.path, streams


def main():
    with tempfile.TemporaryDirectory() as tmp:
        d = Path(tmp)
        for margin in (60.0, 800.0):   # 0.6 M and 10 M cells
            dem, streams = make_inputs(d, margin)
            for jobs in (1, 2):
                out = subprocess.run([sys.executable, "-c", CHILD, str(HERE.parent / "src"),
                                      str(dem), str(streams), str(jobs)],
                                     capture_output=True, text=True, check=True)
                r = json.loads(out.stdout.strip().splitlines()[-1])
                import rasterio
                with rasterio.open(dem) as ds:
                    cells = ds.width * ds.height / 1e6
                print(f"raster {cells:5.1f} M cells, jobs {jobs}: {r['transects']} transects in "
                      f"{r['seconds']:.2f} s ({r['transects'] / r['seconds']:.0f}/s), "
                      f"peak RSS {r['peak_mb']:.0f} MB")


if __name__ == "__main__":
    main()
