"""Reading the run's CSV inputs (an input edge): design flows, observations,
Cowan terms, and the land-cover class-to-n table.

Each reader checks columns and values and raises :class:`InputError` naming the
file, the line and the fix.

Units. A CSV that holds lengths or flows (design flows, observations, a
surveyed profile) states its unit system in a comment line before the header::

    # units: us

(``si``: m and m³/s; ``us``: ft and ft³/s; ``=`` works as well as ``:``). Its
values are read in that system whatever the run's ``--units``. A file that
states none is read as SI when the run is SI, and is an error when the run is
in US units, so a metric file is never silently read as feet. Values come back
in SI.
"""

from __future__ import annotations

import io
import re
from pathlib import Path

import numpy as np
import pandas as pd

from reachgauge.errors import InputError, shown
from reachgauge.manning import FOOT

DESIGN_COLUMNS = ("reach_id", "flow", "discharge")
OBS_COLUMNS = ("reach_id", "discharge")
COWAN_COLUMNS = ("reach_id", "base", "irregularity", "variation", "obstruction", "vegetation",
                 "meander")
CLASS_COLUMNS = ("class", "n")


UNITS_LINE = re.compile(r"^\s*#\s*units\s*[:=]\s*(\S+)\s*$", re.IGNORECASE)


def stated_units(path) -> str | None:
    """The unit system a CSV states in a ``# units: si|us`` comment line above
    its header, or None. Any other value is an :class:`InputError`."""
    p = Path(path)
    for line in _text(p).splitlines():
        if not line.strip():
            continue
        if not line.lstrip().startswith("#"):
            return None   # the header: no statement above it
        m = UNITS_LINE.match(line)
        if m:
            u = m.group(1).strip("'\"").lower()
            if u not in ("si", "us"):
                raise InputError(f"{p.name} states units {m.group(1)!r}",
                                 "write '# units: si' (m, m³/s) or '# units: us' (ft, ft³/s)")
            return u
    return None


def file_units(path, run_units: str, holds: str) -> str:
    """The unit system to read ``path`` in: the one it states; SI when it states
    none and the run is SI; an error when it states none and the run is US."""
    u = stated_units(path)
    if u is None and run_units != "si":
        name = Path(path).name
        raise InputError(
            f"{name} does not state the unit of its {holds}, and this run is in US units "
            "(--units us)",
            f"add the line '# units: us' above the header of {name} if its values are in ft "
            "and ft³/s, or '# units: si' if they are in m and m³/s")
    return u or "si"


def _text(p: Path) -> str:
    try:
        return p.read_text(encoding="utf-8-sig")
    except UnicodeDecodeError:
        raise InputError(f"cannot read {p.name} as text (it is not UTF-8)",
                         "save it as comma-separated UTF-8 text with a header row") from None
    except OSError as exc:
        raise InputError(f"cannot read {p.name} ({exc.strerror})", "check the file") from None


def _data_lines(text: str) -> list[int]:
    """File line numbers (1-based) of the data rows: not blank, not a comment,
    after the header."""
    rows = [k + 1 for k, line in enumerate(text.splitlines())
            if line.strip() and not line.lstrip().startswith("#")]
    return rows[1:]


def _read(path, required, what) -> pd.DataFrame:
    p = Path(path)
    if p.is_dir():
        raise InputError(f"{what} file {str(p)!r} is a folder", "give the CSV file itself")
    if not p.is_file():
        raise InputError(f"{what} file {str(p)!r} does not exist", "check the path")
    text = _text(p)
    try:
        df = pd.read_csv(io.StringIO(text), comment="#", skipinitialspace=True)
    except (pd.errors.ParserError, pd.errors.EmptyDataError) as exc:
        raise InputError(f"cannot read {p.name} as CSV ({str(exc).splitlines()[0]})",
                         "save it as comma-separated text with a header row") from None
    lines = _data_lines(text)
    df.attrs["lines"] = lines if len(lines) == len(df) else [i + 2 for i in range(len(df))]
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
    bad |= ~np.isfinite(v.fillna(0.0))
    if bad.any():
        i = int(np.argmax(bad.to_numpy()))
        need = "a number greater than 0" if positive else ("a number of 0 or more" if nonneg
                                                            else "a number")
        raise InputError(f"{name} line {line_of(df, i)}: {col} {shown(df[col].iloc[i])} is not "
                         f"{need}", "fix or remove that row")
    return v.to_numpy(float)


def line_of(df, i: int) -> int:
    """The file line of row ``i`` of a frame read by :func:`_read`."""
    lines = df.attrs.get("lines") or []
    return lines[i] if i < len(lines) else i + 2


def read_design_flows(path, units="si") -> dict[str, dict[str, float]]:
    """``reach_id, flow, discharge`` → {reach_id: {flow: discharge m³/s}}; ``units``
    is the run's (see the module docstring for the file's own)."""
    df = _read(path, DESIGN_COLUMNS, "design-flow")
    name = Path(path).name
    u = file_units(path, units, "discharges")
    q = _numbers(df, "discharge", name, nonneg=True) * (FOOT ** 3 if u == "us" else 1.0)
    out: dict[str, dict[str, float]] = {}
    for rid, flow, val in zip(df["reach_id"].astype(str), df["flow"].astype(str), q):
        if flow in out.setdefault(rid, {}):
            raise InputError(f"{name}: flow {flow!r} is given twice for reach {rid!r}",
                             "keep one row per reach and flow")
        out[rid][flow] = float(val)
    return out


def read_observations(path, units="si") -> pd.DataFrame:
    """Measured flows: ``reach_id``, ``chainage`` or ``x`` and ``y``, ``stage`` or
    ``depth``, ``discharge``, in the unit system the file states (module
    docstring). Returns SI values with the columns reach_id, chainage, x, y,
    stage, depth, discharge (NaN where not given) and ``line``, the file line of
    each row."""
    df = _read(path, OBS_COLUMNS, "observations")
    name = Path(path).name
    f = FOOT if file_units(path, units, "stages, depths and discharges") == "us" else 1.0
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
        raise InputError(f"{name} line {line_of(df, i)}: needs a chainage (or x and y) and a "
                         "stage (or depth)", "fill in that row")
    out["line"] = [line_of(df, i) for i in range(len(df))]
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
