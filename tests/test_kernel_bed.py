"""The bed level below the lidar noise (kernel.bed).

References: the expected minimum of n standard normal draws (normal order statistics;
E[min of 10] = -1.5388, from tables [memory]; Blom's approximation
Phi^-1((1 - 0.375)/(n + 0.25)) [memory]), checked here against a Monte Carlo of
numpy's own normal draws; and closed-form trapezoids with seeded noise
(tests/section_fixtures.py), whose bed is known by construction.
"""

import numpy as np
import pytest

from reachgauge.kernel import bed
from reachgauge.kernel import sections as K
from section_fixtures import compound_channel, trapezoid


def test_blom_shortfall_matches_a_monte_carlo_of_minima():
    from scipy.special import ndtri

    rng = np.random.default_rng(0)
    for n in (1, 3, 10, 30):
        mc = rng.standard_normal((200_000, n)).min(axis=1).mean()
        blom = ndtri(0.625 / (n + 0.25))
        # 200,000 draws: the Monte Carlo mean is good to about 0.002 σ; Blom's
        # approximation errs by up to about 0.03 σ for small n (n = 3: -0.869 against
        # the exact -0.846 [memory])
        assert blom == pytest.approx(mc, abs=0.03), n


def test_a_clean_profile_keeps_its_lowest_point():
    s = trapezoid(noise=0.0).section
    p = s.profiles
    assert bed.noise(p)[0] == 0.0
    assert bed.bed_level(p, bed.noise(p))[0] == pytest.approx(s.thalweg, abs=1e-12)


def test_a_noisy_flat_bed_is_found_below_the_noise():
    # 400 compound channels, bed at 100.0 m, 5 cm of noise, 1 m sampling: the lowest
    # sample reads about 1.3σ low (6-7 cm); the bed level much closer in the median
    # (the noise scale is itself estimated from each profile); tolerance a third of σ:
    # the correction takes every covered sample, a noisy bank toe among them, for a
    # draw about the bed
    rows = [compound_channel(noise=0.05, seed=s).section for s in range(400)]
    m = max(r.offset.size for r in rows)
    x = np.full((len(rows), m), np.nan)
    z = np.full((len(rows), m), np.nan)
    for i, r in enumerate(rows):
        x[i, :r.offset.size], z[i, :r.offset.size] = r.offset, r.elevation
    p = K.profiles(x, z)
    lowest = np.median(p.thalweg - 100.0)
    level = np.median(bed.bed_level(p, bed.noise(p)) - 100.0)
    assert lowest < -0.05
    assert abs(level) < 0.05 / 3


# --- the noise of samples cut from a raster -------------------------------------------
# A sample bilinearly interpolated at fractions (u, v) of a cell from white noise of
# standard deviation s is a weighted sum of four independent draws: its standard
# deviation is s·√(Q(u)·Q(v)), Q(u) = (1 − u)² + u² (the root sum of squares of the
# bilinear weights; closed form), and its mean square over positions (2/3)²·s²
# (∫₀¹ Q(u) du = 2/3). Neighbouring samples a pixel apart share pixels; samples two
# pixels apart along a grid row share none.

def _white_raster(rows, cols, seed):
    from affine import Affine

    g = np.random.default_rng(seed).standard_normal((rows, cols))
    return g, Affine(1.0, 0.0, 0.0, 0.0, -1.0, float(rows))   # unit pixels, north up


def _q(u):
    return (1 - u) ** 2 + u ** 2


@pytest.mark.parametrize("u, v", [(0.5, 0.5), (0.5, 0.0), (0.25, 0.4), (0.0, 0.0)])
def test_noise_of_a_grid_row_sampled_bilinearly_is_the_samples_own(u, v):
    from reachgauge.inputs.sampler import bilinear

    # 400 grid rows, each sampled every pixel at the same fractions (u, v) of its
    # cells: every sample is normal with s.d. √(Q(u)Q(v)) (s = 1), and the samples two
    # places apart are independent. Neighbours are not (at u = v = 0.5 the residual
    # about them reads √(1/3) of the sample's s.d.: weights ¼(−1, 1, 1, −1) on the
    # pixel columns against ½(1, 1)), so an estimator that assumes independent
    # neighbours fails here. Tolerance 3 %: the median over 400 rows of a MAD of
    # ~200 residuals has a standard error near 1.17/√200/√400·1.25 ≈ 0.5 % (the MAD's
    # asymptotic s.d. 1.17 σ/√n for normal data, Rousseeuw & Croux 1993 [memory]).
    g, T = _white_raster(402, 240, seed=3)
    n = 200
    col = 10 + u + np.arange(n)                   # pixel-centre coordinates
    row = 1 + v + np.arange(400)
    # pixel centre (j, i) sits at x = j + 0.5, y = rows − (i + 0.5)
    pts = np.stack(np.broadcast_arrays(col[None, :] + 0.5, 402 - (row[:, None] + 0.5)), -1)
    z = bilinear(g, T, pts)
    p = K.profiles(np.arange(n, dtype=float), z)
    expected = np.sqrt(_q(u) * _q(v))
    assert np.median(bed.noise(p)) == pytest.approx(expected, rel=0.03)


def test_noise_of_oblique_lines_sampled_bilinearly_is_the_samples_own():
    from scipy.stats import median_abs_deviation

    from reachgauge.inputs.sampler import bilinear

    # 600 lines at random angles and positions, sampled every pixel, as the tool cuts
    # transects. The samples' mean square is (2/3)² s² (closed form above; checked
    # here on the draws to 2 %); the estimate is compared with the normal-scaled MAD
    # of the sampled noise itself (scipy), the same robust scale (it reads a little
    # below the root mean square: the samples are a mixture of normals of s.d.
    # s/2 … s). Tolerance 4 %: sampling error about 1 % (as above) and the small
    # correlation left between samples two steps apart on a diagonal (below 0.003).
    g, T = _white_raster(700, 700, seed=5)
    rng = np.random.default_rng(11)
    n = 121
    theta = rng.uniform(0, np.pi, 600)
    start = rng.uniform(150, 550, (600, 2))
    s = np.arange(n) - n // 2
    d = np.column_stack([np.cos(theta), np.sin(theta)])
    z = bilinear(g, T, start[:, None, :] + s[None, :, None] * d[:, None, :])
    assert np.sqrt(np.mean(z ** 2)) == pytest.approx(2 / 3, rel=0.02)
    truth = np.median(median_abs_deviation(z, axis=1, scale="normal"))
    p = K.profiles(s.astype(float), z)
    assert np.median(bed.noise(p)) == pytest.approx(truth, rel=0.04)


def test_reach_noise_pools_the_transects_of_one_raster():
    from scipy.stats import median_abs_deviation

    from reachgauge.inputs.sampler import bilinear

    # 300 short lines (31 samples, as a transect at 2 m pixels) at random angles on one
    # white-noise raster. Pooled, the residuals estimate the samples' scale to within
    # 6 % of the normal-scaled MAD of all the sampled noise (scipy): sampling error
    # about 1.17/√(300·27) ≈ 1.3 % (1 s.e.; Rousseeuw & Croux 1993 [memory]), and the
    # masking of bends, which on pure noise leaves out a few of the largest residuals
    # and reads 2-3 % low (measured on seeds 8 and 9 at 31, 61 and 121 samples per line;
    # not a closed form). One line's own figure strays by some 20-35 % (1 s.d., the same
    # MAD asymptotics for ~27 residuals), which the spread of noise() shows.
    g, T = _white_raster(500, 500, seed=8)
    rng = np.random.default_rng(13)
    n = 31
    theta = rng.uniform(0, np.pi, 300)
    start = rng.uniform(100, 400, (300, 2))
    s = np.arange(n) - n // 2
    d = np.column_stack([np.cos(theta), np.sin(theta)])
    z = bilinear(g, T, start[:, None, :] + s[None, :, None] * d[:, None, :])
    truth = median_abs_deviation(z.ravel(), scale="normal")
    p = K.profiles(s.astype(float), z)
    assert bed.reach_noise(p) == pytest.approx(truth, rel=0.06)
    per = bed.noise(p)
    assert np.std(per) / np.mean(per) > 0.15


def test_reach_noise_of_clean_short_and_empty_profiles():
    # clean Vs (no noise; the kink is a bend, left out): 0; profiles of 3-4 points: the
    # median of their own figures (nearest-neighbour residuals); no valid profile: 0
    x = np.arange(41, dtype=float)
    assert bed.reach_noise(K.profiles(x, np.abs(x[None, :] - [[20.0], [13.0]]))) == 0.0
    short = K.profiles(np.arange(4, dtype=float), np.array([[0, 1, 0, 1], [0, 2, 0, 2.0]]))
    assert bed.reach_noise(short) == pytest.approx(np.median(bed.noise(short)))
    assert bed.reach_noise(K.profiles(np.arange(2, dtype=float), np.zeros((3, 2)))) == 0.0
