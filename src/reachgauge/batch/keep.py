"""What a worker does with a finished reach before handing it back.

Turning a reach's tables into the rows the GeoPackage holds (units, CRS,
types: :func:`reachgauge.results.layers.reach_layers`) and keeping them as a
checkpoint part costs as much as a fair share of the reach's own work; done in
the worker it runs in parallel, and the run's process receives only the small
header (the summary's counts). On a Dask cluster the workers may not see this
machine's disk: they shape the rows and send them back (``folder`` None).
"""

from __future__ import annotations

import time
from dataclasses import dataclass


@dataclass
class Kept:
    """A finished reach as the run's process receives it: ``header`` (reach row,
    counts), ``layers`` (None when the worker wrote the part itself) and
    ``output``, the task's output without its tables (for progress)."""

    header: dict
    layers: dict | None
    output: object
    seconds: float = 0.0     # shaping the rows and writing the part


@dataclass(frozen=True)
class Keeper:
    """``keeper(output, reach)``: shape a reach's output into its layers and its
    header; write the checkpoint part into ``folder`` when given."""

    units: str
    work_crs: object
    source_crs: object
    folder: str | None = None

    def __call__(self, out, reach) -> Kept:
        from reachgauge.batch.checkpoint import write_part
        from reachgauge.batch.summary import tally
        from reachgauge.results.layers import reach_layers

        t0 = time.perf_counter()
        header = tally(out)
        layers = reach_layers(out, reach.geometry, self.units, self.work_crs, self.source_crs)
        light = type(out)(out.reach_id, None, out.reach_row, error=out.error,
                          seconds=out.seconds, read_seconds=out.read_seconds)
        if self.folder is None:
            return Kept(header, layers, light, time.perf_counter() - t0)
        write_part(self.folder, header, layers)
        return Kept(header, None, light, time.perf_counter() - t0)
