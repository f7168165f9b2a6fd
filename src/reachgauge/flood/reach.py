"""Footprints of every design flow on one reach: the rows of the ``footprints``
layer and, on request, a depth GeoTIFF per flow.

:func:`reach_footprints` runs in the reach's task after the hydraulics
(:func:`reachgauge.batch.task.process_reach`): it reads one more window of the
terrain, the corridor around the reach (``max(half-width, limit / 2)`` either
side of the centreline), and maps each flow with the stages the design checks
found, transects whose water ran over their ends widened first
(:mod:`reachgauge.flood.extend`). Everything is SI and in the work CRS.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from reachgauge.flood import corridor as C
from reachgauge.flood import extend, footprint as FP

# the width limit when none is given: this many times the transects' own length
DEFAULT_WIDTH_FACTOR = 4.0


@dataclass(frozen=True)
class FootprintParams:
    """``max_width`` m: the widest a transect is widened to and the width of the
    mapped corridor (None: :data:`DEFAULT_WIDTH_FACTOR` × the transect length);
    ``depth_dir``: folder of the depth GeoTIFFs (None: none written); ``units``:
    of the depth grids' values."""

    max_width: float | None = None
    depth_dir: str | None = None
    units: str = "si"

    @classmethod
    def from_config(cls, cfg) -> "FootprintParams | None":
        """None when ``cfg.footprints`` is off. Lengths of the config are SI here."""
        d = getattr(cfg, "depth_grids", None)
        if not (getattr(cfg, "footprints", False) or d is not None):
            return None
        return cls(getattr(cfg, "footprint_max_width", None), None if d is None else str(d),
                   cfg.units)


@dataclass
class Footprints:
    """One reach's footprints: ``rows`` (one per flow, SI; fields as in
    :data:`reachgauge.results.schema.FOOTPRINT_FIELDS`), ``geometry`` (a
    MultiPolygon or None per row, work CRS) and the depth grids written."""

    rows: pd.DataFrame
    geometry: list
    grids: list = field(default_factory=list)


def flow_stages(design: pd.DataFrame, t: int) -> dict:
    """{flow: (discharge, stage (t,), over_profile (t,), at_jump (t,))} from a
    reach's design-check rows (the per-transect rows; NaN where a transect has none)."""
    rows = design[design["station"].to_numpy(int) >= 0]
    out = {}
    for name, g in rows.groupby("flow", sort=False):
        i = g["station"].to_numpy(int)
        stage, over, jump = np.full(t, np.nan), np.zeros(t, bool), np.zeros(t, bool)
        stage[i] = g["stage"].to_numpy(float)
        over[i] = g["over_profile"].to_numpy(bool)
        jump[i] = g["stage_at_jump"].to_numpy(bool)
        out[name] = (float(g["discharge"].iloc[0]), stage, over, jump)
    return out


def _caution(fm: FP.FlowMap, widened, cut, jump, has_bankfull, limit) -> str:
    notes = []
    if not fm.wet.any():
        notes.append("no wet cell connected to the channel")
    if fm.cut_length > 0:
        notes.append(f"reaches the width limit ({limit:g} m) on the {fm.cut_sides}: the water "
                     "goes further; raise the footprint width limit")
    if cut:
        notes.append(f"{cut} transect(s) still over their ends when widened: their stages are "
                     "upper bounds")
    elif widened:
        notes.append(f"{widened} transect(s) widened to carry the flow")
    if jump:
        notes.append(f"{jump} transect(s) with the stage at a bank-top jump")
    if not has_bankfull:
        notes.append("no bankfull stage published: out-of-bank area unknown")
    return "; ".join(notes)


def _bank_offsets(rs, result):
    """Left and right bank offsets (t,) m from the digitised centreline, + to the
    right looking downstream; NaN where no bankfull stage is published."""
    tr = result.transects
    pub = np.isfinite(tr["bank_left"].to_numpy(float))
    hw = 0.5 * float(np.asarray(rs.offsets)[-1])
    # result.banks: offsets from the sampling frame's left end, the thalweg at hw
    u = np.asarray(result.banks, float) - hw + np.asarray(rs.thalweg_shift, float)[:, None]
    return np.where(pub, u[:, 0], np.nan), np.where(pub, u[:, 1], np.nan)


def _widened_stages(ds, raster, flows, ok, secs, limit, hw) -> dict:
    """{flow: (discharge, stage (t,), cut (t,), at_jump (t,), widened rows)}: the
    design stages, those of transects over their ends solved again on the transects
    widened to ``limit`` m (:func:`reachgauge.flood.extend.widen`)."""
    out = {}
    for name, (q, stage, over, jump) in flows.items():
        stage, cut = stage.copy(), over.copy()
        widened = np.nonzero(over & ok)[0]
        if widened.size and limit > 2 * hw:
            w = extend.widen(ds, raster.z_factor, widened, np.full(widened.size, q), secs, limit)
            stage[widened], cut[widened] = w.stage, w.cut
        out[name] = (q, stage, cut, jump, widened)
    return out


def reach_footprints(ds, raster, rs, result, neighbours, params: FootprintParams) -> Footprints:
    """Footprints of every design flow of one reach (see the module docstring):
    ``ds`` the open terrain, ``raster`` its :class:`~reachgauge.inputs.raster.RasterInfo`,
    ``rs`` the reach's sections, ``result`` its hydraulics, ``neighbours`` the
    lines of the other reaches near it (work CRS, or None)."""
    from reachgauge.inputs import sampler

    rid = str(rs.reach.reach_id)
    t = len(rs.chainage)
    flows = flow_stages(result.design, t)
    if not flows:
        return Footprints(pd.DataFrame(), [])
    hw = 0.5 * float(np.asarray(rs.offsets)[-1])
    limit = float(params.max_width or DEFAULT_WIDTH_FACTOR * 2 * hw)
    half = max(hw, 0.5 * limit)
    line = rs.reach.geometry
    z, transform = sampler.read_window(ds, raster.z_factor, C.window_points(line, half,
                                                                             raster.xy_factor))
    if z is None:
        return Footprints(pd.DataFrame(), [])
    ok = np.asarray(rs.transect_status, dtype=object) == "ok"
    secs = extend.Sections.of(rs, result)
    stages = _widened_stages(ds, raster, flows, ok, secs, limit, hw)
    top = np.nanmax([np.nanmax(np.r_[s, -np.inf]) for _q, s, _c, _j, _w in stages.values()])
    # only ground below the highest water surface can be wet
    cor = C.corridor(line, neighbours, transform, z.shape, half, raster.xy_factor, ds.transform,
                     candidates=np.isfinite(z) & (z < top))
    seeds = FP.seed_cells(transform, z.shape, np.asarray(rs.thalweg_xy)[ok])
    along = cor.valley_position(rs.centre_xy)   # the stations, along the valley line
    channel = FP.channel_cells(cor, rs.chainage, *_bank_offsets(rs, result))
    rows, geoms, grids = [], [], []
    chain = np.asarray(rs.chainage, float)
    for name, (q, stage, cut, jump, widened) in stages.items():
        fm = FP.map_flow(z, cor, seeds, along, stage, channel)
        # where the footprint is cut: its edge at the limit, and the transects still over
        at = np.r_[fm.cut_from, fm.cut_to, chain[widened][cut[widened]]]
        at = at[np.isfinite(at)]
        rows.append({
            "reach_id": rid, "flow": name, "discharge": q, "wet_area": fm.wet_area,
            "out_of_bank_area": fm.out_of_bank_area, "mean_depth": fm.mean_depth,
            "max_depth": fm.max_depth, "width_limit": limit,
            "transects_widened": int(widened.size), "transects_cut": int(cut[widened].sum()),
            "cut_by_limit": bool(fm.cut_length > 0 or cut[widened].any()),
            "cut_from": at.min() if at.size else np.nan, "cut_to": at.max() if at.size else np.nan,
            "cut_length": fm.cut_length,
            "caution": _caution(fm, widened.size, int(cut[widened].sum()), int(jump[ok].sum()),
                                channel is not None, limit)})
        geoms.append(FP.polygons(fm.wet, transform))
        if params.depth_dir is not None and fm.wet.any():
            from reachgauge.flood.grids import write_depth

            grids.append(write_depth(params.depth_dir, rid, name, fm.depth, transform,
                                     ds.crs, params.units))
    return Footprints(pd.DataFrame(rows), geoms, grids)
