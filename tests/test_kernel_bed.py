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
