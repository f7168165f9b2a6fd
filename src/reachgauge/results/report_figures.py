"""The report's figures: matplotlib on free-standing Agg figures, each returned as
a base64 PNG ``data:`` URI, in a palette and layout of our own.

Split from :mod:`reachgauge.report` (which builds the HTML) so each reads in one
sitting; the map, whose caption is HTML, stays there.
"""

from __future__ import annotations

import base64
import io
import math

import numpy as np
import pandas as pd


# Sequential palette of our own ("sand to plum"): CIE L* falls steadily, 7 to 10.5 a
# step from 87 to 14, so order reads without hue and survives any colour-vision
# deficiency; the lightest stop stays visible on the white map.
PALETTE = ("#f0d9a0", "#e8c283", "#dca86e", "#cc8c62", "#b3715f", "#925a64", "#6c4468", "#442f61",
           "#251d4a")
NO_VALUE = "#b9b3a8"     # transects without a value of the colour field
INK = "#23201c"
GROUND, EARTH = "#5a4a3a", "#ece3d3"
WATER, WATER_EDGE = "#9ccbea", "#2c6fa6"
RAW, CARVED = "#b7ab98", "#4a3b2e"
FAINT = "#8fa9bd"
# design flows: distinct dashes as well as colours, so they part without colour
FLOW_STYLES = (("#b4471c", (0, (6, 2))), ("#6b3fa0", (0, (6, 2, 1, 2))),
               ("#1d7368", (0, (1.5, 1.5))), ("#8a6a12", (0, (10, 2, 2, 2, 2, 2))))
DPI = 110


def _num(v, places: int | None = None, sig: int = 3) -> str:
    """A number for a table: fixed ``places`` decimals, else ``sig`` significant
    digits; thousands separated; '–' for missing."""
    try:
        x = float(v)
    except (TypeError, ValueError):
        return "–"
    if not math.isfinite(x):
        return "–"
    if places is not None:
        return f"{x:,.{places}f}"
    if abs(x) >= 10 ** sig:
        return f"{x:,.0f}"
    return f"{x:.{sig}g}"


def _f(v) -> float:
    try:
        return float(v)
    except (TypeError, ValueError):
        return float("nan")


def _truthy(v) -> bool:
    if isinstance(v, str):
        return v.strip().lower() in ("1", "true", "yes")
    try:
        return bool(v) and not (isinstance(v, float) and math.isnan(v))
    except (TypeError, ValueError):
        return False


def _mc_band(r) -> str:
    """The reach median's 10th-90th percentile over the uncertainty draws, if made."""
    lo, hi = _f(r.discharge_p10), _f(r.discharge_p90)
    return f"; uncertainty p10–p90 {_num(lo)}–{_num(hi)}" if np.isfinite(lo + hi) else ""


def _mc_share(d) -> str:
    """The share of uncertainty draws in which a design flow leaves the channel, if made."""
    p = _f(getattr(d, "p_out_of_bank", np.nan))
    return f" ({_num(100 * p, 0)} % of draws)" if np.isfinite(p) else ""


def _drainage(r, unit: str) -> str:
    """The reach's drainage area, where it came from and its flag, as report text."""
    from reachgauge.flags import FLAGS
    from reachgauge.results.report_page import _codes, _e

    a = _f(getattr(r, "drainage_area", np.nan))
    if not np.isfinite(a):
        return "not known (give --drainage-area or --drainage-area-field)"
    src = _e(getattr(r, "drainage_source", "") or "")
    flags = _codes(getattr(r, "drainage_flags", "") or "", FLAGS)
    return f"{_num(a)} {unit}" + (f" (from the {src})" if src else "") + (f" {flags}" if flags else "")


def _new_figure(width: float, height: float, margins: dict | None = None):
    """A figure on an Agg canvas. With ``margins`` (subplot parameters in
    figure fractions) the layout is fixed, which is several times faster to
    draw than the constrained layout used otherwise."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    fig = Figure(figsize=(width, height), layout=None if margins else "constrained")
    if margins:
        fig.subplots_adjust(**margins)
    FigureCanvasAgg(fig)
    return fig


def _png(fig) -> str:
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=DPI, metadata={"Software": None}, facecolor="white")
    return "data:image/png;base64," + base64.b64encode(buf.getvalue()).decode("ascii")


def colour_map():
    """The report's sequential colour map (:data:`PALETTE`, light to dark)."""
    from matplotlib.colors import LinearSegmentedColormap

    return LinearSegmentedColormap.from_list("reachgauge_sand_plum", PALETTE).with_extremes(
        bad=NO_VALUE)


def _profile_png(prof: pd.DataFrame, tr: pd.DataFrame, info, rid: str) -> str:
    prof = prof.sort_values("chainage")
    ch = prof["chainage"].to_numpy(float)
    fig = _new_figure(9.5, 3.2, dict(left=0.08, right=0.985, bottom=0.15, top=0.9))
    ax = fig.add_subplot()
    ax.plot(ch, prof["z_raw"].to_numpy(float), color=RAW, lw=1.0, label="thalweg as sampled")
    ax.plot(ch, prof["z_carved"].to_numpy(float), color=CARVED, lw=2.0, label="thalweg carved")
    used = prof["z_used"].to_numpy(float)
    if not np.allclose(used, prof["z_carved"].to_numpy(float), equal_nan=True):
        ax.plot(ch, used, color=CARVED, lw=1.0, ls=(0, (1, 1.5)), label="slope fitted to")
    conf = tr["confidence"].to_numpy(str)
    if "bankfull_stage_p10" in tr and np.isfinite(tr["bankfull_stage_p10"].to_numpy(float)).any():
        ax.vlines(tr["chainage"].to_numpy(float), tr["bankfull_stage_p10"].to_numpy(float),
                  tr["bankfull_stage_p90"].to_numpy(float), color=WATER_EDGE, lw=1.0, alpha=0.6,
                  label="bankfull stage, 10th-90th percentile")
    for low, style in ((False, dict(facecolors=WATER_EDGE)), (True, dict(facecolors="white"))):
        sel = (conf == "low") == low
        if sel.any():
            ax.scatter(tr["chainage"].to_numpy(float)[sel],
                       tr["bankfull_stage"].to_numpy(float)[sel], s=22, marker="v",
                       edgecolors=WATER_EDGE, linewidths=1.0, zorder=3,
                       label="bankfull stage (low confidence)" if low else "bankfull stage",
                       **style)
    ax.set_xlabel(info.head("profile", "chainage", "chainage from upstream end"))
    ax.set_ylabel(info.head("profile", "z_raw", "elevation"))
    ax.set_title(f"reach {rid}", fontsize=10, loc="left", parse_math=False)
    ax.grid(color="#e6dfd3", lw=0.6)
    ax.legend(fontsize=8, frameon=True, framealpha=0.85, ncols=2, loc="best")
    return _png(fig)


def _sections_png(samples: pd.DataFrame, tr: pd.DataFrame, design: pd.DataFrame,
                  info) -> str:
    stations = sorted(pd.unique(samples["station"]))[:4]
    cols = 2 if len(stations) > 1 else 1
    rows = (len(stations) + 1) // 2
    h = 3.0 * rows
    fig = _new_figure(9.5 if cols == 2 else 5.5, h,
                      dict(left=0.075 * (2 if cols == 1 else 1), right=0.985, wspace=0.22,
                           bottom=0.42 / h, top=1 - 0.62 / h, hspace=0.75 / 3.0))
    tr_by = tr.set_index(tr["station"].astype(int))
    des = design[design["station"] >= 0]
    flows = list(pd.unique(design["flow"]))
    for k, s in enumerate(stations):
        ax = fig.add_subplot(rows, cols, k + 1)
        g = samples[samples["station"] == s].sort_values("offset")
        x, z = g["offset"].to_numpy(float), g["elevation"].to_numpy(float)
        bottom = np.nanmin(z) - 0.15 * max(np.nanmax(z) - np.nanmin(z), 1e-3)
        ax.fill_between(x, z, bottom, color=EARTH, lw=0)
        ax.plot(x, z, color=GROUND, lw=1.4)
        t = tr_by.loc[int(s)] if int(s) in tr_by.index else None
        stage = _f(t["bankfull_stage"]) if t is not None else float("nan")
        if np.isfinite(stage):
            bl, br = _f(t["bank_left"]), _f(t["bank_right"])
            inside = ((x >= bl) & (x <= br)) if np.isfinite(bl) and np.isfinite(br) \
                else np.ones_like(x, bool)
            ax.fill_between(x, z, stage, where=inside & (z < stage), interpolate=True, color=WATER,
                            lw=0)
            ax.plot([bl, br], [stage, stage], color=WATER_EDGE, lw=1.0)
            ax.plot([bl, br], [stage, stage], ls="none", marker="v", ms=7, color=WATER_EDGE)
        mine = des[des["station"] == s]
        beyond = []
        for j, flow in enumerate(flows):
            d = mine[mine["flow"] == flow]
            fs = _f(d["stage"].iloc[0]) if len(d) else float("nan")
            if np.isfinite(fs):
                c, dash = FLOW_STYLES[j % len(FLOW_STYLES)]
                ax.axhline(fs, color=c, ls=dash, lw=1.3)
            elif len(d) and _truthy(d["over_profile"].iloc[0]):
                beyond.append(str(flow))
        if beyond:  # no stage to draw: the flow overtops the ends of the transect
            ax.text(0.99, 0.97, "over the profile: " + ", ".join(beyond), transform=ax.transAxes,
                    ha="right", va="top", fontsize=7, color=FLOW_STYLES[0][0], parse_math=False,
                    bbox=dict(boxstyle="round,pad=0.2", fc="white", ec="none", alpha=0.85))
        ch = _num(t["chainage"], 1) if t is not None else "–"
        ax.set_title(f"station {int(s)} · chainage {ch} {info.unit('transects', 'chainage')}",
                     fontsize=9, loc="left", parse_math=False)
        ax.set_xlabel(info.head("sample_sections", "offset", "offset from left end"), fontsize=8)
        ax.set_ylabel(info.head("sample_sections", "elevation", "elevation"), fontsize=8)
        ax.tick_params(labelsize=7.5)
        ax.set_ylim(bottom=bottom)
        ax.grid(color="#eee7dc", lw=0.5)
    # one key for all sections, above them, where it hides no ground
    handles = _section_key(flows)
    leg = fig.legend(handles=handles, loc="upper center", ncol=min(len(handles), 7), fontsize=7.5,
                     frameon=False)
    for text in leg.get_texts():
        text.set_parse_math(False)
    return _png(fig)


def _section_key(flows) -> list:
    """Legend entries for every section of a reach, so that a flow drawn only on
    a later section is still named."""
    from matplotlib.lines import Line2D
    from matplotlib.patches import Patch

    keys = [Line2D([], [], color=GROUND, lw=1.4, label="ground"),
            Patch(color=WATER, label="bankfull"),
            Line2D([], [], color=WATER_EDGE, ls="none", marker="v", ms=7, label="bank")]
    for j, flow in enumerate(flows):
        c, dash = FLOW_STYLES[j % len(FLOW_STYLES)]
        keys.append(Line2D([], [], color=c, ls=dash, lw=1.3, label=str(flow)))
    return keys


def _legend(ax, handles=None, loc: str = "best") -> None:
    # user flow names go into a legend: keep matplotlib from reading '$' as mathtext
    leg = ax.legend(handles=handles, fontsize=7, frameon=True, framealpha=0.85, loc=loc)
    for text in leg.get_texts():
        text.set_parse_math(False)


def _band(ax, med: pd.DataFrame) -> None:
    """The reach curve's 10th-90th percentile band over the uncertainty draws, where
    the run made them (``--uncertainty``)."""
    lo, hi = (med[c].to_numpy(float) if c in med else np.full(len(med), np.nan)
              for c in ("discharge_p10", "discharge_p90"))
    ok = np.isfinite(lo) & np.isfinite(hi)
    if ok.any():
        ax.fill_betweenx(med["depth"].to_numpy(float)[ok], lo[ok], hi[ok], color=WATER,
                         alpha=0.55, lw=0, label="reach median, 10th-90th percentile")


def rating_limits(med: pd.DataFrame, flows, bankfull_q: float, margin: float = 1.3):
    """(discharge, depth) upper limits of a rating figure: ``margin`` × the largest of
    the design flows and the bankfull discharge, and the depth at which the reach's
    median curve carries that discharge (interpolated; its top where it carries less),
    so the figure shows the flows the reader asked about, not the curve's whole range.
    (None, None) when there is nothing to fit to."""
    qs = [float(q) for q in list(flows) + [bankfull_q] if q is not None and np.isfinite(q)]
    if not qs or max(qs) <= 0:
        return None, None
    q_max = margin * max(qs)
    q, d = med["discharge"].to_numpy(float), med["depth"].to_numpy(float)
    ok = np.isfinite(q) & np.isfinite(d)
    if not ok.any():
        return q_max, None
    q, d = q[ok], d[ok]
    order = np.argsort(d)
    q, d = np.maximum.accumulate(q[order]), d[order]   # a rating rises with depth
    depth = float(np.interp(q_max, q, d)) if q_max <= q[-1] else float(d[-1])
    return q_max, depth * 1.05


def _rating_png(rating: pd.DataFrame, design: pd.DataFrame, r, info) -> str:
    from matplotlib.collections import LineCollection

    fig = _new_figure(6.4, 3.8, dict(left=0.12, right=0.97, bottom=0.13, top=0.92))
    ax = fig.add_subplot()
    per = rating[rating["station"] >= 0].sort_values(["station", "depth"])
    if len(per):
        xy = per[["discharge", "depth"]].to_numpy(float)
        st = per["station"].to_numpy()
        ax.add_collection(LineCollection(np.split(xy, np.flatnonzero(np.diff(st)) + 1),
                                         colors=FAINT, linewidths=0.8, alpha=0.45,
                                         label="transects"))
    med = rating[rating["station"] == -1].sort_values("depth")
    if len(med):
        _band(ax, med)
        ax.plot(med["discharge"].to_numpy(float), med["depth"].to_numpy(float), color="#1f3b57",
                lw=2.4, label="reach median")
    if np.isfinite(_f(r.discharge)) and np.isfinite(_f(r.bankfull_depth)):
        lo, hi = _f(getattr(r, "discharge_p10", np.nan)), _f(getattr(r, "discharge_p90", np.nan))
        err = ([[_f(r.discharge) - lo], [hi - _f(r.discharge)]]
               if np.isfinite(lo) and np.isfinite(hi) else None)
        ax.errorbar([_f(r.discharge)], [_f(r.bankfull_depth)], xerr=err, marker="D", ms=6,
                    color=WATER_EDGE, ls="none", capsize=3, label="median bankfull")
    flows = design.drop_duplicates("flow")
    for j, d in enumerate(flows.itertuples(index=False)):
        q = _f(d.discharge)
        if np.isfinite(q):
            c, dash = FLOW_STYLES[j % len(FLOW_STYLES)]
            ax.axvline(q, color=c, ls=dash, lw=1.3, label=str(d.flow))
    ax.autoscale_view()
    q_top, d_top = rating_limits(med, flows["discharge"].to_numpy(float) if len(flows) else [],
                                 max(_f(r.discharge), _f(getattr(r, "discharge_p90", np.nan)),
                                     key=lambda v: v if np.isfinite(v) else -np.inf))
    ax.set_xlim(0, q_top)
    ax.set_ylim(0, d_top)
    ax.set_xlabel(info.head("rating_curves", "discharge", "discharge"))
    ax.set_ylabel(info.head("rating_curves", "depth", "depth above thalweg"))
    ax.set_title(f"reach {r.reach_id}", fontsize=10, loc="left", parse_math=False)
    ax.grid(color="#e6dfd3", lw=0.6)
    _legend(ax, loc="lower right")
    return _png(fig)
