"""A small synthetic result (every layer of :mod:`reachgauge.schema`) for the
report tests. Invented data, for tests only.

Each processed reach is a straight centreline running north in EPSG:32633, cut
every 20 m by 30 m transects. Every section is a trapezoidal channel (bottom
width ``B``, side slope ``Z`` horizontal : vertical, bankfull depth ``y``) set in
a flat flood plain between steep walls, so its figures are closed-form:
A = (B + Z y) y, T = B + 2 Z y, P = B + 2 y √(1 + Z²) (standard plane geometry,
REFERENCES.md "Closed forms"), Q = A R^(2/3) S^(1/2) / n (Manning; Chow 1959,
Eq. 5-6, SI). Above bankfull the flood plain carries water too: discharge is
summed over the channel and the flood plain with the vertical interfaces left
out of the wetted perimeter (divided-channel method, Chow 1959, §6-9), so it
rises monotonically with depth.

Reach names and flow names hold HTML and mathtext (``<b>&"x"``, ``<script>``,
``$\\alpha$``) to test escaping; one reach has a bad status, one transect a bad
status, some transects flags.
"""

from __future__ import annotations

import json
import warnings
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
import shapely

from reachgauge import flags
from reachgauge.results import schema
from reachgauge.results.geopackage import write_geopackage

CRS = "EPSG:32633"
B, Z, N, SLOPE = 4.0, 2.0, 0.035, 0.002
HALF, STEP, SPACING = 15.0, 0.5, 20.0
FLOOD_PLAIN = 26.0          # width between the walls at the flood-plain level (m)
NAMES = ('<b>&"x"', "Mill $\\alpha$ Brook <script>alert(1)</script>")
FLOWS = {"Q10": 5.0, 'Q100 <"1%">': 8.5}
BAD = {"reach_id": "R9", "name": 'Bad & "broken" <reach>', "status": "outside-raster",
       "message": "the line lies <em>outside</em> the raster"}


def trapezoid(depth, y_bf):
    """(area, wetted perimeter, top width) at ``depth`` of the fixture section
    whose channel is ``y_bf`` deep (closed form, see the module docstring)."""
    d = np.asarray(depth, float)
    dc = np.minimum(d, y_bf)
    area = (B + Z * dc) * dc
    perim = B + 2 * dc * np.sqrt(1 + Z * Z)
    top = B + 2 * Z * dc
    over = np.maximum(d - y_bf, 0.0)
    t_bf = B + 2 * Z * y_bf
    area = area + over * FLOOD_PLAIN
    perim = perim + np.where(over > 0, FLOOD_PLAIN - t_bf + 2 * over, 0.0)
    top = np.where(over > 0, FLOOD_PLAIN, top)
    return area, perim, top


def _manning(area, perim):
    r = np.where(perim > 0, area / np.where(perim > 0, perim, 1), 0.0)
    return area * r ** (2 / 3) * np.sqrt(SLOPE) / N


def discharge(depth, y_bf):
    """Divided-channel Manning discharge (m³/s) of the fixture section."""
    d = np.asarray(depth, float)
    dc = np.minimum(d, y_bf)
    over = np.maximum(d - y_bf, 0.0)
    t_bf = B + 2 * Z * y_bf
    q_channel = _manning((B + Z * dc) * dc + t_bf * over, B + 2 * dc * np.sqrt(1 + Z * Z))
    fp = FLOOD_PLAIN - t_bf
    q_plain = _manning(fp * over, np.where(over > 0, fp + 2 * over, 0.0))
    return q_channel + q_plain


def ground(offset, thalweg, y_bf):
    """Ground elevation across the fixture section (offset from the left end)."""
    d = np.abs(offset - HALF)
    bank = B / 2 + Z * y_bf
    rise = np.clip((d - B / 2) / Z, 0.0, y_bf)
    wall = np.where(d > FLOOD_PLAIN / 2, (d - FLOOD_PLAIN / 2) * 2.0, 0.0)
    return thalweg + np.where(d <= bank, rise, y_bf) + wall


def _reach(j: int, rid: str, name: str, t: int):
    x0, y0 = 400.0 * j + 500_000.0, 5_000_000.0
    length = SPACING * t
    chain = SPACING / 2 + SPACING * np.arange(t)
    y_bf = 1.2 + 0.1 * np.sin(np.arange(t) + j)
    thalweg = 100.0 - SLOPE * chain
    area, perim, top = trapezoid(y_bf, y_bf)
    q = discharge(y_bf, y_bf)
    status = np.full(t, "ok", dtype=object)
    tflags = [""] * t
    conf = np.array(["high"] * t, dtype=object)
    if t > 3:
        status[2], tflags[2], conf[2] = "no-data", "partial-nodata", ""
        tflags[3], conf[3] = "no-clear-break", "low"
    ok = status == "ok"
    bank = HALF + np.array([-1, 1])[None, :] * (B / 2 + Z * y_bf)[:, None]
    stage = thalweg + y_bf
    tr = pd.DataFrame({
        "reach_id": rid, "station": np.arange(t), "chainage": chain, "status": status,
        "flags": tflags, "thalweg_z": thalweg, "thalweg_shift": 0.0, "slope": SLOPE,
        "bankfull_method": "bank-top", "confidence": conf, "bankfull_stage": stage,
        "bankfull_depth": y_bf, "bank_left": bank[:, 0], "bank_right": bank[:, 1],
        "method_spread": 0.1, "n_channel": N, "n_overbank_left": N, "n_overbank_right": N, "n_source": "default",
        "flow_area": area, "perimeter": perim, "top_width": top, "hyd_radius": area / perim,
        "hyd_depth": area / top, "width_depth": top / (area / top),
        "velocity": q / area, "discharge": q, "froude": (q / area) / np.sqrt(9.80665 * area / top),
        "shear": 9810 * area / perim * SLOPE, "stream_power": 9810 * q * SLOPE / top,
        "q_overbank_left": 0.0, "q_main_channel": q, "q_overbank_right": 0.0, "n_observed": np.nan,
    })
    kept = ("reach_id", "station", "chainage", "status", "flags", "thalweg_z", "thalweg_shift",
            "slope", "n_channel", "n_overbank_left", "n_overbank_right", "n_source")
    fig_cols = [c for c in tr.columns if c not in kept]
    tr.loc[~ok, fig_cols] = np.nan
    tr.loc[~ok, ["bankfull_method", "confidence"]] = ""

    # rating curves: every transect on one array of depths, and the median curve
    depths = np.round(np.arange(0.0, 2.41, 0.1), 10)
    a, p, w = trapezoid(depths[None, :], y_bf[:, None])
    qq = discharge(depths[None, :], y_bf[:, None])
    rating = pd.DataFrame({
        "reach_id": rid, "station": np.repeat(np.arange(t), depths.size),
        "chainage": np.repeat(chain, depths.size),
        "stage": (thalweg[:, None] + depths[None, :]).ravel(), "depth": np.tile(depths, t),
        "flow_area": a.ravel(), "perimeter": p.ravel(), "top_width": w.ravel(),
        "hyd_radius": np.where(p > 0, a / np.where(p > 0, p, 1), 0).ravel(),
        "velocity": np.where(a > 0, qq / np.where(a > 0, a, 1), 0).ravel(),
        "discharge": qq.ravel(), "spills": False})
    rating = rating[ok[rating["station"].to_numpy()]]
    med = rating.groupby("depth").median(numeric_only=True).reset_index()
    med["reach_id"], med["station"], med["chainage"], med["spills"] = rid, -1, np.nan, False
    med["stage"] = float(np.median(thalweg[ok])) + med["depth"]
    rating = pd.concat([rating, med[rating.columns]], ignore_index=True)

    # design flows: normal depth read off each transect's rating on a fine grid of
    # depths (Q rises monotonically with depth, so the inverse is single-valued)
    fine = np.arange(0.0, 3.0, 0.0005)
    qf = discharge(fine[None, :], y_bf[:, None])
    rows, min_fb, out = [], np.full(t, np.nan), [[] for _ in range(t)]
    for fname, fq in FLOWS.items():
        dn = np.array([np.interp(fq, qf[i], fine) for i in range(t)])
        fb = y_bf - dn
        oob = fb < 0
        rows.append(pd.DataFrame({
            "reach_id": rid, "station": np.arange(t), "chainage": chain, "flow": fname,
            "discharge": fq, "stage": thalweg + dn, "depth": dn, "freeboard": fb,
            "q_ratio": fq / q, "out_of_bank": oob, "over_profile": False, "share_out": np.nan})[ok])
        min_fb = np.fmin(min_fb, np.where(ok, fb, np.nan))
        for i in np.flatnonzero(oob & ok):
            out[i].append(fname)
    design = pd.concat(rows, ignore_index=True)
    q_med = float(np.median(q[ok]))
    summary = pd.DataFrame({
        "reach_id": rid, "station": -1, "chainage": np.nan, "flow": list(FLOWS),
        "discharge": list(FLOWS.values()), "q_ratio": [v / q_med for v in FLOWS.values()],
        "out_of_bank": [v > q_med for v in FLOWS.values()],
        "share_out": [float((design[design.flow == f]["out_of_bank"]).mean()) for f in FLOWS]})
    design = pd.concat([design, summary], ignore_index=True)
    tr["min_freeboard"] = min_fb
    tr["flows_out"] = [";".join(o) for o in out]
    tr["flags"] = [flags.join([f] + (["out-of-bank"] if o else []))
                   for f, o in zip(tr["flags"], out)]

    # profile: a hump 0.3 m high between 40 and 50 m that carving removes
    ch = np.arange(0.0, length + 0.5, 1.0)
    z_carved = 100.0 - SLOPE * ch
    z_raw = z_carved + np.where((ch > 40) & (ch < 50), 0.3, 0.0)
    profile = pd.DataFrame({"reach_id": rid, "chainage": ch, "z_raw": z_raw,
                            "z_carved": z_carved, "z_used": z_carved})

    # ground points of up to four valid transects
    okidx = np.flatnonzero(ok)
    pick = np.unique(okidx[np.linspace(0, okidx.size - 1, min(4, okidx.size)).round().astype(int)])
    off = np.arange(0.0, 2 * HALF + STEP / 2, STEP)
    samples = pd.concat([pd.DataFrame({"reach_id": rid, "station": int(i), "offset": off,
                                       "elevation": ground(off, thalweg[i], y_bf[i])})
                         for i in pick], ignore_index=True)

    cx, cy = x0 + 0.0 * chain, y0 + chain
    lines = shapely.linestrings(np.stack([np.stack([cx - HALF, cy], -1),
                                          np.stack([cx + HALF, cy], -1)], axis=1))
    transects = gpd.GeoDataFrame(tr, geometry=lines, crs=CRS)
    points = gpd.GeoDataFrame(tr[["reach_id", "station", "chainage", "thalweg_z", "thalweg_shift",
                                  "status"]], geometry=shapely.points(cx, cy), crs=CRS)
    okq = q[ok]
    reach = {
        "reach_id": rid, "name": name, "status": "ok", "message": "", "orientation": "terrain",
        "reach_length": length, "transects": t, "transects_ok": int(ok.sum()),
        "transects_flagged": int(sum(bool(f) for f in tr["flags"])), "slope": SLOPE,
        "slope_flags": "carved", "bankfull_depth": float(np.median(y_bf[ok])),
        "depth_spread": float(np.subtract(*np.percentile(y_bf[ok], [75, 25]))),
        "top_width": float(np.median(top[ok])), "flow_area": float(np.median(area[ok])),
        "discharge": q_med, "discharge_p25": float(np.percentile(okq, 25)),
        "discharge_p75": float(np.percentile(okq, 75)),
        "velocity": float(np.median((q / area)[ok])), "n_channel": N, "n_source": "default",
        "n_calibrated": np.nan, "confidence_low": int(((conf == "low") & ok).sum()), "outliers": 0,
        "flows_out": ";".join(f for f, v in FLOWS.items() if v > q_med),
        "worst_ratio": max(FLOWS.values()) / q_med,
    }
    geom = shapely.linestrings([[x0, y0], [x0, y0 + length]])
    return reach, geom, transects, points, rating, design, profile, samples


def result_layers(n_ok: int = 2, transects: int = 6, units: str = "si", bad: bool = True) -> dict:
    """Every result layer, as :func:`reachgauge.results.geopackage.build_layers` assembles
    them, for ``n_ok`` processed reaches (+ one with a bad status if ``bad``)."""
    names = [NAMES[j] if j < len(NAMES) else f"Reach {j + 1}" for j in range(n_ok)]
    built = [_reach(j, f"R{j + 1}", names[j], transects) for j in range(n_ok)]
    rows = [b[0] for b in built]
    geoms = [b[1] for b in built]
    if bad:
        rows.append({**BAD, "orientation": "", "reach_length": 250.0, "transects": 0, "transects_ok": 0})
        geoms.append(shapely.linestrings([[499_000.0, 5_000_000.0], [499_100.0, 5_000_200.0]]))

    def cat(k, fields):
        if built:
            frame = pd.concat([b[k] for b in built], ignore_index=True)
        else:
            frame = schema.empty_frame(fields)
            if k in (2, 3):
                frame = gpd.GeoDataFrame(frame, geometry=gpd.GeoSeries([], crs=CRS))
        return schema.column_order(schema.to_units(frame, fields, units), fields)

    def spatial(k):
        return gpd.GeoDataFrame(cat(k, schema.TRANSECT_FIELDS), geometry="geometry", crs=CRS)

    reaches = gpd.GeoDataFrame(
        schema.column_order(schema.to_units(pd.DataFrame(rows), schema.REACH_FIELDS, units),
                            schema.REACH_FIELDS), geometry=geoms, crs=CRS)
    layers = {
        "transects": spatial(2),
        "reaches": reaches,
        "thalweg_points": spatial(3),
        "rating_curves": cat(4, schema.RATING_FIELDS),
        "stage_figures": schema.empty_frame(schema.STAGE_FIELDS),
        "design_checks": cat(5, schema.DESIGN_FIELDS),
        "profile": cat(6, schema.PROFILE_FIELDS),
        "calibration": schema.empty_frame(schema.CALIBRATION_FIELDS),
        "sample_sections": cat(7, schema.SAMPLE_SECTION_FIELDS),
    }
    fp = {"path": "/data/<dem>&co.tif", "bytes": 123456, "modified": "2024-05-01T10:00:00Z",
          "sha256_first_mib": "ab" * 32}
    layers["run_info"] = pd.DataFrame([
        ("reachgauge_version", "0.1.0"), ("created_utc", "2024-05-02T08:30:00Z"), ("units", units),
        ("unit_labels", json.dumps(schema.UNIT_LABELS[units], ensure_ascii=False)),
        ("crs", CRS), ("work_crs", CRS), ("elapsed_s", "1.00"), ("caution", "screening only"),
        ("param.spacing", "20.0"), ("param.n", "0.035"), ("param.name_field", '"<nm>"'),
        ("version.numpy", np.__version__), ("input.dem", json.dumps(fp)),
        ("warning", "1 feature had <no> geometry & was skipped"),
    ], columns=["key", "value"])
    return layers


def write_result(path, **kw) -> Path:
    """Write :func:`result_layers` to a GeoPackage with the project's own writer."""
    with warnings.catch_warnings():
        # GDAL notes that the writer's temporary file does not end in .gpkg
        warnings.simplefilter("ignore", RuntimeWarning)
        return write_geopackage(path, result_layers(**kw), CRS, overwrite=True)
