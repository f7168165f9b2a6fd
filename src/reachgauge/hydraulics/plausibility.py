"""Figures of a section that the arithmetic allows but a natural channel does
not: warned about with the plausible range, and the figures they feed flagged.

A slope of 2 gives a velocity of 30 m/s and a Froude number near 12; an n of
0.0015 back-calculated from a discharge in the wrong unit is smoother than
glass. Nothing here changes a number; it says which numbers to doubt.

Ranges and their sources:

- Slope 1e-5 to 0.1. Manning's equation with tabulated n is used on channels
  up to a few per cent; steeper (step-pool, cascade) channels lose energy in
  ways the equation with a table n underestimates (Jarrett, R. D., 1984,
  Hydraulics of high-gradient streams, J. Hydraulic Eng. 110(11), studied
  slopes of about 0.002–0.04) [memory]. Below 1e-5 (1 cm per km) a terrain
  model cannot resolve the slope (common practice).
- Manning's n 0.010 to 0.250 (:data:`reachgauge.hydraulics.roughness.HARD_RANGE`:
  smooth lined channels to the roughest published flood plains, Chow 1959,
  Table 5-6).
- Froude number at most 1: natural channels rarely sustain supercritical mean
  flow over a reach (Grant, G. E., 1997, Critical flow constrains flow
  hydraulics in mobile-bed streams, Water Resources Research 33(2)) [memory].
- Mean velocity at most 6 m/s (about 20 ft/s) in a natural channel (common practice).
"""

from __future__ import annotations

import math

from reachgauge.manning import FOOT

SLOPE_RANGE = (1e-5, 0.1)
FROUDE_MAX = 1.0
VELOCITY_MAX = 6.0  # m/s
# the figures that Manning's equation computes from the slope and n
FROM_SLOPE_AND_N = ("velocity", "discharge", "Froude number", "shear stress", "stream power")


def section_doubts(slope: float, n, velocity: float, froude: float, units: str = "si",
                   back_calculated: bool = False) -> list[tuple[tuple[str, ...], str]]:
    """Warnings about one section's figures: a list of (names of the figures
    to flag, warning text). ``velocity`` is in the run's ``units`` (m/s or ft/s)."""
    from reachgauge.hydraulics.roughness import HARD_RANGE

    out = []
    lo, hi = SLOPE_RANGE
    if not lo <= slope <= hi:
        out.append((FROM_SLOPE_AND_N + ("slope",),
                    f"slope {slope:g} lies outside {lo:g}–{hi:g}, where Manning's equation "
                    "with a table n applies to natural channels: check the value (a per cent "
                    "given as a decimal?) before using the velocity and discharge"))
    ns = [float(v) for v in (n if isinstance(n, (list, tuple)) else [n]) if v is not None]
    odd = [v for v in ns if not HARD_RANGE[0] <= v <= HARD_RANGE[1]]
    if odd:
        what = "back-calculated n" if back_calculated else "Manning's n"
        out.append((("Manning's n",) + (() if back_calculated else FROM_SLOPE_AND_N),
                    f"{what} {odd[0]:.4g} lies outside {HARD_RANGE[0]:g}–{HARD_RANGE[1]:g}, "
                    "the published range for channels and flood plains (Chow 1959, Table 5-6)"
                    + (": check the stage, slope and discharge and their units"
                       if back_calculated else "")))
    v_si = velocity * (FOOT if units == "us" else 1.0)
    if math.isfinite(v_si) and v_si > VELOCITY_MAX:
        shown = f"{v_si / FOOT:.3g} ft/s" if units == "us" else f"{v_si:.3g} m/s"
        limit = f"{VELOCITY_MAX / FOOT:.0f} ft/s" if units == "us" else f"{VELOCITY_MAX:g} m/s"
        out.append((("velocity",), f"velocity {shown} exceeds {limit}, more than natural "
                    "channels carry: check the slope and n"))
    if math.isfinite(froude) and froude > FROUDE_MAX:
        out.append((("Froude number",), f"Froude number {froude:.3g} is above {FROUDE_MAX:g} "
                    "(supercritical), which natural channels rarely sustain: check the slope "
                    "and n"))
    return out
