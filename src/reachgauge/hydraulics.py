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

import numpy as np
import pandas as pd

from . import manning
from .section import CrossSection

# Column names shared by the CLI, the writer and the report: (name, unit kind, meaning)
FIGURE_FIELDS = {
    "stage": ("length", "water-surface elevation"),
    "depth": ("length", "stage minus thalweg elevation"),
    "area": ("area", "wetted cross-section area connected to the thalweg"),
    "wetted_perimeter": ("length", "wetted ground length (division lines excluded)"),
    "top_width": ("length", "water-surface width"),
    "hydraulic_radius": ("length", "area / wetted perimeter"),
    "hydraulic_depth": ("length", "area / top width"),
    "velocity": ("velocity", "mean velocity, discharge / area"),
    "discharge": ("discharge", "Manning discharge"),
    "froude": ("none", "Froude number on hydraulic depth"),
    "shear_stress": ("stress", "mean boundary shear stress, gamma R S"),
    "stream_power": ("power", "unit stream power, gamma Q S / top width"),
    "spills": ("none", "water reaches an end of the profile"),
}


def unit_label(kind: str, units: str) -> str:
    """Printed unit for a field kind ("length", "area", ...) in a unit system."""
    if kind == "none":
        return ""
    return getattr(manning.unit_system(units), kind)


def figures(section: CrossSection, stage, slope: float, n, units: str = "si") -> pd.DataFrame:
    """Every hydraulic figure at each stage, one row per stage.

    ``stage``: scalar or 1-D array of water-surface elevations (m or ft).
    ``n``: one Manning's n, or (left overbank, channel, right overbank) for a
    section with banks. Columns are those of :data:`FIGURE_FIELDS`.
    """
    st = np.atleast_1d(np.asarray(stage, dtype=float))
    geo = section.geometry(st)
    q = section.discharge(st, slope, n, units)
    v = np.where(geo.area > 0, q / np.where(geo.area > 0, geo.area, 1.0), 0.0)
    r = geo.hydraulic_radius
    return pd.DataFrame({
        "stage": st,
        "depth": geo.depth,
        "area": geo.area,
        "wetted_perimeter": geo.wetted_perimeter,
        "top_width": geo.top_width,
        "hydraulic_radius": r,
        "hydraulic_depth": geo.hydraulic_depth,
        "velocity": v,
        "discharge": q,
        "froude": manning.froude(v, geo.hydraulic_depth, units),
        "shear_stress": manning.shear_stress(r, slope, units),
        "stream_power": manning.unit_stream_power(q, slope, geo.top_width, units),
        "spills": geo.spills,
    })
