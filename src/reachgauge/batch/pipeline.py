"""The batch from inputs to files: read the run-wide inputs, run every reach
(:mod:`reachgauge.batch.dispatch`, each one a :mod:`reachgauge.batch.task`),
summarise, and write the results."""

from __future__ import annotations

import dataclasses
import time
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from reachgauge.transects import cutting
from reachgauge.hydraulics import reach as hydraulics, roughness
from reachgauge.batch import dispatch, outcome
from reachgauge.inputs import checks as input_checks, network as network_mod, raster as raster_mod
from reachgauge.inputs import tables
from reachgauge.config import RunConfig
from reachgauge.errors import InputError
from reachgauge.manning import FOOT


@dataclass
class SharedInputs:
    """Run-wide inputs read once at the start (all SI)."""

    flows: dict = field(default_factory=dict)            # reach_id -> {flow: m³/s}
    observations: pd.DataFrame | None = None
    cowan: dict | None = None
    class_table: dict | None = None
    _obs_groups: tuple | None = field(default=None, init=False, repr=False, compare=False)

    def for_reach(self, reach) -> hydraulics.ReachInputs:
        """This reach's rows of the run-wide tables and nothing more, so that a
        task's payload does not grow with the run: its design flows, its
        observations (an empty table when it has none), its Cowan terms (None
        when it has none). The land-cover class table is small and whole."""
        rid = str(reach.reach_id)
        obs = None
        if self.observations is not None:
            # grouped once per table: a filter per reach costs reaches × rows
            if self._obs_groups is None or self._obs_groups[0] is not self.observations:
                frame = self.observations
                groups = {str(k): g.reset_index(drop=True)
                          for k, g in frame.groupby("reach_id", sort=False)}
                self._obs_groups = (frame, groups, frame.iloc[0:0].reset_index(drop=True))
            obs = self._obs_groups[1].get(rid, self._obs_groups[2])
        cowan = {rid: self.cowan[rid]} if self.cowan and rid in self.cowan else None
        return hydraulics.ReachInputs(flows=dict(self.flows.get(rid, {})), observations=obs,
                                      cowan=cowan, class_table=self.class_table)


def read_shared_inputs(cfg: RunConfig, net) -> SharedInputs:
    """Read the CSV inputs and the design-flow fields of the streams."""
    shared = SharedInputs()
    if cfg.design_flows:
        shared.flows = tables.read_design_flows(cfg.design_flows, cfg.units)
    for fld in cfg.design_flow_fields:
        for r in net.reaches:
            if fld not in r.attributes:
                raise InputError(f"design-flow field {fld!r} is not a field of the streams",
                                 f"fields are: {', '.join(map(str, r.attributes)) or 'none'}")
            try:
                v = float(r.attributes[fld])
            except (TypeError, ValueError):
                continue
            if np.isfinite(v) and v >= 0:
                v = v * FOOT ** 3 if cfg.units == "us" else v
                shared.flows.setdefault(str(r.reach_id), {})[fld] = v
    if cfg.observations:
        shared.observations = tables.read_observations(cfg.observations, cfg.units)
        input_checks.check_observations(shared.observations, net, cfg)
    if cfg.cowan:
        shared.cowan = tables.read_cowan(cfg.cowan)
    if cfg.landcover_table:
        shared.class_table = tables.read_class_table(cfg.landcover_table)
        for cls, n in shared.class_table.items():
            roughness.warn_all(roughness.check_n_range(
                n, force=cfg.force_n, where=f"n of land-cover class {cls}"))
    if cfg.landcover:
        raster_mod.check_raster(cfg.landcover, "land-cover raster")
    if cfg.n_overbank is None and not cfg.landcover:
        roughness.warn_all([f"no overbank n given: the flood plains take n = "
                            f"{roughness.FLOODPLAIN_N:g} (the median normal value of the flood-plain "
                            "rows of Chow 1959, Table 5-6), not the channel's; set --n-overbank or "
                            "give --landcover for the plains you have"])
    for rid, t in (shared.cowan or {}).items():
        n = roughness.cowan_n(t["base"], t["irregularity"], t["variation"], t["obstruction"],
                              t["vegetation"], t["meander"])
        roughness.warn_all(roughness.check_n_range(n, force=cfg.force_n,
                                                   where=f"Cowan n of reach {rid}"))
    fields = set().union(*(r.attributes for r in net.reaches)) if net.reaches else set()
    for option, fld in (("n-field", cfg.n_field), ("drainage-area-field", cfg.drainage_area_field)):
        if fld and fld not in fields:
            raise InputError(f"{option} {fld!r} is not a field of the streams",
                             f"fields are: {', '.join(sorted(map(str, fields))) or 'none'}")
    known = {str(r.reach_id) for r in net.reaches}
    for what, ids in (("design flows", shared.flows),
                      ("observations", [] if shared.observations is None
                       else shared.observations["reach_id"].unique()),
                      ("Cowan terms", shared.cowan or {})):
        unknown = sorted(set(map(str, ids)) - known)
        if unknown:
            raise InputError(f"{what} name reach id(s) {', '.join(unknown[:5])} that are not in the "
                             "streams", f"reach ids are: {', '.join(sorted(known)[:10])}")
    return shared


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
    from reachgauge.batch.keep import Keeper

    t0 = time.perf_counter()
    if net is None:
        net = network_mod.load_network(cfg)
        outcome.check_network(net, cfg)      # every reach unusable for one cause: exit 2 now
    shared = shared if shared is not None else read_shared_inputs(cfg, net)
    sink = sink if sink is not None else KeptInMemory()
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
    for kept in dispatch.iterate(cfg, net, shared, reaches=todo, note=notes.append,
                                 finish=keeper, finish_remote=Keeper(*dataclasses.astuple(keeper)[:3])):
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


def identity(cfg: RunConfig, net) -> dict:
    """What a checkpoint must match to be resumed: the version, the settings that
    decide the result, the inputs' fingerprints and the reaches."""
    import hashlib

    from reachgauge import __version__
    from reachgauge.results import run_info

    ids = "\n".join(str(r.reach_id) for r in net.reaches).encode()
    return {"version": __version__, "settings": run_info.settings(cfg),
            "inputs": run_info.inputs(cfg),
            "reaches": [len(net.reaches), hashlib.sha256(ids).hexdigest()]}


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
    from reachgauge.errors import OutputError
    from reachgauge.results.staging import RunOutputs

    t0 = time.perf_counter()
    # every target checked before the work; all written together after it
    with RunOutputs(out, csv_dir=csv_dir, report=report, overwrite=overwrite,
                    colour_by=colour_by) as targets:
        net = network_mod.load_network(cfg)
        outcome.check_network(net, cfg)      # every reach unusable for one cause: exit 2 now
        shared = read_shared_inputs(cfg, net)
        store = Checkpoint(out, identity(cfg, net))
        done = store.open(resume)
        kept = len(done)
        try:
            run = compute(cfg, net, shared, store, done, progress)
            kept = len(run.headers)
            t1 = time.perf_counter()
            targets.write(run, cfg, store)
            run.timings["write"] = time.perf_counter() - t1
        except BaseException as exc:
            kept = len(store.headers()) if store.folder.exists() else 0
            if kept == 0 or (isinstance(exc, InputError) and not isinstance(exc, OutputError)):
                store.remove()        # nothing to resume, or inputs that must change first
            else:
                store.close()
                lifecycle.STATE.resumable = (f"{kept} of {len(net.reaches)} reaches are kept in "
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
