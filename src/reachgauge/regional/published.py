"""Published regional curves the user supplies (``--regional-curves``): reading and
checking the CSV (an input edge) and converting each curve to SI.

Columns: ``name``, ``variable`` (width | depth | area | discharge), ``coefficient``
(a > 0), ``exponent`` (b), ``units`` (si | us: the curve's units; ``us`` means ft,
ft², ft³/s against mi², ``si`` m, m², m³/s against km²), ``area_min``,
``area_max`` (the valid drainage-area range, in the curve's area unit). The
``units`` column may be left out when the file states one system for every row in
a ``# units: si|us`` line above its header (:mod:`reachgauge.inputs.tables`); a row
whose ``units`` disagrees with that line is an error.

A curve y = a·A^b in US units becomes a_si = a·0.3048^k / 2.589988110336^b, with k
the power of length in y (1 for width and depth, 2 for area, 3 for discharge): the
exponent is unchanged (1 ft = 0.3048 m, 1 mi² = 2.589988110336 km², both exact).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd

from reachgauge.errors import InputError, shown
from reachgauge.inputs import tables
from reachgauge.manning import FOOT, SQ_MILE_KM2
from reachgauge.regional.curves import LENGTH_POWER

COLUMNS = ("name", "variable", "coefficient", "exponent", "area_min", "area_max")
CURVE_FIELDS = ("name", "variable", "coefficient", "exponent", "units", "area_min", "area_max")


def read_curves(path) -> pd.DataFrame:
    """The curves of ``path`` in SI: columns name, variable, coefficient, exponent
    (m, m², m³/s against km²), area_min, area_max (km²), and ``given`` (the row as
    written: "a·A^b in <units>"). Every problem is an :class:`InputError` naming
    the file, the line and the fix."""
    df = tables._read(path, COLUMNS, "regional-curves")
    name = Path(path).name
    if not len(df):
        raise InputError(f"{name} holds no curve", "add one row per curve below the header")
    units = _units(df, path, name)
    names = df["name"].map(lambda v: "" if pd.isna(v) else str(v).strip())
    bad = names == ""
    if bad.any():
        raise InputError(f"{name} line {tables.line_of(df, int(np.argmax(bad)))}: the curve "
                         "has no name", "give every curve a name")
    var = df["variable"].map(lambda v: "" if pd.isna(v) else str(v).strip().lower())
    wrong = ~var.isin(tuple(LENGTH_POWER))
    if wrong.any():
        i = int(np.argmax(wrong))
        raise InputError(f"{name} line {tables.line_of(df, i)}: variable "
                         f"{shown(df['variable'].iloc[i])} is not one of "
                         f"{', '.join(LENGTH_POWER)}", "write width, depth, area or discharge")
    twice = pd.Series(list(zip(names, var))).duplicated()
    if twice.any():
        i = int(np.argmax(twice))
        raise InputError(f"{name} line {tables.line_of(df, i)}: curve {names.iloc[i]!r} gives "
                         f"{var.iloc[i]} twice", "keep one row per curve and variable")
    a = tables._numbers(df, "coefficient", name, positive=True)
    b = tables._numbers(df, "exponent", name)
    lo = tables._numbers(df, "area_min", name, nonneg=True)
    hi = tables._numbers(df, "area_max", name, positive=True)
    empty = hi <= lo
    if empty.any():
        i = int(np.argmax(empty))
        raise InputError(f"{name} line {tables.line_of(df, i)}: area_max {hi[i]:g} is not above "
                         f"area_min {lo[i]:g}", "give the curve's valid drainage-area range, "
                         "smallest first")
    us = units == "us"
    k = var.map(LENGTH_POWER).to_numpy(float)
    return pd.DataFrame({
        "name": names, "variable": var,
        "coefficient": np.where(us, a * FOOT ** k / SQ_MILE_KM2 ** b, a), "exponent": b,
        "area_min": np.where(us, lo * SQ_MILE_KM2, lo),
        "area_max": np.where(us, hi * SQ_MILE_KM2, hi),
        "given": [f"{ai:g}·A^{bi:g} in {u}" for ai, bi, u in zip(a, b, units)],
    })


def _units(df, path, name) -> np.ndarray:
    """Each row's unit system: the ``units`` column, else the file's ``# units:``
    line; both must agree where both are given."""
    stated = tables.stated_units(path)
    if "units" not in df.columns:
        if stated is None:
            raise InputError(f"{name} lacks the units column and states no '# units:' line",
                             "add a units column (si: m and km²; us: ft and mi²) or the line "
                             "'# units: si' or '# units: us' above the header")
        return np.full(len(df), stated, dtype=object)
    u = df["units"].map(lambda v: "" if pd.isna(v) else str(v).strip().lower())
    if stated is not None:
        u = u.where(u != "", stated)
    wrong = ~u.isin(("si", "us"))
    if wrong.any():
        i = int(np.argmax(wrong))
        raise InputError(f"{name} line {tables.line_of(df, i)}: units "
                         f"{shown(df['units'].iloc[i])} is not si or us",
                         "write si (m, m², m³/s against km²) or us (ft, ft², ft³/s against mi²)")
    if stated is not None and (u != stated).any():
        i = int(np.argmax((u != stated).to_numpy()))
        raise InputError(f"{name} line {tables.line_of(df, i)}: units {u.iloc[i]!r} disagrees "
                         f"with the file's '# units: {stated}' line",
                         "make the units column and the '# units:' line agree, or drop one")
    return u.to_numpy(object)
