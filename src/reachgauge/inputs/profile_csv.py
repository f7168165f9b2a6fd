"""Read one surveyed cross-section from a CSV file (an input edge of the tool).

The file has a header row and two columns: an offset (``offset``, ``station``
or ``distance``) and either an elevation (``elevation``, ``elev`` or ``z``) or
a depth below a measured water surface (``depth``). Offsets run from the left
bank to the right bank looking downstream. A ``# units: si|us`` line above the
header states the unit of its lengths (:mod:`reachgauge.inputs.tables`); the
section is returned in the units of the command.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd

from reachgauge.errors import InputError, shown
from reachgauge.inputs.tables import file_units
from reachgauge.kernel.crosssection import CrossSection
from reachgauge.manning import FOOT

OFFSET_NAMES = ("offset", "station", "distance")
ELEVATION_NAMES = ("elevation", "elev", "z")
DEPTH_NAMES = ("depth",)


def _pick(columns, names):
    for c in columns:
        if c.strip().lower() in names:
            return c
    return None


def read_profile(path, water_surface: float | None = None,
                 units: str = "si") -> tuple[CrossSection, str]:
    """Return the section in ``path`` and the kind of its second column
    (``"elevation"`` or ``"depth"``), in ``units`` (the command's: m or ft)
    whatever the unit the file states. Depths are turned into elevations below
    ``water_surface`` (in ``units``; 0 if not given)."""
    p = Path(path)
    if not p.is_file():
        raise InputError(f"profile file {str(p)!r} "
                         + ("is a folder" if p.is_dir() else "does not exist"),
                         "give the path of a CSV with offset and elevation (or depth) columns")
    own = file_units(p, units, "offsets and elevations")
    k = 1.0 if own == units else (FOOT if own == "us" else 1 / FOOT)   # file unit → command unit
    try:
        df = pd.read_csv(p, comment="#")
    except (pd.errors.ParserError, pd.errors.EmptyDataError, UnicodeDecodeError) as exc:
        raise InputError(f"cannot read {p.name} as CSV ({str(exc).splitlines()[0]})",
                         "save it as comma-separated text with a header row") from None
    xcol = _pick(df.columns, OFFSET_NAMES)
    zcol = _pick(df.columns, ELEVATION_NAMES)
    dcol = _pick(df.columns, DEPTH_NAMES)
    if xcol is None or (zcol is None and dcol is None):
        raise InputError(
            f"{p.name} has columns {list(map(str, df.columns))}, but needs an offset column "
            f"({'/'.join(OFFSET_NAMES)}) and an elevation ({'/'.join(ELEVATION_NAMES)}) or "
            "depth column",
            "rename the header row, e.g. 'offset,elevation'")
    if zcol is not None and dcol is not None:
        raise InputError(f"{p.name} has both an elevation and a depth column",
                         "keep only one of them")
    kind = "elevation" if zcol is not None else "depth"
    col = zcol if zcol is not None else dcol
    x = pd.to_numeric(df[xcol], errors="coerce").to_numpy(float)
    v = pd.to_numeric(df[col], errors="coerce").to_numpy(float)
    bad = np.nonzero(~np.isfinite(x) | ~np.isfinite(v))[0]
    if bad.size:
        raise InputError(
            f"{p.name} line {int(bad[0]) + 2}: {shown(df[xcol].iloc[bad[0]])}, "
            f"{shown(df[col].iloc[bad[0]])} is not a pair of numbers",
            "fix or remove that row")
    x, v = x * k, v * k
    if kind == "depth":
        v = (0.0 if water_surface is None else float(water_surface)) - v
    try:
        return CrossSection(x, v), kind
    except InputError as exc:
        raise InputError(f"{p.name}: {exc.problem}", exc.fix) from None
