"""The run-wide inputs read once at the start (design flows, observations,
Cowan terms, the land-cover class table), all SI, and each reach's share of
them for its task."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from reachgauge.config import RunConfig
from reachgauge.errors import InputError
from reachgauge.hydraulics import reach as hydraulics, roughness
from reachgauge.inputs import checks as input_checks, raster as raster_mod, tables
from reachgauge.manning import FOOT


@dataclass
class SharedInputs:
    """Run-wide inputs read once at the start (all SI)."""

    flows: dict = field(default_factory=dict)            # reach_id -> {flow: m³/s}
    observations: pd.DataFrame | None = None
    cowan: dict | None = None
    class_table: dict | None = None
    drainage: object = None     # the run's reachgauge.drainage.DrainageSource
    curves: pd.DataFrame | None = None                  # published regional curves, SI
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
                                      cowan=cowan, class_table=self.class_table,
                                      drainage_source=self.drainage)


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
    if cfg.regional_curves:
        from reachgauge.regional.published import read_curves

        shared.curves = read_curves(cfg.regional_curves)
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


