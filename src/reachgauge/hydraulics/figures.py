"""The figures of a section — one function for every layer and command.

:func:`section_figures` turns the area, wetted perimeter, top width and discharge of
a flow into hydraulic radius, hydraulic depth, mean velocity, Froude number, boundary
shear and unit stream power. Which water the figures describe — the *basis* — is the
caller's: the channel between the banks (bankfull figures of a transect) or the whole
connected section (rating curves, stage figures, the ``section`` command). Whatever
the basis, velocity × flow area = discharge within one row.

Methods: Manning's equation (Chow, V. T., 1959, *Open-Channel Hydraulics*, Eq. 5-6)
with the divided-channel method (Chow 1959, §6-9); Froude number V / √(g D) on the
hydraulic depth D = A / T (Chow 1959, Eq. 1-4); mean boundary shear γ R S (Chow 1959,
§8-1); unit stream power γ Q S / T (Bagnold, R. A., 1966, USGS Professional Paper
422-I [memory for the attribution]). See :mod:`reachgauge.manning`.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from reachgauge import manning
from reachgauge.kernel import sections as K

# the figures of one flow, in the order of the result schema
FIGURES = ("stage", "depth", "flow_area", "perimeter", "top_width", "hyd_radius", "hyd_depth",
           "velocity", "discharge", "froude", "shear", "stream_power", "spills")


def section_figures(area, perimeter, top_width, discharge, slope, units="si") -> dict:
    """Hydraulic radius, hydraulic depth, velocity, Froude number, shear and unit
    stream power from area, wetted perimeter, top width and discharge (arrays that
    broadcast with ``slope``); lengths m or ft, discharge m³/s or ft³/s."""
    r = K.safe_ratio(area, perimeter)
    d = K.safe_ratio(area, top_width)
    v = K.safe_ratio(discharge, area)
    return {"hyd_radius": r, "hyd_depth": d, "velocity": v,
            "froude": manning.froude(v, d, units),
            "shear": manning.shear_stress(r, slope, units),
            "stream_power": manning.unit_stream_power(discharge, slope, top_width, units)}


def whole_section(p: K.Profiles, stage, slope, n, banks=None, units="si") -> dict:
    """Every figure of :data:`FIGURES` for the whole connected section of each
    profile at ``stage`` (t, k): discharge by the divided-channel method when
    ``banks`` (t, 2) are given. Returns arrays of the stages' shape."""
    fl = K.flow(p, stage, slope, n, banks, units)
    w = fl.wet
    q = fl.discharge
    sl = np.broadcast_to(np.asarray(slope, dtype=float), (p.count,))[:, None]
    out = {"stage": w.stage, "depth": w.depth, "flow_area": w.area,
           "perimeter": w.wetted_perimeter, "top_width": w.top_width, "discharge": q,
           "spills": w.spills}
    out.update(section_figures(w.area, w.wetted_perimeter, w.top_width, q, sl, units))
    return {k: out[k] for k in FIGURES}


def figures(section, stage, slope: float, n, units: str = "si") -> pd.DataFrame:
    """Every figure of one :class:`~reachgauge.kernel.crosssection.CrossSection` at
    each stage, one row per stage (whole-section basis; divided-channel discharge
    when the section has banks). Columns: :data:`FIGURES`."""
    st = np.atleast_1d(section._stages(stage)).ravel()
    manning.check_slope(slope)
    n3 = section._n(n)
    banks = section._bank_rows()
    got = whole_section(section.profiles, st[None, :], slope, n3, banks, units)
    return pd.DataFrame({k: v[0] for k, v in got.items()})
