"""Run the reach tasks: serially, in a local process pool, or on a Dask
cluster; yield each :class:`~reachgauge.batch.task.ReachOutput` as it finishes.

Bounded. At most :data:`WINDOW_PER_WORKER` tasks per worker are in flight, and
a task's arguments (its neighbours, its rows of the run-wide tables) are built
only when a place in the window frees up, so what the client holds is bounded
by the window, not by the run. The same loop (:func:`bounded`) drives the local
pool and Dask.

Start-up. A local pool is started once per run. Where the platform has it, the
workers are forked from a forkserver: a fresh interpreter (started by exec, not
forked from this process, which may have opened GDAL datasets; GDAL's open
handles and caches must not be copied into a child) that imports the task's
modules once (:data:`PRELOAD`) and opens no dataset, so a fork of it is safe and
starts with everything imported. Measured on 2 cores (benchmarks would show
the same): two spawned workers 1.8 s; two forkserver workers 1.6 s the first
time in a process (the server's imports), 0.17 s for every later pool. What the
server holds when it forks: no dataset; PROJ's database (proj.db, opened
read-only by the pyproj and GDAL imports; SQLite reads with pread and holds no
lock between queries, and the server forks only while idle); the idle threads
of OpenBLAS and jemalloc, which both reset themselves in a child (their own
fork handlers). The server keeps the environment of the first pool of the
process: set GDAL options before a run, not between runs.

Serial when a pool cannot pay. With ``jobs`` 0 (one worker per core) the work
is estimated (transects ≈ reach length / spacing, :data:`PER_TRANSECT_S` each)
and the run stays serial when a pool would save less than it costs to start;
``note`` says so. ``jobs`` 1 is always serial; ``jobs`` N ≥ 2 always a pool of
N (at most one worker per reach), with a note when serial would be faster.
"""

from __future__ import annotations

import dataclasses
import multiprocessing
import os
import select
import threading
import time
from pathlib import Path
from typing import TYPE_CHECKING, Callable, Iterable, Iterator

from reachgauge import lifecycle
from reachgauge.batch.task import ReachOutput, close_rasters, run_task
from reachgauge.errors import InputError

if TYPE_CHECKING:
    from reachgauge.batch.shared import SharedInputs
    from reachgauge.config import RunConfig

WINDOW_PER_WORKER = 2    # one task running and one waiting per worker: none idles between tasks
# measured on the demo basin (1.3–1.4 ms per transect with land cover, rating
# curves and checks: its 5 reaches 8 times over, 1592 transects, serial, 2-core machine)
PER_TRANSECT_S = 1.3e-3
# measured: two workers ready to run a reach task (spawn 1.8 s; forkserver 1.6 s
# the first time in a process); the first start is what a run pays
POOL_START_S = 1.6
PRELOAD = ["reachgauge.batch.task", "reachgauge.inputs.landcover"]


def iterate(cfg: RunConfig, net, shared: SharedInputs, reaches=None,
            note: Callable[[str], None] | None = None, finish=None,
            finish_remote=None) -> Iterator[ReachOutput]:
    """Yield a :class:`ReachOutput` per reach of ``reaches`` (default: every
    reach of ``net``) as each finishes, on the executor the config asks for:
    ``scheduler`` (Dask), else a local pool or serial (:func:`plan`). ``note``
    gets one line for each choice made here that the user should know of.
    ``finish(output, reach)``, picklable, runs in the worker on each output and
    what it returns is yielded instead; on Dask ``finish_remote`` does (workers
    there may not see this machine's disk)."""
    reaches = list(net.reaches if reaches is None else reaches)
    if cfg.scheduler:
        yield from _on_dask(cfg, net, shared, reaches, finish_remote)
        return
    workers, why = plan(cfg, reaches)
    if why and note:
        note(why)
    args = tasks(cfg, net, shared, reaches)
    if workers > 1:
        yield from _in_pool(args, workers, finish)
        return
    try:
        for a in args:
            yield run_task(finish, *a)
    finally:
        close_rasters()


def tasks(cfg: RunConfig, net, shared: SharedInputs, reaches, raster=None, landcover=None):
    """The arguments of :func:`process_reach` per reach, built one at a time."""
    raster = net.raster if raster is None else raster
    landcover = cfg.landcover if landcover is None else landcover
    for r in reaches:
        # other streams within reach of a transect, for the crossing checks
        nb = net.neighbours(r, 2.0 * max(cfg.half_width, r.half_width_m or 0.0,
                                          _footprint_half(cfg, r)))
        yield raster, r, cfg, shared.for_reach(r), nb, landcover


def _footprint_half(cfg, r) -> float:
    """Half the width a reach's footprints map (m; 0 without footprints): reaches
    within twice that may own cells of its corridor (reachgauge.flood.corridor)."""
    if not (cfg.footprints or cfg.depth_grids is not None):
        return 0.0
    from reachgauge.flood.reach import DEFAULT_WIDTH_FACTOR

    hw = max(cfg.half_width, r.half_width_m or 0.0)
    return 0.5 * (cfg.footprint_max_width or DEFAULT_WIDTH_FACTOR * 2 * hw)


def estimate_transects(reaches, spacing: float) -> float:
    """Transects the usable reaches will have: length / spacing (both metres)."""
    return sum(r.length_m for r in reaches if r.status == "ok") / spacing


def plan(cfg: RunConfig, reaches, cores: int | None = None) -> tuple[int, str | None]:
    """(workers, note): 1 for serial. A pool pays when the time it saves,
    serial × (1 − 1/workers), exceeds :data:`POOL_START_S`."""
    if cfg.jobs == 1 or len(reaches) < 2:
        return 1, None
    workers = min(cfg.jobs or cores or os.cpu_count() or 1, len(reaches))
    if workers < 2:
        return 1, None
    n = estimate_transects(reaches, cfg.spacing)
    serial = n * PER_TRANSECT_S
    if serial * (1 - 1 / workers) >= POOL_START_S:
        return workers, None
    cost = (f"about {n:.0f} transects take about {serial:.1f} s, less than the "
            f"~{POOL_START_S:.1f} s a pool of {workers} workers needs to start")
    if cfg.jobs == 0:
        return 1, f"ran serially: {cost} (--jobs {workers} forces a pool)"
    return workers, f"--jobs {cfg.jobs}: {cost}; --jobs 1 (or 0 to choose) would be faster"


def bounded(args: Iterable, submit: Callable, next_done: Callable, window: Callable[[], int]):
    """Results of the tasks ``args`` with at most ``window()`` in flight.

    ``submit(a)`` starts one task; ``next_done()`` blocks until a started task
    finishes and returns its future. The window is refilled before a result is
    handed on, so workers keep busy while the caller writes it."""
    args = iter(args)
    running = 0

    def fill():
        nonlocal running
        while running < max(window(), 1):
            a = next(args, None)
            if a is None:
                return
            submit(a)
            running += 1

    fill()
    while running:
        fut = next_done()
        running -= 1
        fill()
        yield fut.result()


# ================================================================= local pool
def start_method() -> str:
    return "forkserver" if "forkserver" in multiprocessing.get_all_start_methods() else "spawn"


def _worker_started(run_pid: int) -> None:
    """Initializer of a forkserver worker. Its parent is the server, so
    :func:`reachgauge.lifecycle.worker_started` watches the server; and it
    watches the run's process itself, because the server outlives a killed run
    for as long as any worker does (each worker holds the write end of the pipe
    whose end-of-file tells the server that the run is gone)."""
    lifecycle.worker_started(os.getppid())
    try:
        fd = os.pidfd_open(run_pid)
    except ProcessLookupError:   # the run ended before this worker started
        os._exit(1)
    except (AttributeError, OSError):   # no pidfd (not Linux ≥ 5.3): ask every half second
        fd = None

    def watch():
        if fd is not None:
            select.select([fd], [], [])   # readable once the process has ended
        else:
            while lifecycle.alive(run_pid):
                time.sleep(0.5)
        os._exit(1)

    threading.Thread(target=watch, name="reachgauge-run-watch", daemon=True).start()


def pool(workers: int):
    """A process pool whose workers ignore Ctrl-C and die with the run
    (:func:`reachgauge.lifecycle.worker_started`; forkserver workers also
    watch the run's process, :func:`_worker_started`)."""
    from concurrent.futures import ProcessPoolExecutor

    method = start_method()
    ctx = multiprocessing.get_context(method)
    if method == "forkserver":
        ctx.set_forkserver_preload(PRELOAD)
        init, initargs = _worker_started, (os.getpid(),)
    else:
        init, initargs = lifecycle.worker_started, (os.getpid(),)
    return ProcessPoolExecutor(max_workers=workers, mp_context=ctx, initializer=init,
                               initargs=initargs)


def _in_pool(args, workers: int, finish=None):
    from concurrent.futures import FIRST_COMPLETED, wait

    pending: set = set()

    def next_done():
        done, _ = wait(pending, return_when=FIRST_COMPLETED)
        fut = done.pop()
        pending.discard(fut)
        return fut

    with pool(workers) as ex:
        yield from bounded(args, lambda a: pending.add(ex.submit(run_task, finish, *a)), next_done,
                           lambda: WINDOW_PER_WORKER * workers)


# ======================================================================= Dask
def _on_dask(cfg: RunConfig, net, shared: SharedInputs, reaches, finish=None):
    """The same tasks on a Dask cluster: workers open the raster themselves from
    its path (the client sends none of its pixels), the window follows the
    cluster's thread count as workers come and go."""
    try:
        from dask.distributed import Client, as_completed
    except ImportError:
        raise InputError("--scheduler needs Dask distributed",
                         "install reachgauge with the 'dask' extra: pip install 'reachgauge[dask]'"
                         ) from None
    try:
        _knock(cfg.scheduler)
        client = Client(cfg.scheduler, timeout="10s", set_as_default=False)
    except (OSError, TimeoutError) as exc:
        raise InputError(f"cannot reach the Dask scheduler at {cfg.scheduler} ({exc})",
                         "check the address (tcp://host:port) and that the scheduler runs"
                         ) from None
    # a worker's working folder is not ours: local paths go as absolute paths
    raster = dataclasses.replace(net.raster, path=_absolute(net.raster.path))
    landcover = None if cfg.landcover is None else _absolute(cfg.landcover)

    seen = [0.0, 1]   # when the thread count was last asked for, and the count

    def window():
        if time.monotonic() - seen[0] > 1.0:   # a round trip to the scheduler: once a second
            seen[:] = time.monotonic(), max(_threads(client), 1)
        return WINDOW_PER_WORKER * seen[1]

    with client:
        ac = as_completed(loop=client.loop)
        done = iter(ac)
        yield from bounded(tasks(cfg, net, shared, reaches, raster, landcover),
                           lambda a: ac.add(client.submit(run_task, finish, *a, pure=False)),
                           lambda: next(done), window)


def _knock(address: str) -> None:
    """Raise OSError at once when nothing listens at a TCP scheduler address
    (Dask's client would retry until its timeout)."""
    import socket

    from distributed.comm import parse_address, parse_host_port

    scheme, loc = parse_address(address)
    if scheme == "tcp":
        socket.create_connection(parse_host_port(loc), timeout=5).close()


def _threads(client) -> int:
    """Worker threads of the cluster now (workers may come and go)."""
    return int(client.scheduler_info(n_workers=0).get("total_threads")
               or sum(client.nthreads().values()))


def _absolute(path) -> str:
    text = str(path)
    if "://" in text or text.startswith("/vsi") or not Path(text).exists():
        return text
    return str(Path(text).resolve())
