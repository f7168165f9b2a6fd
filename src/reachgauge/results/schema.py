"""The result fields: one schema that the analysis, the writer, the report and the
README all use.

Each field: (kind, meaning). The kind decides the unit and the conversion to
US customary units at the output edge: ``length`` (m | ft), ``area`` (m² |
ft²), ``velocity`` (m/s | ft/s), ``discharge`` (m³/s | ft³/s), ``stress``
(N/m² | lbf/ft²), ``power`` (W/m² | lbf/(ft·s)), ``n`` (Manning's n: s/m^(1/3)
in both systems by convention, the unit constant k absorbing the change),
``drainage`` (drainage area: km² | mi², the trade's units; 1 mi² = 2.589988110336 km²),
``none`` (dimensionless), ``text``, ``flag`` (bool), ``count``.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from reachgauge.manning import FOOT, SQ_MILE_KM2

# factor from SI to US customary for each kind
TO_US = {"length": 1 / FOOT, "area": 1 / FOOT ** 2, "velocity": 1 / FOOT,
         "discharge": 1 / FOOT ** 3, "stress": 0.020885434, "power": 0.068521766,
         "drainage": 1 / SQ_MILE_KM2}
# stress: 1 N/m² = 0.020885434 lbf/ft²; power: 1 W/m² = 0.068521766 lbf/(ft·s)
# (standard conversion factors: 1 lbf = 4.4482216 N, 1 ft = 0.3048 m); drainage:
# 1 mi² = 2.589988110336 km² exactly (the international mile, 1609.344 m)

UNIT_LABELS = {
    "si": {"length": "m", "area": "m²", "velocity": "m/s", "discharge": "m³/s", "stress": "N/m²",
           "power": "W/m²", "n": "s/m^(1/3)", "drainage": "km²"},
    "us": {"length": "ft", "area": "ft²", "velocity": "ft/s", "discharge": "ft³/s",
           "stress": "lbf/ft²", "power": "lbf/(ft·s)", "n": "s/m^(1/3)", "drainage": "mi²"},
}

TRANSECT_FIELDS = {
    "reach_id": ("text", "reach identifier"),
    "station": ("count", "transect number along the reach, 0 at the upstream end"),
    "chainage": ("length", "distance along the centreline from the reach's upstream end"),
    "status": ("text", "ok, or why the transect has no figures"),
    "flags": ("text", "';'-separated codes worth a look (see the flag table)"),
    "thalweg_z": ("length", "thalweg (lowest ground) elevation"),
    "thalweg_shift": ("length", "thalweg offset from the digitised centreline, + towards the right bank"),
    "slope": ("none", "slope used at this station (dimensionless)"),
    "drainage_area": ("drainage", "drainage area: the largest contributing area within the "
                                  "snapping distance of the thalweg (--drainage-area); empty "
                                  "with a per-reach field"),
    "drainage_snap": ("length", "distance from the thalweg to the cell whose drainage area was "
                                "taken"),
    "bankfull_method": ("text", "method that gave the published bankfull stage; 'none' where no "
                                "stage is published (the flags say why)"),
    "confidence": ("text", "confidence in the bankfull stage: high, medium, low, or none where "
                           "no figure is published; only high and medium enter the reach's "
                           "figures"),
    "bankfull_stage": ("length", "bankfull water-surface elevation"),
    "bankfull_depth": ("length", "bankfull stage minus thalweg elevation"),
    "bank_left": ("length", "offset of the left bank along the transect line as written, from its "
                            "start (a transect cut short starts at its cut end); empty where no "
                            "bankfull stage is published"),
    "bank_right": ("length", "offset of the right bank along the transect line as written"),
    "method_spread": ("length", "range of the bankfull depths given by the automatic methods"),
    "n_channel": ("n", "Manning's n of the channel"),
    "n_overbank_left": ("n", "Manning's n of the left overbank"),
    "n_overbank_right": ("n", "Manning's n of the right overbank"),
    "n_source": ("text", "where the channel n came from: default, field, cowan, landcover or "
                         "calibrated; '+landcover': overbank n from land cover"),
    # bankfull figures: the channel between the bank offsets (basis: channel)
    "flow_area": ("area", "channel flow area at bankfull (between the bank offsets)"),
    "perimeter": ("length", "channel wetted perimeter at bankfull"),
    "top_width": ("length", "channel water-surface width at bankfull (bank to bank)"),
    "hyd_radius": ("length", "channel hydraulic radius at bankfull, flow_area / perimeter"),
    "hyd_depth": ("length", "channel hydraulic depth at bankfull, flow_area / top_width"),
    "width_depth": ("none", "top width / hydraulic depth at bankfull"),
    "velocity": ("velocity", "mean channel velocity at bankfull, discharge / flow_area"),
    "discharge": ("discharge", "Manning discharge of the channel between the banks at bankfull "
                               "(its share of the divided-channel flow)"),
    "froude": ("none", "channel Froude number at bankfull, on hydraulic depth"),
    "shear": ("stress", "mean boundary shear stress of the channel at bankfull, gamma R S"),
    "stream_power": ("power", "channel unit stream power at bankfull, "
                              "gamma discharge S / top_width"),
    "q_overbank_left": ("discharge", "discharge of the left overbank strip at the bankfull stage"),
    "q_overbank_right": ("discharge", "discharge of the right overbank strip at the bankfull stage"),
    "discharge_total": ("discharge", "discharge of the whole section at the bankfull stage: channel "
                                     "plus overbank strips (divided-channel method)"),
    "discharge_p10": ("discharge", "10th percentile of the bankfull channel discharge over the "
                                   "--uncertainty draws (Monte Carlo; empty without it)"),
    "discharge_p50": ("discharge", "median of the bankfull channel discharge over the draws"),
    "discharge_p90": ("discharge", "90th percentile of the bankfull channel discharge over the "
                                   "draws"),
    "bankfull_stage_p10": ("length", "10th percentile of the bankfull stage over the "
                                     "--uncertainty draws (empty without them)"),
    "bankfull_stage_p90": ("length", "90th percentile of the bankfull stage over the draws"),
    "n_observed": ("n", "channel n back-calculated from a measured flow matched to this transect"),
    "min_freeboard": ("length", "least freeboard to bankfull over the design flows (negative: out of bank)"),
    "flows_out": ("text", "design flows that leave the channel here"),
}

REACH_FIELDS = {
    "reach_id": ("text", "reach identifier"),
    "name": ("text", "reach name from the streams file"),
    "status": ("text", "ok, or why the reach has no figures (bankfull-unsupported: no bankfull "
                       "figures)"),
    "message": ("text", "details of the status"),
    "orientation": ("text", "how the downstream direction was decided"),
    "reach_length": ("length", "centreline length"),
    "transects": ("count", "transects cut"),
    "transects_ok": ("count", "transects with figures"),
    "transects_flagged": ("count", "transects with a flag other than the design-flow results"),
    "transects_trusted": ("count", "transects with a trusted bankfull pick (published, confidence "
                                   "high or medium): the reach's bankfull figures are their "
                                   "medians, withheld when they are no more than half the "
                                   "transects"),
    "slope": ("none", "reach slope (fit over the whole reach)"),
    "slope_flags": ("text", "flags of the slope estimate"),
    "drainage_area": ("drainage", "drainage area at the reach's downstream end: the largest of "
                                  "its transects' areas, or the --drainage-area-field value"),
    "drainage_source": ("text", "where the drainage area came from: terrain, raster or field"),
    "drainage_flags": ("text", "area-lower-bound where the watershed of the reach's area "
                               "leaves the raster"),
    "stream_order": ("none", "Strahler order of a channel derived from the terrain "
                             "(--channel-area); empty for given streams"),
    "bankfull_depth": ("length", "median bankfull depth of the trusted picks"),
    "depth_spread": ("length", "interquartile range of the trusted picks' bankfull depths"),
    "top_width": ("length", "median bankfull top width of the trusted picks"),
    "flow_area": ("area", "median bankfull channel flow area of the trusted picks"),
    "discharge": ("discharge", "median bankfull discharge of the trusted picks"),
    "discharge_p25": ("discharge", "25th percentile of the trusted picks' bankfull discharge"),
    "discharge_p75": ("discharge", "75th percentile of the trusted picks' bankfull discharge"),
    "discharge_p10": ("discharge", "10th percentile over the --uncertainty draws of each draw's "
                                   "median bankfull discharge of the trusted picks"),
    "discharge_p50": ("discharge", "median over the draws of each draw's median bankfull "
                                   "discharge of the trusted picks"),
    "discharge_p90": ("discharge", "90th percentile over the draws of each draw's median bankfull "
                                   "discharge of the trusted picks"),
    "velocity": ("velocity", "median bankfull velocity of the trusted picks"),
    "n_channel": ("n", "Manning's n of the channel used for the reach"),
    "n_source": ("text", "where the channel n came from"),
    "n_calibrated": ("n", "median channel n back-calculated from measured flows (if any)"),
    "confidence_low": ("count", "transects whose published bankfull stage has low confidence"),
    "outliers": ("count", "transects whose bankfull depth is an outlier for the reach"),
    "flows_out": ("text", "design flows above the reach's median discharge at the bankfull stage"),
    "worst_ratio": ("none", "largest q_ratio of the design flows"),
    # regional curves (issue 12)
    "regional_flags": ("text", "regional-outlier: a bankfull figure of the reach lies outside the "
                               "95 % prediction band of the run's regional curve"),
    "regional_outside": ("text", "';'-separated variables (width, depth, area, discharge) outside "
                                 "the 95 % prediction band of the run's regional curve"),
}

# regional curves (issue 12): y = coefficient × A^exponent, A the drainage area; the 95 %
# bands at A: exp(ln coefficient + exponent ln A ± t_quantile × std_error ×
# sqrt(k + 1/n_reaches + (ln A - log_area_mean)² / log_area_ss)), k = 0 for the band of
# the mean (median) curve, k = 1 for the prediction band
REGIONAL_FIT_FIELDS = {
    "source": ("text", "run: this run's fit over its reaches; published: a curve of "
                       "--regional-curves"),
    "curve": ("text", "fit, or the published curve's name"),
    "variable": ("text", "width (top_width), depth (bankfull_depth), area (flow_area) or "
                         "discharge"),
    "status": ("text", "fitted, or why there is no fit; published: the curve as given"),
    "n_reaches": ("count", "reaches in the fit; published: reaches in its valid range"),
    "left_out": ("count", "reaches left out of the fit"),
    "left_out_why": ("text", "reaches left out, by reason (status not ok, no trusted figure, no "
                             "drainage area)"),
    "coefficient": ("none", "a in y = a·A^b, in the run's units: m, m², m³/s against km² (ft, "
                            "ft², ft³/s against mi²)"),
    "exponent": ("none", "b in y = a·A^b"),
    "r_squared": ("none", "R² of the fit of ln y on ln A"),
    "std_error": ("none", "standard error of the regression of ln y on ln A (natural log)"),
    "area_min": ("drainage", "smallest drainage area fitted; published: the curve's valid range"),
    "area_max": ("drainage", "largest drainage area fitted; published: the curve's valid range"),
    "log_area_mean": ("none", "mean of ln A over the fitted reaches (A in the run's area unit)"),
    "log_area_ss": ("none", "sum of squares of ln A about its mean"),
    "t_quantile": ("none", "0.975 quantile of Student's t with n_reaches - 2 degrees of freedom"),
    "outside": ("count", "fitted reaches outside the 95 % prediction band"),
}

CURVE_RATIO_FIELDS = {
    "reach_id": ("text", "reach identifier"),
    "source": ("text", "run (this run's fit) or published"),
    "curve": ("text", "fit, or the published curve's name"),
    "variable": ("text", "width, depth, area or discharge"),
    "drainage_area": ("drainage", "drainage area of the reach"),
    "ratio": ("none", "the reach's bankfull figure / the curve at its drainage area; empty "
                      "outside the curve's valid range"),
    "in_range": ("flag", "the reach's drainage area lies in the curve's valid range"),
    "outside_band": ("flag", "fit rows: the figure lies outside the 95 % prediction band"),
}

RATING_FIELDS = {
    "reach_id": ("text", "reach identifier"),
    "station": ("count", "transect number; -1 for the reach's median curve"),
    "chainage": ("length", "chainage of the transect (reach median curve: NaN)"),
    "stage": ("length", "water-surface elevation (reach curve: median thalweg + depth)"),
    "depth": ("length", "stage minus thalweg elevation"),
    "flow_area": ("area", "flow area"),
    "perimeter": ("length", "wetted perimeter"),
    "top_width": ("length", "water-surface width"),
    "hyd_radius": ("length", "hydraulic radius"),
    "velocity": ("velocity", "mean velocity of the section, discharge / flow_area"),
    "discharge": ("discharge", "Manning discharge (divided-channel method at the bankfull banks)"),
    "spills": ("flag", "the water reaches an end of the transect"),
    "discharge_p10": ("discharge", "10th percentile of the discharge at this depth over the "
                                   "--uncertainty draws (reach curve: of each draw's median)"),
    "discharge_p90": ("discharge", "90th percentile of the discharge at this depth over the draws"),
}

SECTION_FIELDS = {  # figures of the whole connected section at a stage (basis: section)
    **{k: RATING_FIELDS[k] for k in ("stage", "depth", "flow_area", "perimeter", "top_width",
                                      "hyd_radius")},
    "hyd_depth": ("length", "hydraulic depth, flow_area / top_width"),
    "velocity": ("velocity", "mean velocity of the section, discharge / flow_area"),
    "discharge": ("discharge", "Manning discharge, divided-channel method where banks are known"),
    "froude": ("none", "Froude number of the section, on hydraulic depth"),
    "shear": ("stress", "mean boundary shear stress, gamma R S"),
    "stream_power": ("power", "unit stream power, gamma discharge S / top_width"),
    "spills": RATING_FIELDS["spills"],
}

STAGE_FIELDS = {  # the same figures as the `section` command's rating table
    "reach_id": ("text", "reach identifier"),
    "station": ("count", "transect number"),
    "chainage": ("length", "chainage of the transect"),
    "request": ("text", "the stage asked for: 'depth D' or 'elevation E'"),
    **SECTION_FIELDS,
}

DESIGN_FIELDS = {
    "reach_id": ("text", "reach identifier"),
    "station": ("count", "transect number; -1 for the reach summary row"),
    "chainage": ("length", "chainage of the transect"),
    "flow": ("text", "name of the design flow"),
    "discharge": ("discharge", "design discharge"),
    "stage": ("length", "normal-depth water-surface elevation"),
    "depth": ("length", "normal depth above the thalweg"),
    "freeboard": ("length", "bankfull stage minus design stage (negative: out of bank)"),
    "q_ratio": ("none", "design discharge / discharge that fills the section to the bankfull stage "
                         "(transects' discharge_total; reach row: its median)"),
    "out_of_bank": ("flag", "the flow leaves the channel"),
    "over_profile": ("flag", "the flow overtops an end of the transect: its stage counts only the "
                             "water inside the transect (an upper bound); widen the transect"),
    "stage_at_jump": ("flag", "the flow is carried only once water tops a bank into lower ground "
                              "behind it: the stage is that bank's elevation"),
    "share_out": ("none", "reach row: fraction of transects where the flow is out of bank"),
    "p_out_of_bank": ("none", "share of the --uncertainty draws in which the flow leaves the "
                              "channel (reach row: exceeds the draw's median bankfull discharge)"),
}

PROFILE_FIELDS = {
    "reach_id": ("text", "reach identifier"),
    "station": ("count", "transect number along the reach, 0 at the upstream end"),
    "chainage": ("length", "distance from the reach's upstream end"),
    "z_raw": ("length", "thalweg elevation as sampled"),
    "z_carved": ("length", "thalweg elevation after conditioning: humps breached, pits filled (least change)"),
    "z_used": ("length", "elevation the slope was fitted to"),
    "carved": ("flag", "conditioning moved the thalweg here (and the slope uses the moved level)"),
    "slope": ("none", "slope used at this station (dimensionless)"),
}

CALIBRATION_FIELDS = {
    "reach_id": ("text", "reach identifier"),
    "station": ("count", "transect the observation was matched to"),
    "chainage": ("length", "chainage of that transect"),
    "stage": ("length", "measured water-surface elevation"),
    "depth": ("length", "measured depth above the thalweg"),
    "discharge": ("discharge", "measured discharge"),
    "n_back": ("n", "channel n that reproduces the measured discharge"),
    "table_rows": ("text", "Chow (1959) Table 5-6 channel rows whose range holds n_back"),
}

SAMPLE_SECTION_FIELDS = {
    "reach_id": ("text", "reach identifier"),
    "station": ("count", "transect number"),
    "offset": ("length", "distance from the transect's left end (left bank looking downstream)"),
    "elevation": ("length", "ground elevation as sampled (after any baseflow correction)"),
}

# design-flow footprints (reachgauge.flood): one polygon per reach and flow
FOOTPRINT_FIELDS = {
    "reach_id": ("text", "reach identifier"),
    "flow": ("text", "name of the design flow"),
    "discharge": ("discharge", "design discharge"),
    "wet_area": ("area", "plan area of the footprint: cells under the flow's water surface "
                         "connected to the channel"),
    "out_of_bank_area": ("area", "part of the footprint outside the channel: the band between "
                                 "the transects' bank offsets, interpolated along the reach; "
                                 "empty where no bankfull stage is published"),
    "mean_depth": ("length", "mean water depth over the footprint"),
    "max_depth": ("length", "largest water depth in the footprint"),
    "width_limit": ("length", "width mapped across the reach, and the widest a transect was "
                              "widened to"),
    "transects_widened": ("count", "transects whose water ran over their ends, widened to the "
                                   "width limit for their stage"),
    "transects_cut": ("count", "of those, transects still over their ends at the width limit "
                               "(their stages are upper bounds)"),
    "cut_by_limit": ("flag", "the footprint is cut by the width limit: it reaches the edge of the "
                             "mapped width, or a transect is still over its ends"),
    "cut_from": ("length", "first chainage where the footprint is cut by the width limit (its "
                           "edge at the limit, or a transect still over its ends)"),
    "cut_to": ("length", "last chainage where the footprint is cut by the width limit"),
    "cut_length": ("length", "length of reach along which the footprint's edge reaches the width "
                             "limit on the map"),
    "caution": ("text", "what to keep in mind about this footprint ('' when nothing special)"),
}

LAYERS = {
    "transects": TRANSECT_FIELDS,
    "reaches": REACH_FIELDS,
    "rating_curves": RATING_FIELDS,
    "stage_figures": STAGE_FIELDS,
    "design_checks": DESIGN_FIELDS,
    "profile": PROFILE_FIELDS,
    "calibration": CALIBRATION_FIELDS,
    "sample_sections": SAMPLE_SECTION_FIELDS,
    "regional_fits": REGIONAL_FIT_FIELDS,
    "curve_ratios": CURVE_RATIO_FIELDS,
    "footprints": FOOTPRINT_FIELDS,
}


def to_units(df: pd.DataFrame, fields: dict, units: str) -> pd.DataFrame:
    """A copy of ``df`` with every known numeric field converted from SI to ``units``."""
    if units == "si":
        return df.copy()
    out = df.copy()
    for name, (kind, _m) in fields.items():
        if name in out.columns and kind in TO_US:
            out[name] = out[name].astype(float) * TO_US[kind]
    return out


def unit_of(fields: dict, name: str, units: str) -> str:
    kind = fields[name][0]
    return UNIT_LABELS[units].get(kind, "")


def empty_frame(fields: dict) -> pd.DataFrame:
    return pd.DataFrame({k: pd.Series(dtype=object if v[0] == "text" else float)
                         for k, v in fields.items()})


def column_order(df: pd.DataFrame, fields: dict) -> pd.DataFrame:
    cols = [c for c in fields if c in df.columns] + [c for c in df.columns if c not in fields]
    return df[cols]


__all__ = ["LAYERS", "TO_US", "UNIT_LABELS", "to_units", "unit_of", "empty_frame", "column_order",
           "np"]


LAYER_NOTES = {
    "transects": "LineString, one row per transect (re-centred on the thalweg, drawn from the left "
                 "bank to the right bank looking downstream); figures at the bankfull stage.",
    "reaches": "LineString, one row per reach (oriented downstream), summary figures.",
    "thalweg_points": "Point, the thalweg of every transect (fields as in transects).",
    "rating_curves": "table, one row per transect and stage; station -1 is the reach's median curve.",
    "stage_figures": "table, figures at the stages asked for with --depths / --elevations.",
    "design_checks": "table, one row per transect and design flow; station -1 rows summarise the reach.",
    "profile": "table, the longitudinal thalweg profile of each reach, raw and conditioned.",
    "calibration": "table, measured flows matched to transects and the n they imply.",
    "sample_sections": "table, ground points of a few transects per reach (for plots).",
    "regional_fits": "table, the run's regional curves (bankfull figure = a·A^b over drainage "
                     "area, log-log least squares over the reaches with trusted figures) and the "
                     "published curves given; the bands follow from its fields (formula above "
                     "the table).",
    "curve_ratios": "table, one row per reach, curve and variable: the reach's figure over the "
                    "curve's.",
    "footprints": "MultiPolygon, one row per reach and design flow (with --footprints): where the "
                  "flow's normal-depth water surface, interpolated between transects, stands above "
                  "the terrain, connected to the channel. A screening map, not a flood model.",
    "run_info": "table of key and value: parameters, units, versions, input fingerprints.",
}


def markdown() -> str:
    """Field tables of every layer, for the README (kept in sync by a test)."""
    out = []
    for layer, fields in LAYERS.items():
        out.append(f"#### `{layer}`\n\n{LAYER_NOTES[layer]}\n")
        out.append("| field | unit (si / us) | meaning |\n|---|---|---|")
        for name, (kind, meaning) in fields.items():
            si, us = UNIT_LABELS["si"].get(kind, ""), UNIT_LABELS["us"].get(kind, "")
            unit = f"{si} / {us}" if si and si != us else si
            out.append(f"| `{name}` | {unit} | {meaning} |")
        out.append("")
    out.append(f"#### `run_info`\n\n{LAYER_NOTES['run_info']}\n")
    return "\n".join(out)
