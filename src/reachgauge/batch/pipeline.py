"""The batch from inputs to files: read the run-wide inputs, run every reach
(:mod:`reachgauge.batch.dispatch`, each one a :mod:`reachgauge.batch.task`),
summarise, and write the results."""

from __future__ import annotations

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
    network: object
    outputs: list
    elapsed: float
    warnings: list


def compute(cfg: RunConfig, progress=None) -> RunResult:
    """Load the network, run every reach, and return the outputs (SI, work CRS).

    ``progress(output, done, total)`` is called after each reach.
    """
    t0 = time.perf_counter()
    net = network_mod.load_network(cfg)
    outcome.check_network(net, cfg)      # every reach unusable for one cause: exit 2 now
    shared = read_shared_inputs(cfg, net)
    outputs = []
    total = len(net.reaches)
    for out in dispatch.iterate(cfg, net, shared):
        outputs.append(out)
        if progress:
            progress(out, len(outputs), total)
    order = {str(r.reach_id): i for i, r in enumerate(net.reaches)}
    outputs.sort(key=lambda o: order.get(o.reach_id, 0))
    outcome.check_outputs(outputs, net, cfg)   # no figures anywhere, for input causes: exit 2
    return RunResult(net, outputs, time.perf_counter() - t0, list(net.warnings))


@dataclass
class RunSummary:
    """What the end-of-run summary prints."""

    reaches: int
    reaches_ok: int
    transects: int
    transects_ok: int
    flagged: int
    out_of_bank_transects: int
    flag_counts: dict
    statuses: dict
    out_of_bank: list
    failed: list
    out: Path | None
    report: Path | None
    elapsed: float
    warnings: list
    trusted: int = 0                                     # transects with a trusted pick
    withheld: dict = field(default_factory=dict)         # "do not use" flag -> transects

    def lines(self) -> list[str]:
        out = [f"reaches:    {self.reaches_ok} of {self.reaches} processed"
               + (f" ({', '.join(f'{v} {k}' for k, v in self.statuses.items())})"
                  if self.statuses else ""),
               f"transects:  {self.transects_ok} of {self.transects} with figures, "
               f"{self.trusted} with a trusted bankfull pick, "
               f"{self.flagged} flagged for a look, {self.out_of_bank_transects} where a design "
               "flow leaves the channel"]
        if self.flag_counts:
            top = sorted(self.flag_counts.items(), key=lambda kv: -kv[1])[:6]
            out.append("flags:      " + ", ".join(f"{k} {v}" for k, v in top))
        if self.withheld:
            out.append("no bankfull figure (do not use): " + ", ".join(
                f"{k} {v}" for k, v in sorted(self.withheld.items(), key=lambda kv: -kv[1])))
        if self.out_of_bank:
            out.append("out of bank: " + "; ".join(self.out_of_bank))
        if self.failed:
            out.append("internal errors on: " + ", ".join(self.failed)
                       + " (please report; run with --verbose for details)")
        for w in self.warnings:
            out.append(f"warning:    {w}")
        if self.out:
            out.append(f"result:     {self.out}")
        if self.report:
            out.append(f"report:     {self.report}")
        out.append(f"time:       {self.elapsed:.1f} s")
        return out


def summarise(run: RunResult, out=None, report=None) -> RunSummary:
    from collections import Counter

    from reachgauge.flags import has_quality_flag, severity
    from reachgauge.hydraulics.bankfull import TRUSTED_CONFIDENCE

    statuses = Counter(o.reach_row.get("status", "") for o in run.outputs)
    flag_counts: Counter = Counter()
    transects = transects_ok = flagged = oob_t = trusted = 0
    oob = []
    for o in run.outputs:
        if o.result is None:
            transects += int(o.reach_row.get("transects", 0) or 0)
            continue
        tr = o.result.transects
        transects += len(tr)
        transects_ok += int((tr["status"] == "ok").sum())
        trusted += int(tr["confidence"].isin(TRUSTED_CONFIDENCE).sum())
        flagged += int(sum(has_quality_flag(f) for f in tr["flags"]))
        oob_t += int((tr["flows_out"] != "").sum())
        for f in tr["flags"]:
            flag_counts.update(x for x in f.split(";") if x)
        if o.reach_row.get("flows_out"):
            oob.append(f"{o.reach_id} ({o.reach_row['flows_out'].replace(';', ', ')})")
    ok = statuses.pop("ok", 0)
    withheld = {k: v for k, v in flag_counts.items() if severity(k) == "do not use"}
    return RunSummary(len(run.outputs), ok, transects, transects_ok, flagged, oob_t, dict(flag_counts),
                      dict(statuses), oob, [o.reach_id for o in run.outputs if o.error],
                      out, report, run.elapsed, run.warnings, trusted, withheld)


def run_to_file(cfg: RunConfig, out, *, overwrite: bool = False, csv_dir=None, report=None,
                colour_by: str = "discharge", progress=None) -> RunSummary:
    """The whole batch: compute every reach, write the GeoPackage (atomically),
    optionally CSV copies of the tables and the HTML report."""
    from reachgauge.results.staging import RunOutputs

    # every target checked before the work; all written together after it
    with RunOutputs(out, csv_dir=csv_dir, report=report, overwrite=overwrite,
                    colour_by=colour_by) as targets:
        run = compute(cfg, progress)
        targets.write(run, cfg)
    return summarise(run, Path(out), None if report is None else Path(report))
