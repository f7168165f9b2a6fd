"""The noise of a sampled profile and the bed level its depths are measured from.

Lidar elevations scatter about the ground by a few centimetres. The lowest sample of a
noisy channel bed is the bed less about 1.5 standard deviations (the expected
minimum of ten normal draws; any table of normal order statistics), so depths
measured from it read that much too deep: 5–8 cm at 5 cm of noise. The bed level
here is the lowest sample near the line raised by the expected shortfall of the
least of the samples the water covers when it stands 3σ above it (the samples
connected to the thalweg below that level): σ times Blom's approximation of the
first normal order statistic of that many draws (:func:`bed_level`). On a clean
profile (σ = 0) it is the lowest point itself. Checked on synthetic channels by
benchmarks/bench_banks.py.

The noise σ is that of the profile's *samples*. A section cut from a raster is
sampled by bilinear interpolation, and two neighbouring samples (a sample step
apart, the step no larger than a pixel by default) share pixels: their errors are
correlated, so each sample's residual about the line through its neighbours is
smaller than for independent errors. For white noise of standard deviation s on
the grid, a sample at fractions (u, v) of a cell has standard deviation
s·√([(1−u)² + u²][(1−v)² + v²]) (the root sum of squares of the bilinear weights),
2/3·s in the mean square over positions (∫₀¹ (1−u)² + u² du = 2/3 per axis); the
residual about the neighbours reads only about 3/4 of that, and exactly √(1/3) of
it along a grid row half-way between pixel centres (the residual's weights on the
pixel columns are ¼(−1, 1, 1, −1), against ½(1, 1) for the sample; closed forms,
tests/test_kernel_bed.py). Samples two steps apart share almost no pixel (none
along a grid axis; correlation below 0.003 at any angle, from the autocorrelation
of the bilinear hat function), so :func:`noise` measures each point against the
line through the samples two steps either side. Such a wider stencil also spans
more of the ground's bends (a bank toe or top), which a robust scale tolerates only
in small numbers; the points where the ground bends are found first from the
residuals about the nearest neighbours (beyond three scaled MADs: Hampel's outlier
rule, e.g. Pearson, R. K., 2002, "Outliers in process modeling and
identification", IEEE Trans. Control Syst. Technol. 10 [memory]) and left out.
"""

from __future__ import annotations

import numpy as np
from scipy.special import ndtri

from reachgauge.kernel.sections import Profiles

BED_NOISE_MULTIPLE = 3.0   # the bed samples: within 3σ of the lowest, connected to it
BEND_MADS = 3.0            # Hampel's rule: a residual beyond 3 scaled MADs is a bend, not noise


def _residuals(x, z, size, lag: int) -> np.ndarray:
    """Residual (t, m − 2·lag) of each point about the straight line through the
    points ``lag`` places either side, divided by its standard deviation in units of
    σ for independent errors, √(1 + w² + (1 − w)²) (w the point's fractional position
    between them); NaN beyond a row's valid points."""
    m = z.shape[1]
    with np.errstate(divide="ignore", invalid="ignore"):
        w = (x[:, lag:-lag] - x[:, :-2 * lag]) / (x[:, 2 * lag:] - x[:, :-2 * lag])
        r = z[:, lag:-lag] - (z[:, :-2 * lag] + w * (z[:, 2 * lag:] - z[:, :-2 * lag]))
        r = r / np.sqrt(1.0 + w * w + (1.0 - w) ** 2)
    valid = np.arange(m - 2 * lag)[None, :] < (size - 2 * lag)[:, None]
    return np.where(valid, r, np.nan)


def _mad(r):
    """Row medians and normal-scaled median absolute deviations of ``r`` (NaN ignored)."""
    with np.errstate(invalid="ignore"), _quiet():
        med = np.nanmedian(r, axis=1)
        return med, np.nanmedian(np.abs(r - med[:, None]), axis=1) / 0.6744897501960817


def _masked(p: Profiles):
    """The residuals :func:`noise` measures σ from: ``(r2, med2, s1)``, r2 (t, m − 4)
    the lag-2 residuals left after both of Hampel's passes (NaN where left out), med2
    their row medians, s1 (t,) the scaled MAD of the nearest-neighbour residuals (the
    σ of profiles of 3 or 4 points). None for profiles of fewer than 5 columns."""
    x, z, size = p.x, p.z, p.size
    t, m = z.shape
    r1 = _residuals(x, z, size, 1)
    med1, s1 = _mad(r1)
    if m < 5:
        return None, None, s1
    bend = np.zeros((t, m), dtype=bool)
    with np.errstate(invalid="ignore"):
        bend[:, 1:-1] = np.abs(r1 - med1[:, None]) > BEND_MADS * s1[:, None]
    # the lag-2 residual of point i spans points i − 2 … i + 2
    near = np.zeros((t, m - 4), dtype=bool)
    for k in range(5):
        near |= bend[:, k:m - 4 + k]
    r2_all = _residuals(x, z, size, 2)
    r2 = np.where(near, np.nan, r2_all)
    # a gentle bend can hide among its nearest neighbours' noise, never among the wider
    # stencil's (its residual there is twice as large): the rule once more on these
    med2, s2 = _mad(r2)
    with np.errstate(invalid="ignore"):
        r2 = np.where(np.abs(r2 - med2[:, None]) > BEND_MADS * s2[:, None], np.nan, r2)
    # a row whose every point is a bend's neighbour keeps all its residuals
    none_left = ~np.isfinite(r2).any(axis=1)
    r2 = np.where(none_left[:, None], r2_all, r2)
    med2, _ = _mad(r2)
    return r2, med2, s1


def noise(p: Profiles) -> np.ndarray:
    """Robust elevation scatter σ (m) of the samples of each profile about its local
    ground line (t,) (module docstring).

    Each point is compared with the straight line through the points two places
    either side (whose errors a raster's bilinear sampling leaves uncorrelated with
    its own); σ is the normal-scaled median absolute deviation of those residuals,
    normalised for independent errors (the figure of
    scipy.stats.median_abs_deviation(scale="normal") per row; Rousseeuw, P. J. &
    Croux, C., 1993, JASA 88 [memory], for the MAD as a robust scale), leaving out
    every point within two places of a bend of the ground: a point whose residual
    about its nearest neighbours lies beyond :data:`BEND_MADS` of their scaled MADs.
    Profiles of 3 or 4 points use the nearest neighbours alone. 0 for a clean or
    hydro-flattened profile and for a profile of fewer than 3 points.

    This is the scatter one profile shows; the terrain's own is :func:`reach_noise`.
    """
    size = p.size
    t, m = p.z.shape
    if m < 3:
        return np.zeros(t)
    r2, med2, s1 = _masked(p)
    if r2 is None:
        return np.where((size >= 3) & np.isfinite(s1), s1, 0.0)
    with np.errstate(invalid="ignore"), _quiet():
        s2 = np.nanmedian(np.abs(r2 - med2[:, None]), axis=1) / 0.6744897501960817
    sigma = np.where(size >= 5, s2, s1)
    return np.where((size >= 3) & np.isfinite(sigma), sigma, 0.0)


def reach_noise(p: Profiles) -> float:
    """Elevation scatter σ (m) of the samples of a set of profiles cut from one
    raster (the transects of a reach): the normal-scaled median absolute deviation
    of the residuals of :func:`noise` of every profile, pooled (about their pooled
    median: centring each profile's residuals on its own median of some 25 would
    shrink them by a further 2 % at 2 m pixels).

    The noise is a property of the raster, not of a transect: one profile of 30–60
    samples estimates it to about ±15–35 % (1 s.d.; the fewer the samples, the
    worse), and a bed level or a break rise taken from that figure scatters with it
    from transect to transect. Pooled, every residual counts: on the synthetic
    channels of benchmarks/bench_banks.py (0.5–2 m pixels, 2 and 5 cm of noise) it
    reads within 4 % of the sampled noise's own MAD (slightly low: the bend masking
    trims a little of pure noise's tails, about 2-3 %) where the median of the
    transects' figures strays by up to 11 % at 2 m pixels (small-sample MADs of
    ~25 residuals; measured for issue 9). Profiles of 3 or 4 points only: the median
    of their :func:`noise`; 0 when there is nothing to measure."""
    t, m = p.z.shape
    if t == 0 or m < 3:
        return 0.0
    r2, _, _ = _masked(p)
    rows = (p.size >= 5) if r2 is not None else np.zeros(t, bool)
    if rows.any():
        r = r2[rows]
        r = r[np.isfinite(r)]
        if r.size:
            return float(np.median(np.abs(r - np.median(r))) / 0.6744897501960817)
    short = p.size >= 3
    return float(np.median(noise(p)[short])) if short.any() else 0.0


def bed_level(p: Profiles, sigma) -> np.ndarray:
    """Bed elevation (m, t,) of each profile: its lowest sample raised by σ times the
    expected shortfall of the least of the n samples connected to it that lie no more
    than 3σ above it (see the module docstring); ``sigma`` (m, scalar or (t,)): the
    noise of the samples, for transects cut from one raster :func:`reach_noise`."""
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
