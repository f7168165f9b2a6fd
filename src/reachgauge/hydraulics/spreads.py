"""The spreads of the inputs of the uncertainty draws (:mod:`reachgauge.hydraulics.uncertainty`),
from a reach's own data: the bankfull stage's (methods' range and terrain noise), the
slope's (the window fit's standard error) and the bounds of Cowan's terms."""

from __future__ import annotations

from functools import lru_cache

import numpy as np
from scipy import integrate, stats

from reachgauge.hydraulics import roughness

REL_N = 0.20          # ±20 % around a single n (common practice)
MAX_LOG_SD = 1.0      # slope: a log-sd above 1 (a factor e) says the fit knows nothing more
COWAN_TABLES = (roughness.COWAN_BASE, roughness.COWAN_IRREGULARITY, roughness.COWAN_VARIATION,
                roughness.COWAN_OBSTRUCTION, roughness.COWAN_VEGETATION)
COWAN_KEYS = ("base", "irregularity", "variation", "obstruction", "vegetation")


@lru_cache(maxsize=64)
def expected_range(k: int) -> float:
    """d₂(k): expected range of k independent standard normal draws,
    ∫ 1 − Φ(x)ᵏ − (1 − Φ(x))ᵏ dx (Tippett, L. H. C., 1925, Biometrika 17 [memory];
    tabulated as d₂ in quality-control texts, e.g. Montgomery, *Introduction to
    Statistical Quality Control*, Appendix VI). 0 for k < 2."""
    if k < 2:
        return 0.0
    f = lambda x: 1.0 - stats.norm.cdf(x) ** k - stats.norm.sf(x) ** k  # noqa: E731
    return float(integrate.quad(f, -np.inf, np.inf)[0])


def stage_sd(candidates, noise) -> np.ndarray:
    """Standard deviation (m) of each transect's bankfull stage: the automatic methods'
    range over d₂(k) (k methods that found a stage) combined with the noise σ (t,)."""
    cand = np.asarray(candidates, dtype=float).reshape(len(noise), -1)
    found = np.isfinite(cand)
    k = found.sum(axis=1)
    with np.errstate(invalid="ignore"):
        spread = np.where(k >= 2, np.nanmax(np.where(found, cand, -np.inf), axis=1)
                          - np.nanmin(np.where(found, cand, np.inf), axis=1), 0.0)
    d2 = np.array([expected_range(int(v)) for v in k])
    method = np.where(d2 > 0, spread / np.where(d2 > 0, d2, 1.0), 0.0)
    sn = np.nan_to_num(np.asarray(noise, dtype=float))
    return np.hypot(method, sn)


def slope_log_sd(chainage, z, slope, window) -> tuple[np.ndarray, int]:
    """Log-standard deviation of each station's slope, and the stations a window spans.

    The profile's scatter σ_z is the normal-scaled MAD of each point's residual about
    the line through its neighbours, scaled for independent errors (÷ √(1 + a² + b²)
    with a, b the interpolation weights). The slope's standard error over a window of
    points at chainages c is σ_z / √Σ(c − c̄)², the least-squares figure (Theil–Sen's
    efficiency for normal errors is close to it: Sen 1968 [memory]); over the slope
    (delta method) it is the log-sd, capped at :data:`MAX_LOG_SD`."""
    c = np.asarray(chainage, dtype=float)
    z = np.asarray(z, dtype=float)
    s = np.asarray(slope, dtype=float)
    ok = np.isfinite(c) & np.isfinite(z)
    cv, zv = c[ok], z[ok]
    if cv.size < 4:
        return np.zeros(c.size), 1
    a = (cv[2:] - cv[1:-1]) / (cv[2:] - cv[:-2])
    r = (zv[1:-1] - a * zv[:-2] - (1 - a) * zv[2:]) / np.sqrt(1 + a ** 2 + (1 - a) ** 2)
    sigma = float(stats.median_abs_deviation(r, scale="normal"))
    lo = np.searchsorted(cv, c - window / 2, side="left")
    hi = np.searchsorted(cv, c + window / 2, side="right")
    c1 = np.concatenate([[0.0], np.cumsum(cv)])
    c2 = np.concatenate([[0.0], np.cumsum(cv ** 2)])
    n = hi - lo
    with np.errstate(invalid="ignore", divide="ignore"):
        sxx = (c2[hi] - c2[lo]) - (c1[hi] - c1[lo]) ** 2 / n
        sd = sigma / np.sqrt(sxx) / s
    good = np.isfinite(sd) & (n >= 2)
    fill = float(np.median(sd[good])) if good.any() else 0.0
    sd = np.minimum(np.where(good, sd, fill), MAX_LOG_SD)
    return sd, max(1, int(np.median(n)))


def cowan_ranges(terms: dict) -> tuple[np.ndarray, np.ndarray, float]:
    """Bounds (5,) of Cowan's nb, n1..n4 for a reach's terms: the envelope of the
    classes of Arcement & Schneider (1989), Table 1, whose range holds each value (the
    value alone where none does); and the meander multiplier m."""
    lo, hi = np.empty(5), np.empty(5)
    for i, (key, table) in enumerate(zip(COWAN_KEYS, COWAN_TABLES)):
        v = float(terms[key])
        hits = [r for r in table.values() if r[0] - 1e-12 <= v <= r[1] + 1e-12]
        lo[i] = min((r[0] for r in hits), default=v)
        hi[i] = max((r[1] for r in hits), default=v)
    return lo, hi, float(terms["meander"])
