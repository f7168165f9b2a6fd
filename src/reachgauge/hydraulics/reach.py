"""The hydraulics step of one reach: bankfull, roughness, calibration, bankfull
figures, rating curves, user stages and design flows, for all its transects at once.

:func:`analyse_reach` takes the sections cut from the terrain
(:class:`~reachgauge.transects.cutting.ReachSections`), the reach's share of the
run's tables (:class:`ReachInputs`) and the parameters of each step
(:class:`ReachParams`), and returns plain tables (:class:`ReachResult`, SI). Each
step is one function below over the arrays of the reach; the geometry of every step
comes from the section kernel (:mod:`reachgauge.kernel.sections`).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from reachgauge import flags
from reachgauge.drainage import areas as drainage_areas
from reachgauge.hydraulics import (bankfull, calibration, capacity, rating, roughness, trust,
                                   uncertainty)
from reachgauge.hydraulics.bankfull.banks import sampling_blur
from reachgauge.hydraulics.figures import section_figures
from reachgauge.kernel import sections as K
from reachgauge.results import schema


@dataclass(frozen=True)
class ReachParams:
    """Parameters of the hydraulics steps (SI)."""

    bankfull: bankfull.BankfullParams = field(default_factory=bankfull.BankfullParams)
    roughness: roughness.RoughnessParams = field(default_factory=roughness.RoughnessParams)
    rating: rating.RatingParams = field(default_factory=rating.RatingParams)
    min_slope: float = 1e-4
    calibrate: bool = False
    drainage_area_field: str | None = None

    drainage_area_km2_per_unit: float = 1.0   # the field's unit in km² (mi²: 2.59)
    uncertainty: uncertainty.UncertaintyParams = field(
        default_factory=uncertainty.UncertaintyParams)

    @classmethod
    def from_config(cls, cfg) -> "ReachParams":
        """The parameters a :class:`reachgauge.config.RunConfig` sets. A regional
        curve and a drainage-area field are in the run's units (ft and mi² with
        ``units="us"``) and are converted here to m and km²."""
        coef, area_unit = cfg.regional_coef, 1.0
        if cfg.units == "us":
            area_unit = bankfull.SQ_MILE_KM2
            if coef is not None and cfg.regional_exp is not None:
                coef = bankfull.regional_coef_to_si(coef, cfg.regional_exp)
        return cls(
            bankfull=bankfull.BankfullParams(cfg.bankfull_method, cfg.bankfull_depth,
                                             coef, cfg.regional_exp, cfg.baseflow_depth),
            roughness=roughness.RoughnessParams(cfg.n, cfg.n_overbank, cfg.n_field),
            rating=rating.RatingParams(cfg.rating_step, cfg.rating_max_depth,
                                       tuple(cfg.depths), tuple(cfg.elevations)),
            min_slope=cfg.min_slope, calibrate=cfg.calibrate,
            drainage_area_field=cfg.drainage_area_field, drainage_area_km2_per_unit=area_unit,
            uncertainty=uncertainty.UncertaintyParams.from_config(cfg))


@dataclass
class ReachInputs:
    """What a reach needs besides its sections (all SI).

    ``flows``: design flows {name: m³/s}; ``observations``: this reach's rows of
    :func:`reachgauge.inputs.tables.read_observations`; ``cowan``: Cowan terms by
    reach; ``classes``: (t, n) land-cover classes sampled on the transects;
    ``class_table``: class → n; ``drainage_source``: where drainage area is read
    (:class:`reachgauge.drainage.DrainageSource`); ``drainage``: the areas read at
    the transects (:class:`reachgauge.drainage.AtTransects`).
    """

    flows: dict = field(default_factory=dict)
    observations: pd.DataFrame | None = None
    cowan: dict | None = None
    classes: np.ndarray | None = None
    class_table: dict | None = None
    drainage_source: object = None    # the run's DrainageSource (reachgauge.drainage)
    drainage: object = None           # its AtTransects for this reach's transects


@dataclass
class ReachResult:
    """Plain tables for one reach (SI); fields as in :mod:`reachgauge.results.schema`."""

    reach: dict
    transects: pd.DataFrame
    rating: pd.DataFrame
    stages: pd.DataFrame
    design: pd.DataFrame
    calibration: pd.DataFrame
    profile: pd.DataFrame
    banks: np.ndarray = None          # (t, 2) bank offsets, for plots
    sections_z: np.ndarray = None     # (t, m) elevations used (after any baseflow correction), NaN-padded
    offsets: np.ndarray = None        # (t, m) offsets of sections_z, NaN-padded


def _bankfull_figures(p, picks, slope, n, ok):
    """Figures at the bankfull stage of the channel those banks bound: top width,
    area, wetted perimeter and discharge of the water between vertical lines at the
    bank offsets, which carry no wetted perimeter (divided-channel method, Chow 1959,
    §6-9; Manning, Chow 1959, Eq. 5-6). An automatic pick's banks are the bank tops
    (:mod:`reachgauge.hydraulics.bankfull.banks`), where the faces meet the stage: an
    automatic pick sits where the water has begun to spread over the rounded bank tops,
    and the whole water surface would count that strip of floodplain as channel. The
    discharges of the strips beyond the banks are beside (``q_overbank_*``), and
    ``discharge_total`` is the whole section's. m, m², m³/s."""
    st = np.where(ok, picks.stage, p.thalweg)
    banks = np.column_stack([picks.left_bank, picks.right_bank])
    fl = K.flow(p, st, slope, n, banks)
    a, per, w = fl.parts.area[1, :, 0], fl.parts.wetted_perimeter[1, :, 0], fl.parts.top_width[1, :, 0]
    q = fl.part_discharge[:, :, 0]
    fig = section_figures(a, per, w, q[1], slope)
    cols = {"bankfull_stage": picks.stage, "bankfull_depth": picks.stage - p.thalweg,
            "flow_area": a, "perimeter": per, "top_width": w, "hyd_radius": fig["hyd_radius"],
            "hyd_depth": fig["hyd_depth"], "width_depth": K.safe_ratio(w, fig["hyd_depth"]),
            "velocity": fig["velocity"], "discharge": q[1], "froude": fig["froude"],
            "shear": fig["shear"], "stream_power": fig["stream_power"],
            "q_overbank_left": q[0], "q_overbank_right": q[2], "discharge_total": q.sum(axis=0)}
    return {k: np.where(ok, v, np.nan) for k, v in cols.items()}


def _calibrate(p, rs, obs, slope, n, banks, ok, rid):
    """Back-calculated channel n at each observation; returns the calibration table,
    the n observed at each transect (NaN elsewhere) and the reach median."""
    t = p.count
    n_obs = np.full(t, np.nan)
    if obs is None or not len(obs) or not ok.any():
        return pd.DataFrame(columns=list(schema.CALIBRATION_FIELDS)), n_obs, np.nan
    idx = calibration.match_transects(obs, np.asarray(rs.chainage, float), rs.transects)
    idx = np.where((idx >= 0) & ok[np.clip(idx, 0, t - 1)], idx, -1)
    th = p.thalweg[np.clip(idx, 0, t - 1)]
    stage_obs = np.where(obs["stage"].notna(), obs["stage"], th + obs["depth"].to_numpy(float))
    n_back = calibration.back_calculate(p, idx, stage_obs, obs["discharge"].to_numpy(float),
                                        slope, n[:, [0, 2]], banks)
    chain = np.asarray(rs.chainage, float)
    cal = pd.DataFrame({
        "reach_id": rid, "station": idx,
        "chainage": np.where(idx >= 0, chain[np.clip(idx, 0, t - 1)], np.nan),
        "stage": stage_obs, "depth": stage_obs - th, "discharge": obs["discharge"].to_numpy(float),
        "n_back": n_back,
        "table_rows": [";".join(k for k, _t, _v in roughness.table_matches(v, kind="channel"))
                       if np.isfinite(v) else "" for v in n_back],
    })
    good = (idx >= 0) & np.isfinite(n_back)
    n_obs[idx[good]] = n_back[good]
    return cal, n_obs, (float(np.nanmedian(n_back)) if good.any() else np.nan)


def _design(p, rid, chainage, flows, slope, n, banks, bf, ok, use):
    """Design-flow rows per transect and per reach, and the per-transect results.
    ``use``: the transects whose bankfull discharge the reach's median takes."""
    # a design flow is compared with what fills the section to the bankfull stage
    checks = capacity.check_flows(p, flows, slope, n, banks, bf["bankfull_stage"],
                                  bf["discharge_total"])
    checks = checks[ok[checks["index"].to_numpy(int)]] if len(checks) else checks
    design = checks.rename(columns={"index": "station"})
    design.insert(0, "reach_id", rid)
    design["chainage"] = np.asarray(chainage, float)[design["station"].to_numpy(int)]
    q_med = _nanmedian(bf["discharge_total"][use])
    reach_flows = capacity.summarise_flows(checks, q_med, ok)
    if len(reach_flows):
        rf = reach_flows.copy()
        rf["reach_id"], rf["station"], rf["chainage"] = rid, -1, np.nan
        design = pd.concat([design, rf], ignore_index=True)
    return design, checks, reach_flows


def analyse_reach(rs, params: ReachParams, inputs: ReachInputs | None = None) -> ReachResult:
    """Bankfull stage, hydraulics, rating curves, design-flow checks and calibration
    for one reach's sections. Everything is SI. Transects that are not ``ok`` keep
    their row with empty figures."""
    inputs = inputs or ReachInputs()
    reach = rs.reach
    rid = str(reach.reach_id)
    t = len(rs.chainage)
    slope = np.asarray(rs.slope, dtype=float)
    slope = np.where(np.isfinite(slope) & (slope > 0), slope, params.min_slope)

    area_km2, (da_cols, da_lower), da_reach = drainage_areas.reach_fields(
        params, rid, reach.attributes, inputs.drainage, t)
    ok = np.asarray(rs.transect_status, dtype=object) == "ok"
    z = np.where(ok[:, None], np.asarray(rs.elevations, dtype=float), np.nan)
    # the sections are sampled from the raster: the bank tops are corrected for that blur
    # depths from the bed level the cutting step measured (kernel.bed), the profile's z_raw
    bed_z = np.asarray(getattr(rs, "thalweg_z", np.full(t, np.nan)), dtype=float)
    picks = bankfull.pick_all(K.profiles(rs.offsets, z, _channel_thalweg(rs, z), bed_z),
                              params.bankfull,
                              area_km2, blur=sampling_blur(getattr(rs, "sample_step", np.nan)))
    p = picks.profiles
    ok &= p.valid
    tru, banks = _assess(rs, picks, ok, t)
    pub = tru.published

    n, n_src, unknown, unusual, cal, n_obs, n_cal = _roughness(rs, p, params, inputs, slope,
                                                               banks, ok)

    bf = _bankfull_figures(p, picks, slope, n, pub)
    tru = tru.with_froude(bf["froude"])
    status, message = _verdict(rs, picks, tru, t)
    # the reach's bankfull figures: medians over the trusted picks, none when too few
    use = tru.trusted & (status == "ok")
    summary = bankfull.summarise_reach(picks.depth[use], picks.stage[use])
    outlier = np.zeros(t, bool)
    outlier[np.nonzero(use)[0]] = summary.outliers
    depths = rating.rating_depths(params.rating, summary.median_depth)
    curves = rating.rating_table(p, rid, rs.chainage, depths, slope, n, banks, ok)
    stages = rating.stage_table(p, rid, rs.chainage, params.rating, slope, n, banks, ok)
    design, checks, reach_flows = _design(p, rid, rs.chainage, inputs.flows, slope, n, banks,
                                          bf, ok, use)
    out_any, over_any, jump_any, flows_out = _flow_results(checks, t)
    columns = tru.columns() + [
        ("bankfull-outlier", outlier), ("n-unknown-class", unknown), ("n-unusual", unusual),
        ("out-of-bank", out_any), ("over-profile", over_any), ("stage-at-jump", jump_any),
        ("area-lower-bound", da_lower)]
    codes = flags.concat(np.asarray(rs.transect_flags, dtype=object).reshape(t), picks.codes)
    start = _line_start(rs, t)
    tr = pd.DataFrame({
        "reach_id": rid, "station": np.arange(t), "chainage": np.asarray(rs.chainage, float),
        "status": np.asarray(rs.transect_status, dtype=object), "flags": "",
        "thalweg_z": _thalweg_z(rs, p, ok), "thalweg_shift": np.asarray(rs.thalweg_shift, float),
        "slope": slope, **da_cols,
        # the method that gave the published stage; "none" where none is published
        "bankfull_method": np.where(pub, picks.source, np.where(ok, "none", "")),
        "confidence": tru.confidence,
        "bank_left": np.where(pub, banks[:, 0] - start, np.nan),
        "bank_right": np.where(pub, banks[:, 1] - start, np.nan),
        "method_spread": _spread(picks.candidates),
        "n_channel": n[:, 1], "n_overbank_left": n[:, 0], "n_overbank_right": n[:, 2],
        "n_source": n_src, **bf, "n_observed": n_obs,
        "min_freeboard": capacity.least_freeboard(checks, t),
        "flows_out": flows_out,
    })
    tr["flags"] = flags.join_columns(columns, t, codes)
    tr = tr[[c for c in schema.TRANSECT_FIELDS if c in tr.columns]]
    reach_row = _reach_row(rs, tr, ok, use, summary, n, n_src, n_cal, outlier, reach_flows,
                           (status, message, int(tru.trusted.sum())))
    reach_row.update(da_reach)
    if params.uncertainty.draws > 0:   # Monte Carlo bands (hydraulics.uncertainty)
        unc = uncertainty.assess(params.uncertainty, rid, p, picks, banks, slope, n, n_src, ok,
                                 pub, use, depths, inputs.flows, rs.profile, inputs.cowan)
        uncertainty.merge(unc, tr, reach_row, curves, design)
    profile = rs.profile.copy()
    profile.insert(0, "reach_id", rid)
    inside = np.arange(p.x.shape[1])[None, :] < p.size[:, None]
    return ReachResult(reach=reach_row, transects=tr, rating=curves, stages=stages, design=design,
                       calibration=cal, profile=profile, banks=banks,
                       sections_z=np.where(inside, p.z, np.nan),
                       offsets=np.where(inside, p.x - start[:, None], np.nan))


def _roughness(rs, p, params: ReachParams, inputs: ReachInputs, slope, banks, ok):
    """Each transect's (left overbank, channel, right overbank) n and its source,
    calibrated against the reach's observations where asked; with the flags of
    unknown land-cover classes and of a channel n outside Chow's table range."""
    rid, t = str(rs.reach.reach_id), len(rs.chainage)
    n, n_src, unknown = roughness.transect_n(
        rid, rs.reach.attributes, t, params.roughness, cowan_terms=inputs.cowan,
        classes=inputs.classes, class_offsets=rs.offsets, class_table=inputs.class_table,
        banks=banks)
    cal, n_obs, n_cal = _calibrate(p, rs, inputs.observations, slope, n, banks, ok, rid)
    if params.calibrate and np.isfinite(n_cal):
        n[:, 1] = n_cal
        n_src = np.full(t, "calibrated", dtype=object)
    unusual = (n[:, 1] < roughness.TABLE_RANGE[0]) | (n[:, 1] > roughness.TABLE_RANGE[1])
    return n, n_src, unknown, unusual, cal, n_obs, n_cal


def _assess(rs, picks, ok, t):
    """The reach-scale tests of the picks (:func:`reachgauge.hydraulics.trust.assess`)
    and the bank offsets (t, 2) every later step uses: a published pick's, else the
    profile's ends (a withheld pick has no banks: its section is one channel)."""
    p = picks.profiles
    snap_far = flags.contains(np.asarray(rs.transect_flags, dtype=object).reshape(t), "snap-far")
    tru = trust.assess(picks, ok, rs.chainage, _thalweg_z(rs, p, ok), snap_far)
    banks = np.column_stack([picks.left_bank, picks.right_bank])
    banks = np.where(tru.published[:, None] & np.isfinite(banks), banks,
                     np.column_stack([p.first_offset, p.last_offset]))
    return tru, banks


def _verdict(rs, picks, tru, t):
    """The reach's status and message: cutting's own where it is not ok, else the
    verdict on the share of trusted picks (:func:`reachgauge.hydraulics.trust.verdict`)."""
    if rs.status != "ok":
        return rs.status, rs.message
    why = flags.concat(picks.codes, flags.join_columns(tru.columns(), t))
    status, message = trust.verdict(tru.trusted, rs.transect_status, why, t)
    return status, "; ".join(m for m in (rs.message, message) if m)


def _flow_results(checks, t: int):
    """Per transect: any design flow out of bank, any over the transect's ends, any
    whose stage sits at a jump, and the ';'-joined names of the flows out of bank."""
    idx = checks["index"].to_numpy(int)

    def any_of(column):
        return np.bincount(idx[checks[column].to_numpy(bool)], minlength=t) > 0

    out_any, over_any, jump_any = (any_of(c) for c in ("out_of_bank", "over_profile",
                                                        "stage_at_jump"))
    names = []
    for flow, grp in checks.groupby("flow", sort=False):   # a handful of flows
        mask = np.zeros(t, bool)
        mask[grp["index"].to_numpy(int)[grp["out_of_bank"].to_numpy(bool)]] = True
        names.append((str(flow), mask))
    return out_any, over_any, jump_any, flags.join_columns(names, t)


def _spread(cand):
    """Range (m) of the automatic methods' stages per transect; NaN where none found one."""
    found = np.isfinite(cand)
    hi = np.max(np.where(found, cand, -np.inf), axis=1)
    lo = np.min(np.where(found, cand, np.inf), axis=1)
    return np.where(found.any(axis=1), hi - lo, np.nan)


def _reach_row(rs, tr, ok, use, summary, n, n_src, n_cal, outlier, reach_flows,
               verdict) -> dict:
    """The reach's summary row; bankfull medians over ``use`` (the trusted picks);
    ``verdict``: (status, message, number of trusted picks)."""
    reach = rs.reach
    status, message, trusted = verdict
    q = tr["discharge"].to_numpy(float)[use]
    has_flows = len(reach_flows) > 0
    return {
        "reach_id": str(reach.reach_id), "name": reach.name or "", "status": status,
        "message": message, "orientation": reach.orientation, "reach_length": reach.length_m,
        "transects": len(tr), "transects_ok": int(ok.sum()),
        "transects_flagged": int(sum(flags.has_quality_flag(f) for f in tr["flags"])),
        "transects_trusted": trusted,
        "slope": rs.reach_slope, "slope_flags": getattr(rs, "slope_flags", ""),
        "bankfull_depth": summary.median_depth, "depth_spread": summary.iqr,
        "top_width": _nanmedian(tr["top_width"].to_numpy(float)[use]),
        "flow_area": _nanmedian(tr["flow_area"].to_numpy(float)[use]),
        "discharge": _nanmedian(q),
        "discharge_p25": float(np.nanpercentile(q, 25)) if q.size else np.nan,
        "discharge_p75": float(np.nanpercentile(q, 75)) if q.size else np.nan,
        "velocity": _nanmedian(tr["velocity"].to_numpy(float)[use]),
        "n_channel": float(np.median(n[ok, 1])) if ok.any() else float(n[0, 1]) if len(n) else np.nan,
        "n_source": n_src[0] if len(n_src) else "", "n_calibrated": n_cal,
        "confidence_low": int((tr["confidence"].to_numpy(object) == "low").sum()),
        "outliers": int(outlier.sum()),
        "flows_out": ";".join(reach_flows.loc[reach_flows.out_of_bank, "flow"]) if has_flows else "",
        "worst_ratio": float(reach_flows["q_ratio"].max()) if has_flows else np.nan,
    }


def _channel_thalweg(rs, z) -> np.ndarray:
    """Column of each transect's thalweg: the lowest sample within the thalweg search
    distance of the middle (where the transect was re-centred on the channel). A
    deeper ditch or pond further out is not this channel: the water of the section
    is the water connected to this point."""
    x = np.asarray(rs.offsets, dtype=float)
    snap = getattr(rs, "snap", np.nan)
    if x.size == 0:
        return np.zeros(len(z), dtype=int)
    near = np.abs(x - 0.5 * x[-1]) <= (snap if np.isfinite(snap) else np.inf) + 1e-9
    zz = np.where(near[None, :] & np.isfinite(z), z, np.inf)
    return np.argmin(zz, axis=1)


def _line_start(rs, t: int) -> np.ndarray:
    """Offset (m, in the sampling frame: 0 at the uncut left end) of the start of
    each written transect line: a transect cut back on the left starts later, and
    offsets in the results are measured along the line as written."""
    half = 0.5 * float(np.asarray(rs.offsets)[-1])
    return half - np.asarray(rs.reach_left, dtype=float).reshape(t)


def _thalweg_z(rs, p, ok):
    """Thalweg elevation of each transect: the section's where it has one, else the
    lowest sample of the transect (NaN where it has none)."""
    z = np.asarray(rs.elevations, dtype=float)
    has = np.isfinite(z).any(axis=1) if z.size else np.zeros(len(ok), bool)
    with np.errstate(invalid="ignore"):
        low = np.where(has, np.nanmin(np.where(np.isfinite(z), z, np.inf), axis=1), np.nan) \
            if z.size else np.full(len(ok), np.nan)
    return np.where(ok, p.thalweg, low)


def _nanmedian(v):
    v = np.asarray(v, dtype=float)
    return float(np.nanmedian(v)) if np.isfinite(v).any() else float("nan")
