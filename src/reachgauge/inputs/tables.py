"""Reading the run's CSV inputs (an input edge): design flows, observations,
Cowan terms, and the land-cover class-to-n table.

Each reader checks columns and values and raises :class:`InputError` naming the
file, the line and the fix. Values are converted to SI (m, m³/s) when the run's
units are ``"us"``.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd

from reachgauge.errors import InputError
from reachgauge.manning import FOOT

DESIGN_COLUMNS = ("reach_id", "flow", "discharge")
OBS_COLUMNS = ("reach_id", "discharge")
COWAN_COLUMNS = ("reach_id", "base", "irregularity", "variation", "obstruction", "vegetation",
                 "meander")
CLASS_COLUMNS = ("class", "n")


def _read(path, required, what) -> pd.DataFrame:
    p = Path(path)
    if not p.is_file():
        raise InputError(f"{what} file {str(p)!r} does not exist", "check the path")
    try:
        df = pd.read_csv(p, comment="#", skipinitialspace=True)
    except (pd.errors.ParserError, pd.errors.EmptyDataError, UnicodeDecodeError) as exc:
        raise InputError(f"cannot read {p.name} as CSV ({str(exc).splitlines()[0]})",
                         "save it as comma-separated text with a header row") from None
    df.columns = [str(c).strip().lower() for c in df.columns]
    missing = [c for c in required if c not in df.columns]
    if missing:
        raise InputError(f"{p.name} lacks column(s) {', '.join(missing)} (it has "
                         f"{', '.join(df.columns)})",
                         f"the {what} file needs columns {', '.join(required)}")
    return df


def _numbers(df, col, name, *, positive=False, nonneg=False, optional=False):
    v = pd.to_numeric(df[col], errors="coerce")
    bad = v.isna() if not optional else (v.isna() & df[col].notna())
    if positive:
        bad |= v <= 0
    if nonneg:
        bad |= v < 0
    if bad.any():
        i = int(np.argmax(bad.to_numpy()))
        need = "a number greater than 0" if positive else ("a number of 0 or more" if nonneg
                                                            else "a number")
        raise InputError(f"{name} line {i + 2}: {col} {df[col].iloc[i]!r} is not {need}",
                         "fix or remove that row")
    return v.to_numpy(float)


def read_design_flows(path, units="si") -> dict[str, dict[str, float]]:
    """``reach_id, flow, discharge`` → {reach_id: {flow: discharge m³/s}}."""
    df = _read(path, DESIGN_COLUMNS, "design-flow")
    name = Path(path).name
    q = _numbers(df, "discharge", name, nonneg=True) * (FOOT ** 3 if units == "us" else 1.0)
    out: dict[str, dict[str, float]] = {}
    for rid, flow, val in zip(df["reach_id"].astype(str), df["flow"].astype(str), q):
        if flow in out.setdefault(rid, {}):
            raise InputError(f"{name}: flow {flow!r} is given twice for reach {rid!r}",
                             "keep one row per reach and flow")
        out[rid][flow] = float(val)
    return out


def read_observations(path, units="si") -> pd.DataFrame:
    """Measured flows: ``reach_id``, ``chainage`` or ``x`` and ``y``, ``stage`` or
    ``depth``, ``discharge``. Returns SI values with the columns
    reach_id, chainage, x, y, stage, depth, discharge (NaN where not given)."""
    df = _read(path, OBS_COLUMNS, "observations")
    name = Path(path).name
    f = FOOT if units == "us" else 1.0
    has_ch = "chainage" in df.columns
    has_xy = "x" in df.columns and "y" in df.columns
    if not (has_ch or has_xy):
        raise InputError(f"{name} needs a chainage column or x and y columns",
                         "say where along the reach each flow was measured")
    if "stage" not in df.columns and "depth" not in df.columns:
        raise InputError(f"{name} needs a stage or a depth column",
                         "give the measured water-surface elevation or depth")
    out = pd.DataFrame({"reach_id": df["reach_id"].astype(str)})
    out["chainage"] = _numbers(df, "chainage", name, nonneg=True, optional=True) * f if has_ch \
        else np.nan
    for c in ("x", "y"):
        out[c] = _numbers(df, c, name, optional=True) if has_xy else np.nan
    out["stage"] = _numbers(df, "stage", name, optional=True) * f if "stage" in df.columns \
        else np.nan
    out["depth"] = _numbers(df, "depth", name, positive=True, optional=True) * f \
        if "depth" in df.columns else np.nan
    out["discharge"] = _numbers(df, "discharge", name, positive=True) * f ** 3
    where = out["chainage"].notna() | (out["x"].notna() & out["y"].notna())
    level = out["stage"].notna() | out["depth"].notna()
    bad = ~(where & level)
    if bad.any():
        i = int(np.argmax(bad.to_numpy()))
        raise InputError(f"{name} line {i + 2}: needs a chainage (or x and y) and a stage (or depth)",
                         "fill in that row")
    return out


def read_cowan(path) -> dict[str, dict[str, float]]:
    """Cowan's method terms per reach (Arcement & Schneider 1989): {reach_id: terms}."""
    df = _read(path, COWAN_COLUMNS, "Cowan")
    name = Path(path).name
    cols = {c: _numbers(df, c, name, nonneg=True) for c in COWAN_COLUMNS[1:]}
    return {rid: {c: float(cols[c][i]) for c in cols}
            for i, rid in enumerate(df["reach_id"].astype(str))}


def read_class_table(path) -> dict[int, float]:
    """Land-cover ``class, n`` (other columns, e.g. ``name``, are kept out) → {class: n}."""
    df = _read(path, CLASS_COLUMNS, "land-cover table")
    name = Path(path).name
    cls = _numbers(df, "class", name)
    n = _numbers(df, "n", name, positive=True)
    if np.any(cls != np.round(cls)):
        raise InputError(f"{name}: land-cover classes must be whole numbers", "fix the class column")
    if len(set(cls)) != len(cls):
        raise InputError(f"{name}: a land-cover class is listed twice", "keep one row per class")
    return {int(c): float(v) for c, v in zip(cls, n)}
