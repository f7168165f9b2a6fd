"""The run-level regional curves: from the reach rows of a computed run to the
``regional_fits`` and ``curve_ratios`` tables and the regional fields of
``reaches`` (:mod:`reachgauge.results.schema`).

Runs after every reach is computed and before the GeoPackage is assembled, from
the reach rows the run keeps in its headers (SI: m, m², m³/s, km²); nothing is
read back from the reaches' parts.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from reachgauge.hydraulics.bankfull.regional import SQ_MILE_KM2
from reachgauge.manning import FOOT
from reachgauge.regional.curves import (LENGTH_POWER, VARIABLES, PowerFit, curve_ratio, fit_power,
                                        outside_band)

OUTLIER_FLAG = "regional-outlier"


@dataclass
class RegionalResult:
    """The regional curves of a run (SI): one :class:`PowerFit` per variable, the
    published curves (SI, as :func:`reachgauge.regional.published.read_curves`
    gives them), the two tables, and {reach_id: {field: value}} of the regional
    fields of ``reaches``."""

    fits: dict
    curves: pd.DataFrame | None
    regional_fits: pd.DataFrame
    curve_ratios: pd.DataFrame
    reach_fields: dict = field(default_factory=dict)

    def tables(self, units: str) -> dict:
        """The two tables in ``units``, in schema order and storage types."""
        from reachgauge.results import layers, schema

        fits = self.regional_fits.copy()
        if units == "us":
            # a·A^b in ft and mi²: a_us = a_si·2.589988110336^b / 0.3048^k; ln A shifts by ln(mi²/km²)
            k = fits["variable"].map(LENGTH_POWER).to_numpy(float)
            fits["coefficient"] = fits["coefficient"] * SQ_MILE_KM2 ** fits["exponent"] / FOOT ** k
            fits["log_area_mean"] = fits["log_area_mean"] - np.log(SQ_MILE_KM2)
        out = {}
        for name, frame in (("regional_fits", fits), ("curve_ratios", self.curve_ratios)):
            f = schema.LAYERS[name]
            frame = frame if len(frame.columns) else schema.empty_frame(f)
            out[name] = layers.typed(schema.column_order(schema.to_units(frame, f, units), f), f)
        return out


def _columns(rows: list[dict]):
    ids = np.array([str(r.get("reach_id", "")) for r in rows], dtype=object)
    status = np.array([str(r.get("status", "")) for r in rows], dtype=object)
    area = np.array([_num(r.get("drainage_area")) for r in rows], dtype=float)
    values = {v: np.array([_num(r.get(key)) for r in rows], dtype=float)
              for v, key in VARIABLES.items()}
    return ids, status, area, values


def _num(v) -> float:
    try:
        return float(v)
    except (TypeError, ValueError):
        return float("nan")


def regional_curves(rows: list[dict], curves: pd.DataFrame | None = None) -> RegionalResult:
    """Fit every variable over the reach rows ``rows`` (SI) and compare each reach
    with the fits and the published ``curves`` (SI)."""
    ids, status, area, values = _columns(rows)
    fits, fit_rows, ratio_rows = {}, [], []
    outside = {v: np.zeros(ids.size, bool) for v in VARIABLES}
    for var, val in values.items():
        fit = fits[var] = fit_power(var, area, val, status)
        outside[var] = outside_band(fit, area, val)
        fit_rows.append(_fit_row(fit, int(outside[var].sum())))
        if fit.fitted:
            ratio, inside = curve_ratio(area, val, fit.coefficient, fit.exponent,
                                        fit.area_min, fit.area_max)
            ratio_rows.append(_ratios(ids, area, val, status, "run", "fit", var, ratio, inside,
                                      outside[var]))
    for c in ([] if curves is None else curves.itertuples(index=False)):
        val = values[c.variable]
        ratio, inside = curve_ratio(area, val, c.coefficient, c.exponent, c.area_min, c.area_max)
        ratio_rows.append(_ratios(ids, area, val, status, "published", c.name, c.variable,
                                  ratio, inside, None))
        fit_rows.append({"source": "published", "curve": c.name, "variable": c.variable,
                         "status": f"published curve, given as {c.given}",
                         "n_reaches": int(np.isfinite(ratio).sum()),
                         "coefficient": c.coefficient, "exponent": c.exponent,
                         "area_min": c.area_min, "area_max": c.area_max})
    reach_fields = {}
    for i, rid in enumerate(ids):
        out = [v for v in VARIABLES if outside[v][i]]
        reach_fields[rid] = {"regional_flags": OUTLIER_FLAG if out else "",
                             "regional_outside": ";".join(out)}
    ratios = pd.concat(ratio_rows, ignore_index=True) if ratio_rows else pd.DataFrame()
    return RegionalResult(fits, curves, pd.DataFrame(fit_rows), ratios, reach_fields)


def _fit_row(fit: PowerFit, outside: int) -> dict:
    line = fit.line
    nan = float("nan")
    return {"source": "run", "curve": "fit", "variable": fit.variable,
            "status": "fitted" if fit.fitted else fit.why, "n_reaches": fit.n_reaches,
            "left_out": int(sum(fit.left_out.values())), "left_out_why": fit.left_out_text(),
            "coefficient": fit.coefficient, "exponent": fit.exponent,
            "r_squared": fit.r_squared, "std_error": fit.std_error,
            "area_min": fit.area_min, "area_max": fit.area_max,
            "log_area_mean": line.x_mean if line else nan,
            "log_area_ss": line.x_ss if line else nan, "t_quantile": line.t if line else nan,
            "outside": outside if line else 0}


def _ratios(ids, area, val, status, source, curve, var, ratio, inside, outside) -> pd.DataFrame:
    """Rows of the reaches compared with one curve: those with status ok, a figure
    and a drainage area (in range or not)."""
    with np.errstate(invalid="ignore"):
        has = (status == "ok") & np.isfinite(val) & (val > 0) & np.isfinite(area) & (area > 0)
    return pd.DataFrame({
        "reach_id": ids[has], "source": source, "curve": curve, "variable": var,
        "drainage_area": area[has], "ratio": ratio[has], "in_range": inside[has],
        "outside_band": outside[has] if outside is not None else np.full(int(has.sum()), np.nan),
    })

