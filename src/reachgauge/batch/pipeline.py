"""The batch from inputs to files: read the run-wide inputs, run every reach
(:mod:`reachgauge.batch.dispatch`, each one a :mod:`reachgauge.batch.task`),
summarise, and write the results."""

from __future__ import annotations

import dataclasses
import time
from dataclasses import dataclass, field
from pathlib import Path

from reachgauge.transects import cutting
from reachgauge.batch import dispatch, outcome
from reachgauge.batch.shared import read_shared_inputs
from reachgauge.inputs import network as network_mod, raster as raster_mod
from reachgauge.config import RunConfig
from reachgauge.errors import InputError


def cut_all(cfg: RunConfig):
    """Load the network and cut every reach serially: per reach, the transects,
    their sampled sections, thalweg and slopes. Returns ``(network, [ReachSections])``."""
    net = network_mod.load_network(cfg)
    params = cutting.CuttingParams.from_config(cfg)
    out = []
    with raster_mod.open_raster(net.raster) as ds:
        for reach in net.reaches:
            nb = (net.neighbours(reach, reach.half_width_m + cfg.snap_distance)
                  if reach.status == "ok" else None)
            out.append(cutting.cut_reach(ds, net.raster, reach, params, nb))
    return net, out


@dataclass
class RunResult:
    """A computed run: the network and, in reach order, the header of every
    reach's part (its reach row and counts, see :func:`reachgauge.batch.summary.tally`)."""

    network: object
    headers: list
    elapsed: float
    warnings: list
    notes: list = field(default_factory=list)
    timings: dict = field(default_factory=dict)
    regional: object = None       # regional curves over the reaches (issue 12), see run_to_file


class KeptInMemory:
    """A sink for :func:`compute` that keeps every reach's layers in memory
    (small runs and tests; a file run streams them to a
    :class:`~reachgauge.batch.checkpoint.Checkpoint`)."""

    folder = None     # no folder: workers hand their rows back

    def __init__(self):
        self.parts: dict[str, dict] = {}

    def add(self, header: dict, layers: dict) -> None:
        self.parts[header["reach_id"]] = layers

    def layers(self, header: dict) -> dict:
        return self.parts[header["reach_id"]]


def estimated_transects(reach, cfg: RunConfig) -> int:
    """Transects a reach will have (its length over the spacing), for progress."""
    if reach.status != "ok":
        return 0
    return int((reach.length_m or 0.0) // cfg.spacing) + 1


def compute(cfg: RunConfig, net=None, shared=None, sink=None, done=None,
            progress=None) -> RunResult:
    """Run every reach not in ``done`` ({reach id: header} of reaches already
    kept). Each finished reach's layers (final form, :mod:`reachgauge.results.layers`)
    go to ``sink``: written by the worker into ``sink.folder`` where there is
    one and the worker shares this disk, else handed to ``sink.add(header, layers)``.

    ``progress(output, done, total)`` is called after each reach; a progress
    object with a ``start(reaches, transects, reaches_done, transects_done)``
    method hears the estimated size first.
    """
    import tempfile

    from reachgauge.batch.keep import Keeper
    from reachgauge.drainage import attach, channels

    t0 = time.perf_counter()
    sink = sink if sink is not None else KeptInMemory()
    # issue 12: the drainage-area raster, routed once (kept in the checkpoint
    # folder, or a temporary one the channels and the tasks share)
    where, _tmp = sink.folder, None
    if net is None:
        if channels.derives(cfg) and where is None:
            _tmp = tempfile.TemporaryDirectory(prefix="reachgauge-drainage-")
            where = _tmp.name
        net = load_or_derive(cfg, where)
        outcome.check_network(net, cfg)      # every reach unusable for one cause: exit 2 now
    shared = shared if shared is not None else read_shared_inputs(cfg, net)
    shared, _drainage_tmp = attach(cfg, net, shared, where)
    headers = dict(done or {})
    order = {str(r.reach_id): i for i, r in enumerate(net.reaches)}
    todo = [r for r in net.reaches if str(r.reach_id) not in headers]
    total = len(net.reaches)
    start = getattr(progress, "start", None)
    if start:
        start(total, sum(estimated_transects(r, cfg) for r in net.reaches), len(headers),
              sum(h["tally"]["transects"] for h in headers.values()))
    notes: list[str] = []
    timings = {"task": 0.0, "read": 0.0, "keep": 0.0}
    folder = None if sink.folder is None else str(sink.folder)
    keeper = Keeper(cfg.units, net.work_crs, net.source_crs, folder)
    remote = dataclasses.replace(keeper, folder=None)   # Dask workers send their rows back
    for kept in dispatch.iterate(cfg, net, shared, reaches=todo, note=notes.append,
                                 finish=keeper, finish_remote=remote):
        t1 = time.perf_counter()
        if kept.layers is not None:
            sink.add(kept.header, kept.layers)
        headers[kept.header["reach_id"]] = kept.header
        timings["keep"] += kept.seconds + time.perf_counter() - t1
        timings["task"] += kept.output.seconds
        timings["read"] += kept.output.read_seconds
        if progress:
            progress(kept.output, len(headers), total)
    # read: the terrain windows; compute: the rest of the reach's work; keep:
    # shaping its rows and writing its checkpoint part (all summed over workers)
    timings["compute"] = timings.pop("task") - timings["read"]
    ordered = sorted(headers.values(), key=lambda h: order[h["reach_id"]])
    outcome.check_outputs([h["reach_row"] for h in ordered], net, cfg)
    return RunResult(net, ordered, time.perf_counter() - t0, list(net.warnings), notes, timings)


def load_or_derive(cfg: RunConfig, folder):
    """The run's network: the streams, or (no streams, ``--channel-area``) the
    channels derived from the terrain routed into ``folder``
    (:mod:`reachgauge.drainage.channels`)."""
    from reachgauge.drainage import channels

    if channels.derives(cfg):
        return channels.derived_network(cfg, folder)
    return network_mod.load_network(cfg)


def identity(cfg: RunConfig, net) -> dict:
    """What a checkpoint must match to be resumed: the version, the settings that
    decide the result, the inputs' fingerprints and the reaches. ``net`` None:
    the reaches are channels derived from the terrain, decided by the version,
    settings and terrain alone (they are derived after the checkpoint opens)."""
    import hashlib

    from reachgauge import __version__
    from reachgauge.results import run_info

    if net is None:
        reaches = "derived from the terrain"
    else:
        ids = "\n".join(str(r.reach_id) for r in net.reaches).encode()
        reaches = [len(net.reaches), hashlib.sha256(ids).hexdigest()]
    return {"version": __version__, "settings": run_info.settings(cfg),
            "inputs": run_info.inputs(cfg), "reaches": reaches}


def run_to_file(cfg: RunConfig, out, *, overwrite: bool = False, csv_dir=None, report=None,
                colour_by: str = "discharge", progress=None, resume: bool = False):
    """The whole batch: compute every reach, keeping each one's rows in the
    checkpoint beside ``out`` as it finishes (:mod:`reachgauge.batch.checkpoint`),
    then assemble the GeoPackage (atomically), optionally CSV copies of the tables
    and the HTML report. ``resume``: continue the interrupted run whose checkpoint
    is there. Returns the :class:`~reachgauge.batch.summary.RunSummary`."""
    from reachgauge import lifecycle
    from reachgauge.batch.checkpoint import Checkpoint
    from reachgauge.batch.summary import summarise
    from reachgauge.drainage import channels
    from reachgauge.errors import OutputError
    from reachgauge.results.staging import RunOutputs

    t0 = time.perf_counter()
    # every target checked before the work; all written together after it
    with RunOutputs(out, csv_dir=csv_dir, report=report, overwrite=overwrite,
                    colour_by=colour_by) as targets:
        if cfg.depth_grids is not None and not (overwrite or resume):
            from reachgauge.flood.grids import check_no_grids

            check_no_grids(cfg.depth_grids)
        # derived channels (issue 12) are made in the checkpoint folder, so after it opens
        net = shared = None
        if not channels.derives(cfg):
            net = network_mod.load_network(cfg)
            outcome.check_network(net, cfg)      # every reach unusable for one cause: exit 2 now
            shared = read_shared_inputs(cfg, net)
        store = Checkpoint(out, identity(cfg, net))
        done = store.open(resume)
        kept = len(done)
        try:
            if net is None:
                net = load_or_derive(cfg, store.folder)
                outcome.check_network(net, cfg)
                shared = read_shared_inputs(cfg, net)
            run = compute(cfg, net, shared, store, done, progress)
            kept = len(run.headers)
            # regional curves (issue 12): over every reach's row, before the file is assembled
            from reachgauge.regional.run import regional_curves
            run.regional = regional_curves([h["reach_row"] for h in run.headers], shared.curves)
            t1 = time.perf_counter()
            targets.write(run, cfg, store)
            run.timings["write"] = time.perf_counter() - t1
        except BaseException as exc:
            kept = len(store.headers()) if store.folder.exists() else 0
            if kept == 0 or (isinstance(exc, InputError) and not isinstance(exc, OutputError)):
                store.remove()        # nothing to resume, or inputs that must change first
            else:
                store.close(stopped=True)
                total = len(net.reaches) if net is not None else "the"
                lifecycle.STATE.resumable = (f"{kept} of {total} reaches are kept in "
                                             f"{store.folder}: add --resume to the same command "
                                             "to continue")
                if isinstance(exc, OutputError):
                    raise OutputError(exc.problem, f"{exc.fix}; {lifecycle.STATE.resumable}"
                                      ) from None
            raise
        store.remove()
    run.timings["wall"] = time.perf_counter() - t0
    run.elapsed = run.timings["wall"]
    return summarise(run, Path(out), None if report is None else Path(report))
