"""Hydraulic figures of a section at one or many stages.

One function, :func:`figures`, turns a :class:`~reachgauge.section.CrossSection`,
an array of stages, a slope and Manning's n into a table of every figure the
tool reports. All stages are one vectorised computation.

Methods: Manning's equation (Chow 1959, Eq. 5-6); with bank offsets, the
divided-channel method (Chow 1959, §6-9) and velocity as Q / A; Froude number
on hydraulic depth; boundary shear gamma R S; unit stream power gamma Q S / w
(Bagnold 1966). See :mod:`reachgauge.manning`.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from reachgauge.hydraulics import calibration, capacity, roughness
from reachgauge import flags, manning
from reachgauge.results import schema
from reachgauge.kernel.profiles import ProfileSet
from reachgauge.kernel.crosssection import CrossSection, safe_ratio

def figures(section: CrossSection, stage, slope: float, n, units: str = "si") -> pd.DataFrame:
    """Every hydraulic figure at each stage, one row per stage.

    ``stage``: scalar or 1-D array of water-surface elevations (m or ft).
    ``n``: one Manning's n, or (left overbank, channel, right overbank) for a
    section with banks. Columns are those of
    :data:`reachgauge.schema.SECTION_FIELDS` (the batch's rating-curve fields
    plus hydraulic depth and stream power).
    """
    st = np.atleast_1d(np.asarray(stage, dtype=float))
    geo = section.geometry(st)
    q = section.discharge(st, slope, n, units)
    v = safe_ratio(q, geo.area)
    r = geo.hydraulic_radius
    return pd.DataFrame({
        "stage": st,
        "depth": geo.depth,
        "flow_area": geo.area,
        "perimeter": geo.wetted_perimeter,
        "top_width": geo.top_width,
        "hyd_radius": r,
        "hyd_depth": geo.hydraulic_depth,
        "velocity": v,
        "discharge": q,
        "froude": manning.froude(v, geo.hydraulic_depth, units),
        "shear": manning.shear_stress(r, slope, units),
        "stream_power": manning.unit_stream_power(q, slope, geo.top_width, units),
        "spills": geo.spills,
    })


# ====================================================== a whole reach at once



@dataclass
class ReachInputs:
    """What a reach needs besides its sections (all SI).

    ``flows``: design flows {name: m³/s}; ``observations``: this reach's rows of
    :func:`reachgauge.inputs.tables.read_observations`; ``cowan``: Cowan terms of all
    reaches; ``classes``: (t, n) land-cover classes sampled on the transects;
    ``class_table``: class → n.
    """

    flows: dict = field(default_factory=dict)
    observations: pd.DataFrame | None = None
    cowan: dict | None = None
    classes: np.ndarray | None = None
    class_table: dict | None = None


@dataclass
class ReachResult:
    """Plain tables for one reach (SI); fields as in :mod:`reachgauge.schema`."""

    reach: dict
    transects: pd.DataFrame
    rating: pd.DataFrame
    stages: pd.DataFrame
    design: pd.DataFrame
    calibration: pd.DataFrame
    profile: pd.DataFrame
    banks: np.ndarray = None          # (t, 2) bank offsets, for plots
    sections_z: np.ndarray = None     # (t, n) elevations used (after any baseflow correction)
    offsets: np.ndarray = None        # (n,) offsets of sections_z


def _pick_all(x, z, ok, cfg, drainage_area):
    """Bankfull pick on every valid transect (one call per transect, each
    vectorised over its trial stages), after the optional baseflow correction.

    Returns the picks, the offsets and the elevations to compute with. With a
    baseflow correction the common offset grid is refined four times (linear
    points on the ground line change nothing) so the corrected parabolic bed
    keeps its area on the shared grid.
    """
    from reachgauge.hydraulics import bankfull as _bankfull  # the bankfull step is not needed by figures

    picks = [None] * z.shape[0]
    if cfg.baseflow_depth > 0:
        fine = np.interp(np.arange(4 * (x.size - 1) + 1) / 4.0, np.arange(x.size), x)
        zz = np.full((z.shape[0], fine.size), np.nan)
    else:
        fine, zz = x, z.copy()
    for i in np.nonzero(ok)[0]:
        cs = CrossSection(x, z[i], drop_nan=True)
        if cfg.baseflow_depth > 0:
            cs = _bankfull.baseflow_correct(cs, depth=cfg.baseflow_depth)
            inside = (fine >= cs.offset[0]) & (fine <= cs.offset[-1])
            zz[i] = np.where(inside, np.interp(fine, cs.offset, cs.elevation), np.nan)
        picks[i] = _bankfull.pick_bankfull(
            cs, cfg.bankfull_method, fixed_depth=cfg.bankfull_depth,
            drainage_area_km2=drainage_area, regional_coef=cfg.regional_coef,
            regional_exp=cfg.regional_exp)
    return picks, fine, zz


def _drainage_area(cfg, attributes):
    if cfg.bankfull_method != "regional":
        return None
    v = attributes.get(cfg.drainage_area_field)
    try:
        v = float(v)
    except (TypeError, ValueError):
        v = float("nan")
    return v if np.isfinite(v) and v > 0 else None


def analyse_reach(rs, cfg, inputs: ReachInputs | None = None) -> ReachResult:
    """Bankfull stage, hydraulics, rating curves, design-flow checks and
    calibration for one reach's sections (the output of the transects step).

    ``rs`` is a :class:`reachgauge.cutting.ReachSections`; ``cfg`` a
    :class:`reachgauge.config.RunConfig`. Everything is SI. Transects that are
    not ``ok`` keep their row with empty figures.
    """
    inputs = inputs or ReachInputs()
    reach = rs.reach
    rid = str(reach.reach_id)
    t = len(rs.chainage)
    x = np.asarray(rs.offsets, dtype=float)
    status = np.asarray(rs.transect_status, dtype=object).copy()
    tflags = [list(filter(None, str(f).split(";"))) for f in rs.transect_flags]
    ok = status == "ok"
    slope = np.asarray(rs.slope, dtype=float)
    slope = np.where(np.isfinite(slope) & (slope > 0), slope, cfg.min_slope)

    # ---- bankfull
    area_km2 = _drainage_area(cfg, reach.attributes)
    if cfg.bankfull_method == "regional" and area_km2 is None:
        from reachgauge.errors import InputError
        raise InputError(f"reach {rid}: drainage-area field {cfg.drainage_area_field!r} has no "
                         "positive value", "fill the field, or pick another bankfull method")
    x0 = x  # the sampling grid (land-cover classes are on it)
    picks, x, z = _pick_all(x, np.asarray(rs.elevations, dtype=float), ok, cfg, area_km2)
    ps = ProfileSet(x, z)
    ok &= ps.valid
    for i in range(t):
        if picks[i] is not None:
            tflags[i].extend(picks[i].flags)
    bf_stage = np.array([p.stage if p else np.nan for p in picks])
    bf_depth = bf_stage - ps.thalweg
    banks = np.array([[p.left_bank, p.right_bank] if p else [x[0], x[-1]] for p in picks])
    banks = np.where(np.isfinite(banks), banks, np.array([x[0], x[-1]]))
    from reachgauge.hydraulics import bankfull as _bankfull

    summary = _bankfull.summarise_reach(np.where(ok, bf_depth, np.nan)[ok], bf_stage[ok])
    outlier = np.zeros(t, bool)
    outlier[np.nonzero(ok)[0]] = summary.outliers
    for i in np.nonzero(outlier)[0]:
        tflags[i].append("bankfull-outlier")
    spread = np.array([
        (np.nanmax(list(p.candidates.values())) - np.nanmin(list(p.candidates.values())))
        if p and np.isfinite(list(p.candidates.values())).any() else np.nan for p in picks])

    # ---- roughness
    n_ch, n_src = roughness.reach_channel_n(rid, reach.attributes, default=cfg.n,
                                            n_field=cfg.n_field, cowan_terms=inputs.cowan)
    n_parts = np.tile([cfg.n_overbank or n_ch, n_ch, cfg.n_overbank or n_ch], (t, 1)).astype(float)
    src = np.full(t, n_src, dtype=object)
    if inputs.classes is not None and inputs.class_table:
        lc, unknown = roughness.subsection_n_from_classes(inputs.classes, x0, banks,
                                                          inputs.class_table, n_ch)
        n_parts[:, 0], n_parts[:, 2] = lc[:, 0], lc[:, 2]
        if n_src == "default":  # land cover sets the channel n unless a reach value does
            n_parts[:, 1] = lc[:, 1]
        src = np.where(src == "default", "landcover", src + "+landcover")
        for i in np.nonzero(unknown)[0]:
            tflags[i].append("n-unknown-class")

    # ---- calibration
    cal = pd.DataFrame(columns=list(schema.CALIBRATION_FIELDS))
    n_obs = np.full(t, np.nan)
    n_cal = np.nan
    obs = inputs.observations
    if obs is not None and len(obs) and ok.any():
        idx = calibration.match_transects(obs, np.asarray(rs.chainage, float), rs.transects)
        idx = np.where((idx >= 0) & ok[np.clip(idx, 0, t - 1)], idx, -1)
        th = ps.thalweg[np.clip(idx, 0, t - 1)]
        stage_obs = np.where(obs["stage"].notna(), obs["stage"], th + obs["depth"].to_numpy(float))
        n_back = calibration.back_calculate(ps, idx, stage_obs, obs["discharge"].to_numpy(float),
                                            slope, n_parts[:, [0, 2]], banks)
        cal = pd.DataFrame({
            "reach_id": rid, "station": idx,
            "chainage": np.where(idx >= 0, np.asarray(rs.chainage, float)[np.clip(idx, 0, t - 1)],
                                 np.nan),
            "stage": stage_obs, "depth": stage_obs - th, "discharge": obs["discharge"].to_numpy(float),
            "n_back": n_back,
            "table_rows": [";".join(k for k, _t, _v in roughness.table_matches(v, kind="channel"))
                           if np.isfinite(v) else "" for v in n_back],
        })
        for i, v in zip(idx, n_back):
            if i >= 0 and np.isfinite(v):
                n_obs[i] = v
        if np.isfinite(n_back).any():
            n_cal = float(np.nanmedian(n_back))
            if cfg.calibrate:
                n_parts[:, 1] = n_cal
                src = np.full(t, "calibrated", dtype=object)
    for i in range(t):
        if n_parts[i, 1] < roughness.TABLE_RANGE[0] or n_parts[i, 1] > roughness.TABLE_RANGE[1]:
            tflags[i].append("n-unusual")

    # ---- figures at bankfull: the channel between the banks (vertical lines at the
    # bank offsets; Chow 1959, §6-9). An automatic pick sits where the water has
    # begun to spread onto the plain, so the whole water surface would count a
    # strip of floodplain as channel width; the discharge is the total
    # (divided-channel method), with the overbank shares given beside it.
    st = np.where(ok, bf_stage, ps.thalweg)
    parts = ps.subsections(st, banks)
    rp = parts.hydraulic_radius
    q_parts = np.stack([manning.conveyance(parts.area[k], rp[k], n_parts[:, k]) for k in range(3)])
    q_parts = q_parts * np.sqrt(slope)
    q = q_parts.sum(axis=0)
    a_ch, p_ch, w_ch, r_ch = parts.area[1], parts.wetted_perimeter[1], parts.top_width[1], rp[1]
    hd = safe_ratio(a_ch, w_ch)
    vel = safe_ratio(q_parts[1], a_ch)
    tr = pd.DataFrame({
        "reach_id": rid, "station": np.arange(t), "chainage": np.asarray(rs.chainage, float),
        "status": status, "flags": [flags.join(f) for f in tflags],
        "thalweg_z": ps.thalweg, "thalweg_shift": np.asarray(rs.thalweg_shift, float),
        "slope": slope,
        "bankfull_method": [p.method if p else "" for p in picks],
        "confidence": [p.confidence if p else "" for p in picks],
        "bankfull_stage": bf_stage, "bankfull_depth": bf_depth,
        "bank_left": banks[:, 0], "bank_right": banks[:, 1], "method_spread": spread,
        "n_channel": n_parts[:, 1], "n_overbank_left": n_parts[:, 0],
        "n_overbank_right": n_parts[:, 2],
        "n_source": src,
        "flow_area": a_ch, "perimeter": p_ch, "top_width": w_ch,
        "hyd_radius": r_ch, "hyd_depth": hd, "width_depth": safe_ratio(w_ch, hd),
        "velocity": vel, "discharge": q, "froude": manning.froude(vel, hd),
        "shear": manning.shear_stress(r_ch, slope),
        "stream_power": manning.unit_stream_power(q_parts[1], slope, w_ch),
        "q_overbank_left": q_parts[0], "q_main_channel": q_parts[1],
        "q_overbank_right": q_parts[2],
        "n_observed": n_obs,
    })
    figure_cols = ["bankfull_stage", "bankfull_depth", "flow_area", "perimeter", "top_width", "hyd_radius",
                   "hyd_depth", "width_depth", "velocity", "discharge", "froude", "shear",
                   "stream_power", "q_overbank_left", "q_main_channel", "q_overbank_right"]
    tr.loc[~ok, figure_cols] = np.nan

    # ---- rating curves (every transect, one array of depths) and the reach median curve
    med_depth = summary.median_depth if np.isfinite(summary.median_depth) else 1.0
    max_depth = cfg.rating_max_depth or max(2.0 * med_depth, cfg.rating_step)
    depths = np.arange(0.0, max_depth + 0.5 * cfg.rating_step, cfg.rating_step)
    rating = _curve_table(ps, rid, rs.chainage, ps.thalweg[:, None] + depths[None, :], slope,
                          n_parts, banks, ok)
    if ok.any():
        med = rating[rating.station.isin(np.nonzero(ok)[0])].groupby("depth", sort=True).median(
            numeric_only=True).reset_index()
        med["reach_id"], med["station"], med["chainage"] = rid, -1, np.nan
        med["stage"] = float(np.median(ps.thalweg[ok])) + med["depth"]
        med["spills"] = False
        rating = pd.concat([rating, med[rating.columns]], ignore_index=True)

    # ---- user stages
    stage_rows = []
    for d in cfg.depths:
        stage_rows.append((f"depth {d:g}", ps.thalweg + d))
    for e in cfg.elevations:
        stage_rows.append((f"elevation {e:g}", np.full(t, float(e))))
    stages = _stage_table(ps, rid, rs.chainage, stage_rows, slope, n_parts, banks, ok)

    # ---- design flows
    checks = capacity.check_flows(ps, inputs.flows, slope, n_parts, banks, bf_stage, q)
    checks = checks[ok[checks["index"].to_numpy()]] if len(checks) else checks
    design = checks.rename(columns={"index": "station"})
    design.insert(0, "reach_id", rid)
    design["chainage"] = np.asarray(rs.chainage, float)[design["station"].to_numpy(int)] \
        if len(design) else []
    q_med = float(np.nanmedian(q[ok])) if ok.any() else np.nan
    reach_flows = capacity.summarise_flows(checks, q_med, ok)
    if len(reach_flows):
        rf = reach_flows.copy()
        rf["reach_id"], rf["station"], rf["chainage"] = rid, -1, np.nan
        design = pd.concat([design, rf], ignore_index=True)
    # least freeboard over the flows; a flow with no stage (not carried even far
    # above the transect) makes it unknown, NaN, as does having no flow at all
    idx = checks["index"].to_numpy(int)
    fb = checks["freeboard"].to_numpy(float)
    min_fb = np.full(t, np.inf)
    np.minimum.at(min_fb, idx, np.where(np.isfinite(fb), fb, -np.inf))
    out_names = [[] for _ in range(t)]
    for i, flow, out, over in zip(idx, checks["flow"], checks["out_of_bank"],
                                  checks["over_profile"]):
        if out:
            out_names[i].append(flow)
            tflags[i].append("out-of-bank")
        if over:
            tflags[i].append("over-profile")
    tr["min_freeboard"] = np.where(np.isfinite(min_fb), min_fb, np.nan)
    tr["flows_out"] = [";".join(v) for v in out_names]
    tr["flags"] = [flags.join(f) for f in tflags]

    # ---- reach summary
    pick_conf = np.array([p.confidence if p else "" for p in picks])
    okq = q[ok]
    reach_row = {
        "reach_id": rid, "name": reach.name or "", "status": rs.status, "message": rs.message,
        "orientation": reach.orientation, "reach_length": reach.length_m, "transects": t,
        "transects_ok": int(ok.sum()), "transects_flagged": int(sum(flags.has_quality_flag(f) for f in tr["flags"])),
        "slope": rs.reach_slope, "slope_flags": getattr(rs, "slope_flags", ""),
        "bankfull_depth": summary.median_depth, "depth_spread": summary.iqr,
        "top_width": _nanmedian(w_ch[ok]), "flow_area": _nanmedian(a_ch[ok]),
        "discharge": q_med,
        "discharge_p25": float(np.nanpercentile(okq, 25)) if okq.size else np.nan,
        "discharge_p75": float(np.nanpercentile(okq, 75)) if okq.size else np.nan,
        "velocity": _nanmedian(vel[ok]),
        "n_channel": float(np.median(n_parts[ok, 1])) if ok.any() else n_ch,
        "n_source": src[0] if t else n_src, "n_calibrated": n_cal,
        "confidence_low": int(((pick_conf == "low") & ok).sum()), "outliers": int(outlier.sum()),
        "flows_out": ";".join(reach_flows.loc[reach_flows.out_of_bank, "flow"]) if len(reach_flows)
        else "",
        "worst_ratio": float(reach_flows["q_ratio"].max()) if len(reach_flows) else np.nan,
    }
    profile = rs.profile.copy()
    profile.insert(0, "reach_id", rid)
    return ReachResult(reach=reach_row, transects=tr, rating=rating, stages=stages, design=design,
                       calibration=cal, profile=profile, banks=banks, sections_z=z,
                       offsets=x)


def _nanmedian(v):
    v = np.asarray(v, dtype=float)
    return float(np.nanmedian(v)) if np.isfinite(v).any() else float("nan")


def _curve_table(ps, rid, chainage, stages, slope, n_parts, banks, ok):
    rows = np.nonzero(ok)[0]
    if rows.size == 0:
        return pd.DataFrame(columns=list(schema.RATING_FIELDS))
    sub = ps.take(rows)
    st = stages[rows]
    geo = sub.geometry(st)
    q = sub.discharge(st, slope[rows], n_parts[rows], banks[rows])
    m = st.shape[1]
    return pd.DataFrame({
        "reach_id": rid, "station": np.repeat(rows, m),
        "chainage": np.repeat(np.asarray(chainage, float)[rows], m),
        "stage": st.ravel(), "depth": geo.depth.ravel(), "flow_area": geo.area.ravel(),
        "perimeter": geo.wetted_perimeter.ravel(), "top_width": geo.top_width.ravel(),
        "hyd_radius": geo.hydraulic_radius.ravel(), "velocity": safe_ratio(q, geo.area).ravel(),
        "discharge": q.ravel(), "spills": geo.spills.ravel(),
    })


def _stage_table(ps, rid, chainage, requests, slope, n_parts, banks, ok):
    if not requests:
        return pd.DataFrame(columns=["reach_id", "station", "chainage", "request", "stage"])
    labels = [r[0] for r in requests]
    st = np.stack([r[1] for r in requests], axis=1)         # (t, k)
    tab = _curve_table(ps, rid, chainage, st, slope, n_parts, banks, ok)
    if len(tab) == 0:
        return tab
    k = len(labels)
    tab.insert(3, "request", np.tile(labels, int(ok.sum())))
    hd = safe_ratio(tab["flow_area"], tab["top_width"])
    tab["froude"] = manning.froude(tab["velocity"].to_numpy(), hd)
    sl = np.repeat(slope[ok], k)
    tab["shear"] = manning.shear_stress(tab["hyd_radius"].to_numpy(), sl)
    return tab
