"""The report's regional-curves section: a log–log plot per variable (bankfull
width, depth, area, discharge against drainage area) and the table of fits, drawn
from the ``regional_fits`` and ``reaches`` layers alone.

Each plot shows the reaches that entered the fit, coloured by the share of their
transects with a trusted bankfull pick (the reach's confidence); the run's fit
y = a·A^b; its 95 % band of the median curve and 95 % prediction band, from the
closed form stored in ``regional_fits`` (:mod:`reachgauge.regional.curves`); and
the published curves over their valid ranges.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from reachgauge.results.report_figures import (FLOW_STYLES, INK, _f, _legend, _new_figure, _num,
                                               _png, colour_map)
from reachgauge.results.report_page import _e, _figure_html, _table

# variable -> (reaches field, axis title)
PLOTTED = {"width": ("top_width", "bankfull top width"),
           "depth": ("bankfull_depth", "bankfull depth"),
           "area": ("flow_area", "bankfull flow area"),
           "discharge": ("discharge", "bankfull discharge")}
FIT, BAND_MEAN, BAND_OBS = "#1f3b57", "#8fb3d1", "#dbe6ef"


def band(row, area, k: float):
    """(centre, lower, upper) of a fit row at ``area``: the formula of the
    ``regional_fits`` table, k = 0 for the band of the median curve, 1 for the
    prediction band."""
    x = np.log(area)
    centre = np.log(_f(row.coefficient)) + _f(row.exponent) * x
    half = _f(row.t_quantile) * _f(row.std_error) * np.sqrt(
        k + 1.0 / _f(row.n_reaches) + (x - _f(row.log_area_mean)) ** 2 / _f(row.log_area_ss))
    return np.exp(centre), np.exp(centre - half), np.exp(centre + half)


def regional_section(lay: dict, info) -> str:
    """The HTML section ('' when the result has no regional fits)."""
    fits = lay.get("regional_fits")
    if fits is None or not len(fits):
        return ""
    rows = []
    for r in fits.itertuples(index=False):
        unit = info.unit("reaches", PLOTTED.get(r.variable, ("", ""))[0]) if r.variable in PLOTTED \
            else ""
        formula = (f"{_num(r.coefficient)}·A<sup>{_num(r.exponent)}</sup>"
                   if np.isfinite(_f(r.coefficient)) else "—")
        rows.append(f"<tr><td>{_e(r.curve)}</td><td>{_e(r.variable)} ({_e(unit)})</td>"
                    f"<td>{formula}</td><td>{_num(r.r_squared)}</td><td>{_num(r.std_error)}</td>"
                    f"<td>{_num(r.n_reaches)}</td><td>{_e(_left(r))}</td>"
                    f"<td>{_e(r.status)}</td></tr>")
    area_unit = info.unit("regional_fits", "area_min")
    table = _table(["curve", "variable", f"y = a·A^b (A in {_e(area_unit)})", "R²",
                    "std. error (ln)", "reaches", "left out", "status"], rows, "small")
    figs = "".join(_figure_html(_plot(lay["reaches"], fits, v, info), f"regional curve of {v}")
                   for v in PLOTTED)
    few = int(np.nanmax(pd.to_numeric(fits["n_reaches"], errors="coerce").fillna(0)))
    note = ("<p class='note'>Few reaches: with n reaches the bands use Student's t with n − 2 "
            "degrees of freedom and widen quickly; read the fit as a check, not a regional "
            "study.</p>" if few < 10 else "")
    return ('<section class="panel" id="regional"><h2>Regional curves</h2>'
            "<p>Bankfull figures of the reaches with trusted picks against drainage area, "
            "fitted as y = a·A<sup>b</sup> by least squares on logarithms; bands at 95 %. "
            "The fitted line is the median of y at A.</p>"
            f"{note}{table}<div class='figs'>{figs}</div></section>")


def _left(r) -> str:
    n = _f(r.left_out)
    if not np.isfinite(n) or n == 0:
        return "" if r.source != "run" else "none"
    return f"{int(n)}: {r.left_out_why}"


def _plot(reaches: pd.DataFrame, fits: pd.DataFrame, var: str, info) -> str:
    field, title = PLOTTED[var]
    fig = _new_figure(5.0, 3.9, dict(left=0.14, right=0.88, bottom=0.13, top=0.91))
    ax = fig.add_subplot()
    a = pd.to_numeric(reaches["drainage_area"], errors="coerce").to_numpy(float)
    y = pd.to_numeric(reaches[field], errors="coerce").to_numpy(float)
    with np.errstate(invalid="ignore", divide="ignore"):
        share = (pd.to_numeric(reaches["transects_trusted"], errors="coerce")
                 / pd.to_numeric(reaches["transects"], errors="coerce")).to_numpy(float)
        use = (reaches["status"].to_numpy(object) == "ok") & (a > 0) & (y > 0)
    own = fits[(fits["source"] == "run") & (fits["variable"] == var)]
    lo_hi = [a[use].min(), a[use].max()] if use.any() else []
    pub = fits[(fits["source"] == "published") & (fits["variable"] == var)]
    for r in pub.itertuples(index=False):
        lo_hi += [_f(r.area_min) or np.nan, _f(r.area_max)]
    lo_hi = [v for v in lo_hi if np.isfinite(v) and v > 0]
    if lo_hi:
        grid = np.geomspace(min(lo_hi) / 1.3, max(lo_hi) * 1.3, 120)
        for r in own.itertuples(index=False):
            if np.isfinite(_f(r.coefficient)):
                c, lo, hi = band(r, grid, 1.0)
                ax.fill_between(grid, lo, hi, color=BAND_OBS, lw=0, label="95 % prediction band")
                _c, lo, hi = band(r, grid, 0.0)
                ax.fill_between(grid, lo, hi, color=BAND_MEAN, lw=0, alpha=0.8,
                                label="95 % band of the fit")
                ax.plot(grid, c, color=FIT, lw=2.0, label=f"fit: {_num(r.coefficient)}·A^"
                        f"{_num(r.exponent)}")
        for j, r in enumerate(pub.itertuples(index=False)):
            g = grid[(grid >= _f(r.area_min)) & (grid <= _f(r.area_max))]
            g = np.geomspace(max(_f(r.area_min), grid[0]), min(_f(r.area_max), grid[-1]), 60) \
                if len(g) else g
            colour, dash = FLOW_STYLES[j % len(FLOW_STYLES)]
            ax.plot(g, _f(r.coefficient) * g ** _f(r.exponent), color=colour, ls=dash, lw=1.4,
                    label=f"{r.curve} (published)")
    if use.any():
        pts = ax.scatter(a[use], y[use], c=share[use], cmap=colour_map(), vmin=0.5, vmax=1.0,
                         edgecolors=INK, linewidths=0.6, s=36, zorder=5)
        cb = fig.colorbar(pts, ax=ax, fraction=0.05, pad=0.02)
        cb.set_label("share of transects trusted", fontsize=7)
        cb.ax.tick_params(labelsize=7)
        for x, v, rid in zip(a[use], y[use], reaches["reach_id"].to_numpy(object)[use]):
            ax.annotate(str(rid), (x, v), xytext=(4, -8), textcoords="offset points",
                        fontsize=6.5, color=INK, annotation_clip=True)
    else:
        ax.text(0.5, 0.5, "no reach with a trusted figure and a drainage area",
                transform=ax.transAxes, ha="center", fontsize=8)
    _log_axes(ax)
    ax.set_xlabel(info.head("reaches", "drainage_area", "drainage area"))
    ax.set_ylabel(info.head("reaches", field, title))
    ax.set_title(var, fontsize=10, loc="left")
    ax.grid(color="#e6dfd3", lw=0.6, which="both")
    if ax.get_legend_handles_labels()[0]:
        _legend(ax, loc="upper left")
    return _png(fig)


def _log_axes(ax) -> None:
    """Both axes logarithmic, labelled at 1, 2 and 5 × 10^k in plain numbers (a
    bankfull depth spans less than a decade: powers of ten alone leave it bare)."""
    from matplotlib.ticker import FuncFormatter, LogLocator, NullFormatter

    ax.set_xscale("log")
    ax.set_yscale("log")
    for axis in (ax.xaxis, ax.yaxis):
        axis.set_major_locator(LogLocator(base=10.0, subs=(1.0, 2.0, 5.0)))
        axis.set_major_formatter(FuncFormatter(lambda v, _pos: _num(v)))
        axis.set_minor_formatter(NullFormatter())
    ax.tick_params(labelsize=8)
