"""Bankfull depth from a regional curve of drainage area, and the checks of user
numbers shared by the bankfull step.

Power-law regional curves, depth = a·DA^b: Bieger, K. et al., 2015, JAWRA 51(3);
Bent, G. C. & Waite, A. M., 2013, USGS SIR 2013-5155.
"""

from __future__ import annotations

import math

import numpy as np

from reachgauge.errors import InputError
from reachgauge.manning import FOOT, SQ_MILE_KM2



def finite(v, what) -> float:
    """``v`` as a finite float, else :class:`InputError` naming ``what``."""
    try:
        f = float(v)
    except (TypeError, ValueError):
        raise InputError(f"{what} must be a number, got {v!r}", f"give the {what} as a number") from None
    if not math.isfinite(f):
        raise InputError(f"{what} must be finite, got {v!r}", f"give the {what} as a finite number")
    return f


def regional_depth(drainage_area_km2, coef, exp):
    """Bankfull depth from a regional curve, depth = coef × DA^exp (vectorised).

    ``drainage_area_km2``: scalar or array of drainage areas (km², > 0); ``coef`` (m per
    km²^exp, > 0) and ``exp`` are the curve's coefficients, in metres and km² (convert
    a curve fitted in ft and mi² with :func:`regional_coef_to_si`). Power-law regional
    curves: Bieger et al., 2015, JAWRA; Bent & Waite, 2013, USGS SIR 2013-5155.
    """
    da = np.asarray(drainage_area_km2, dtype=float)
    coef = finite(coef, "regional coefficient")
    exp = finite(exp, "regional exponent")
    if coef <= 0:
        raise InputError(f"the regional coefficient must be greater than 0, got {coef:g}",
                         "give the curve's coefficient a in depth = a × area^b (m, km²)")
    if not np.all(np.isfinite(da)) or np.any(da <= 0):
        raise InputError("drainage area must be a finite number greater than 0 (km²)",
                         "fill the drainage-area field with each reach's area in km²")
    out = coef * da ** exp
    return float(out) if out.ndim == 0 else out


def regional_coef_to_si(coef, exp):
    """Coefficient of a regional depth curve fitted in ft and mi², converted to m and
    km² (the exponent is unchanged): a_si = a_us × 0.3048 / 2.589988110336^exp."""
    exp = finite(exp, "regional exponent")
    return finite(coef, "regional coefficient") * FOOT / SQ_MILE_KM2 ** exp
