"""The noise of a sampled profile and the bed level its depths are measured from.

Lidar elevations scatter about the ground by a few centimetres. The lowest sample of a
noisy channel bed is the bed less about 1.5 standard deviations (the expected
minimum of ten normal draws; any table of normal order statistics), so depths
measured from it read that much too deep: 7–8 cm at 5 cm of noise. The bed level
here is instead the median of the samples the water covers when it stands 3σ above
the lowest one (the samples connected to the thalweg below that level): on a flat
noisy bed nearly every bed sample and little else, whose median is the bed; on a
clean profile (σ = 0) the lowest point itself. The rule is ours (common practice
for a robust level of a noisy surface is a median), checked on synthetic channels by
benchmarks/bench_banks.py.
"""

from __future__ import annotations

import numpy as np
from scipy.special import ndtri

from reachgauge.kernel.sections import Profiles

BED_NOISE_MULTIPLE = 3.0   # the bed samples: within 3σ of the lowest, connected to it


def noise(p: Profiles) -> np.ndarray:
    """Robust elevation scatter σ (m) of each profile about its local ground line (t,).

    Each interior point is compared with the straight line through its two
    neighbours; for independent errors of standard deviation σ that residual has
    variance σ²(1 + w² + (1−w)²), w the point's fractional position between its
    neighbours. σ is the normal-scaled median absolute deviation of the normalised
    residuals (the figure of scipy.stats.median_abs_deviation(scale="normal") per
    row; Rousseeuw, P. J. & Croux, C., 1993, JASA 88 [memory], for the MAD as a
    robust scale), which ignores the few vertices where the true ground bends. 0 for
    a clean or hydro-flattened profile and for a profile of fewer than 3 points.
    """
    x, z = p.x, p.z
    t, m = z.shape
    if m < 3:
        return np.zeros(t)
    with np.errstate(divide="ignore", invalid="ignore"):
        w = (x[:, 1:-1] - x[:, :-2]) / (x[:, 2:] - x[:, :-2])
        r = z[:, 1:-1] - (z[:, :-2] + w * (z[:, 2:] - z[:, :-2]))
        r = r / np.sqrt(1.0 + w * w + (1.0 - w) ** 2)
    valid = np.arange(m - 2)[None, :] < (p.size - 2)[:, None]
    r = np.where(valid, r, np.nan)
    with np.errstate(invalid="ignore"), _quiet():
        med = np.nanmedian(r, axis=1)
        mad = np.nanmedian(np.abs(r - med[:, None]), axis=1) / 0.6744897501960817
    return np.where((p.size >= 3) & np.isfinite(mad), mad, 0.0)


def bed_level(p: Profiles, sigma) -> np.ndarray:
    """Bed elevation (m, t,) of each profile: the median of the samples connected to
    its thalweg point that lie no more than 3σ above it (see the module docstring);
    ``sigma`` (t,) the profile noise (:func:`noise`)."""
    t, m = p.z.shape
    lowest = p.z[np.arange(t), p.i0]
    level = (lowest + BED_NOISE_MULTIPLE * np.asarray(sigma, dtype=float))[:, None]
    j = np.arange(m)[None, :]
    i0 = p.i0[:, None]
    # column j lies k = |j − i0| points out from the thalweg; it is covered when the
    # highest ground between it and the thalweg (the running maximum) is below the level
    k = np.minimum(np.abs(j - i0), m - 1)
    out_max = np.where(j <= i0, np.take_along_axis(p.left_max, k, axis=1),
                       np.take_along_axis(p.right_max, k, axis=1))
    covered = (j < p.size[:, None]) & (out_max <= level)
    n = np.maximum(covered.sum(axis=1), 1)
    # expected shortfall of the least of n normal draws, in σ: Blom's approximation of
    # the first order statistic, Φ⁻¹((1 − 0.375)/(n + 0.25)) (Blom, G., 1958,
    # Statistical estimates and transformed beta-variables, Wiley [memory]); 0 for n = 1
    shortfall = -ndtri(0.625 / (n + 0.25))
    return lowest + np.asarray(sigma, dtype=float) * shortfall


class _quiet:
    """All-NaN rows are expected (invalid profiles): no warning for them."""

    def __enter__(self):
        import warnings

        self._w = warnings.catch_warnings()
        self._w.__enter__()
        warnings.simplefilter("ignore", RuntimeWarning)

    def __exit__(self, *exc):
        return self._w.__exit__(*exc)
