"""Run the reach tasks: serially, in a local process pool, or on a Dask
cluster; yield each :class:`~reachgauge.batch.task.ReachOutput` as it finishes."""

from __future__ import annotations

import os
from typing import TYPE_CHECKING

from reachgauge import lifecycle
from reachgauge.batch.task import process_reach
from reachgauge.errors import InputError

if TYPE_CHECKING:
    from reachgauge.batch.pipeline import SharedInputs
    from reachgauge.config import RunConfig


def iterate(cfg: RunConfig, net, shared: SharedInputs, reaches=None, note=None):
    """Yield a :class:`ReachOutput` per reach as each finishes, on the executor
    the config asks for: ``scheduler`` (Dask), ``jobs`` > 1 or 0 (process pool),
    else serial."""
    # other streams within reach of a transect, for the crossing checks
    args = [(net.raster, r, cfg, shared.for_reach(r),
             net.neighbours(r, 2.0 * max(cfg.half_width, r.half_width_m or 0.0)), cfg.landcover)
            for r in (net.reaches if reaches is None else reaches)]
    if cfg.scheduler:
        try:
            from dask.distributed import Client, as_completed
        except ImportError:
            raise InputError("--scheduler needs Dask distributed",
                             "install reachgauge with the 'dask' extra: pip install 'reachgauge[dask]'"
                             ) from None
        try:
            client = Client(cfg.scheduler, timeout="10s")
        except (OSError, TimeoutError) as exc:
            raise InputError(f"cannot reach the Dask scheduler at {cfg.scheduler} ({exc})",
                             "check the address (tcp://host:port) and that the scheduler runs"
                             ) from None
        with client:
            futures = [client.submit(process_reach, *a, pure=False) for a in args]
            for fut in as_completed(futures):
                yield fut.result()
        return
    jobs = cfg.jobs if cfg.jobs > 0 else (os.cpu_count() or 1)
    if jobs > 1 and len(args) > 1:
        import multiprocessing
        from concurrent.futures import ProcessPoolExecutor, as_completed as done

        ctx = multiprocessing.get_context("spawn")  # GDAL state must not be forked
        with ProcessPoolExecutor(max_workers=min(jobs, len(args)), mp_context=ctx,
                                 initializer=lifecycle.worker_started,
                                 initargs=(os.getpid(),)) as pool:
            futures = [pool.submit(process_reach, *a) for a in args]
            for fut in done(futures):
                yield fut.result()
        return
    for a in args:
        yield process_reach(*a)


