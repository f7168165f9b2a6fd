"""Manning's equation, its inverses, and the unit systems of the trade.

Manning's equation (Manning, 1891; in the form of Chow, V. T., 1959,
*Open-Channel Hydraulics*, Eq. 5-6)::

    V = (k / n) R^(2/3) S^(1/2),    Q = V A,    R = A / P

with ``k = 1`` in SI (m, m/s, m³/s) and ``k = 1.486`` in US customary units
(ft, ft/s, ft³/s). The exact conversion factor is ``(1 / 0.3048)^(1/3) =
1.48592``; textbooks print 1.486 (White, *Fluid Mechanics*, Eq. 10.17) and so
do we: 1.49, also seen in print, is 0.27 % high.

Slope is the absolute gradient (dimensionless, > 0). All functions accept
scalars or numpy arrays and broadcast.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from reachgauge.errors import InputError

FOOT = 0.3048  # m, exact (international foot, 1959)
SQ_MILE_KM2 = (1609.344 / 1000.0) ** 2   # km² in one mi²: 1 mi = 1609.344 m exactly (1959)


@dataclass(frozen=True)
class UnitSystem:
    """Constants of one unit system.

    ``k``: Manning's unit constant; ``g``: gravitational acceleration;
    ``gamma``: unit weight of water (force per volume). ``length``,
    ``discharge`` etc. are the labels printed beside figures.
    """

    name: str
    k: float
    g: float
    gamma: float
    length: str
    area: str
    velocity: str
    discharge: str
    stress: str
    power: str


# g = 9.80665 m/s² (standard gravity, CGPM 1901); gamma = rho g with rho = 1000
# kg/m³ (fresh water, common practice). US: g = 32.174 ft/s² (= 9.80665/0.3048),
# gamma = 62.4 lbf/ft³ (common practice for water near 10 °C).
SI = UnitSystem("si", 1.0, 9.80665, 9806.65, "m", "m²", "m/s", "m³/s", "N/m²", "W/m²")
US = UnitSystem("us", 1.486, 9.80665 / FOOT, 62.4, "ft", "ft²", "ft/s", "ft³/s",
                "lbf/ft²", "lbf/(ft·s)")
UNIT_SYSTEMS = {"si": SI, "us": US}


def unit_system(units: str) -> UnitSystem:
    """Return the :class:`UnitSystem` named ``"si"`` or ``"us"``."""
    try:
        return UNIT_SYSTEMS[units]
    except (KeyError, TypeError):
        raise InputError(
            f"units must be one of 'si' or 'us', not {units!r}",
            "use 'si' for metres and m³/s or 'us' for feet and ft³/s",
        ) from None


def _check(value, ok, problem, fix):
    """Return ``value`` as a float array, or raise naming the first bad element."""
    a = np.asarray(value, dtype=float)
    good = np.isfinite(a) & ok(a)
    if not np.all(good):
        raise InputError(problem.format(bad=a[~good].ravel()[0]), fix)
    return a


def check_slope(slope):
    """Validate a slope: finite and > 0 (dimensionless)."""
    return _check(slope, lambda a: a > 0, "slope must be a finite number greater than 0, got {bad:g}",
                  "give the absolute gradient as a decimal (e.g. 0.002 for 2 m per km)")


def check_n(n):
    """Validate Manning's n: finite and > 0 (s/m^(1/3))."""
    return _check(n, lambda a: a > 0,
                  "Manning's n must be a finite number greater than 0, got {bad:g}",
                  "natural channels usually lie between 0.025 and 0.15")


def check_discharge(q):
    """Validate a discharge: finite and >= 0."""
    return _check(q, lambda a: a >= 0, "discharge must be a finite number of 0 or more, got {bad:g}",
                  "give the flow rate in m³/s (SI) or ft³/s (US)")


def velocity(hydraulic_radius, slope, n, units="si"):
    """Mean velocity by Manning's equation, V = (k/n) R^(2/3) S^(1/2).

    ``hydraulic_radius`` in m (ft); returns m/s (ft/s). Source: Chow (1959),
    Eq. 5-6.
    """
    k = unit_system(units).k
    r = np.asarray(hydraulic_radius, dtype=float)
    return k / check_n(n) * np.power(np.maximum(r, 0.0), 2.0 / 3.0) * np.sqrt(check_slope(slope))


def conveyance(area, hydraulic_radius, n, units="si"):
    """Conveyance K = (k/n) A R^(2/3), so that Q = K S^(1/2) (Chow 1959, §6-9).

    ``area`` in m² (ft²), ``hydraulic_radius`` in m (ft); returns m³/s (ft³/s).
    """
    k = unit_system(units).k
    a = np.asarray(area, dtype=float)
    r = np.asarray(hydraulic_radius, dtype=float)
    return k / check_n(n) * a * np.power(np.maximum(r, 0.0), 2.0 / 3.0)


def discharge(area, hydraulic_radius, slope, n, units="si"):
    """Discharge Q = V A by Manning's equation; m³/s (ft³/s). Chow (1959), Eq. 5-6."""
    return conveyance(area, hydraulic_radius, n, units) * np.sqrt(check_slope(slope))


def roughness(discharge, area, hydraulic_radius, slope, units="si"):
    """Manning's n back-calculated from a measured discharge.

    n = (k / Q) A R^(2/3) S^(1/2): Manning's equation solved for n (Chow 1959,
    Eq. 5-6). ``discharge`` must be > 0 (a zero flow has no defined n).
    """
    k = unit_system(units).k
    q = check_discharge(discharge)
    if np.any(q == 0):
        raise InputError("a discharge of 0 gives no Manning's n",
                         "give the measured discharge, greater than 0")
    a = np.asarray(area, dtype=float)
    r = np.asarray(hydraulic_radius, dtype=float)
    return k * a * np.power(np.maximum(r, 0.0), 2.0 / 3.0) * np.sqrt(check_slope(slope)) / q


def froude(velocity, hydraulic_depth, units="si"):
    """Froude number F = V / sqrt(g D), D = A / T the hydraulic depth (Chow 1959, Eq. 1-4).

    Dimensionless; 0 where the depth is 0.
    """
    g = unit_system(units).g
    v = np.asarray(velocity, dtype=float)
    d = np.asarray(hydraulic_depth, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        f = np.where(d > 0, v / np.sqrt(g * np.where(d > 0, d, 1.0)), 0.0)
    return f


def shear_stress(hydraulic_radius, slope, units="si"):
    """Mean boundary shear stress tau = gamma R S; N/m² (lbf/ft²). Chow (1959), §8-1."""
    gamma = unit_system(units).gamma
    return gamma * np.asarray(hydraulic_radius, dtype=float) * check_slope(slope)


def unit_stream_power(discharge, slope, top_width, units="si"):
    """Unit stream power omega = gamma Q S / w; W/m² (lbf/(ft·s)).

    Bagnold, R. A., 1966, USGS Professional Paper 422-I (attribution from
    memory). ``top_width`` is the water-surface width; 0 where it is 0.
    """
    gamma = unit_system(units).gamma
    q = np.asarray(discharge, dtype=float)
    w = np.asarray(top_width, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(w > 0, gamma * q * check_slope(slope) / np.where(w > 0, w, 1.0), 0.0)
