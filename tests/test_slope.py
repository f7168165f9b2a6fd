"""Profile conditioning and slope fitting.

References: scipy.stats.theilslopes (reference library) for the Theil–Sen
estimate (Theil 1950; Sen 1968) and Sen's asymptotic variance [memory] for the
tolerances of noisy checks; enumeration of all pairs for the pair design;
closed-form profiles (a straight grade with a box-shaped hump, a pit, a hump
with a plunge pool, a row of bowls: removing each by least change gives the
grade itself); synthetic terrain with an embankment and with hydro-flattened
water (tests/terrain_fixtures.py) whose true slope is known.
"""

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import stats

from reachgauge.transects import slope
from reachgauge.config import RunConfig
from reachgauge.batch.pipeline import cut_all
from terrain_fixtures import make_valley_raster, straight_line, write_lines

C = np.arange(0.0, 1000.0, 20.0)


def test_carve_removes_a_box_hump_back_to_the_grade():
    z = 100.0 - 0.002 * C
    raw = z.copy()
    raw[(C >= 400) & (C <= 460)] += 3.0          # an embankment 3 m high, 60 m long
    carved, flag = slope.carve(C, raw)
    np.testing.assert_allclose(carved, z, atol=1e-12)  # the breach is the grade itself
    np.testing.assert_array_equal(flag, (C >= 400) & (C <= 460))


@settings(max_examples=60, deadline=None)
@given(st.lists(st.floats(-50, 50, allow_nan=False), min_size=2, max_size=60))
def test_carve_is_monotone_within_range_idempotent_and_keeps_monotone_profiles(values):
    z = np.asarray(values)
    c = np.arange(z.size) * 10.0
    carved, _ = slope.carve(c, z)
    assert np.all(np.diff(carved) <= 1e-12)        # monotone non-increasing downstream
    assert carved.min() >= z.min() - 1e-12 and carved.max() <= z.max() + 1e-12  # grades between stations
    np.testing.assert_allclose(slope.carve(c, carved)[0], carved, atol=1e-9)  # nothing left to move
    mono = np.minimum.accumulate(z)
    np.testing.assert_allclose(slope.carve(c, mono)[0], mono)  # already monotone: unchanged


def test_carve_skips_nan_and_holds_end_runs_level():
    """Closed forms. A trailing hump (3.5 and 3.6 m above the last low station)
    costs less to breach (7.1 m of moves) than raising the stations before it
    onto a grade up to it (12.4 m): held level at 6. A low first station costs
    less to fill (1.6 m) than lowering the two after it (2.6 m): raised level
    with the next."""
    z = np.array([10.0, 9.0, np.nan, 8.0, 7.0, 6.0, 9.5, 9.6])
    carved, flag = slope.carve(np.arange(8.0), z)
    assert np.isnan(carved[2])
    np.testing.assert_allclose(carved[[0, 1, 3, 4, 5, 6, 7]], [10, 9, 8, 7, 6, 6, 6])
    np.testing.assert_array_equal(flag, [False] * 6 + [True, True])
    carved, flag = slope.carve(np.arange(5.0), np.array([7.4, 9.0, 8.0, 7.0, 6.0]))
    np.testing.assert_allclose(carved, [9, 9, 8, 7, 6])
    np.testing.assert_array_equal(flag, [True] + [False] * 4)


PIT = dict(start=1000.0, length=20.0, depth=0.5)     # 0.5 m over two stations at 10 m


def _grade_with_pit(c, noise=None):
    z = 100.0 - 0.002 * c
    pit = (c >= PIT["start"]) & (c < PIT["start"] + PIT["length"])
    return z - PIT["depth"] * pit + (0.0 if noise is None else noise), pit


def test_a_pit_is_filled_to_the_grade_and_the_slopes_stay_true():
    """A 0.5 m pit over two stations in a 0.002 grade (10 m spacing, 200 m
    window). Closed form: filling the pit is the grade itself, so every
    station slope is 0.002 (float rounding). Breaching alone (the old carving)
    lowered the 250 m downstream to the pit floor (slopes near the floor)
    and doubled the slope just upstream."""
    c = np.arange(0.0, 2000.0 + 1e-9, 10.0)
    z, pit = _grade_with_pit(c)
    carved, flag = slope.carve(c, z)
    np.testing.assert_allclose(carved, 100.0 - 0.002 * c, atol=1e-12)
    np.testing.assert_array_equal(flag, pit)
    fit = slope.profile_slopes(c, carved, 200.0, 1e-4)
    np.testing.assert_allclose(fit.station, 0.002, rtol=1e-9)
    assert not fit.floored.any() and not slope.reshaped(z, carved)


def test_a_pit_in_a_noisy_profile_leaves_the_slopes_within_noise():
    """The same pit with Gaussian noise σ = 2 cm. The exact Theil–Sen slope of a
    21-station window has standard error se = 7.4e-5 (3.7 % of the slope; Sen's
    asymptotic variance, above). Stations 20–300 m downstream and 150 m
    upstream of the pit stay within 8 se of the truth: the largest of ~45
    correlated errors of the raw noisy profile stays under about 4.3 se, and
    conditioning noise moves stations onto grades between noisy neighbours,
    which widens that by up to about 1.5× (the clean-slope case of the
    comparison in slope's docstring). The old carving was about 26 se off
    both ways."""
    rng = np.random.default_rng(12)
    c = np.arange(0.0, 2000.0 + 1e-9, 10.0)
    z, _ = _grade_with_pit(c, rng.normal(0, 0.02, c.size))
    fit = slope.profile_slopes(c, slope.carve(c, z)[0], 200.0, 1e-4)
    se = _theil_sen_se(np.arange(21) * 10.0, 0.02)
    end = PIT["start"] + PIT["length"]
    down = (c >= end) & (c <= end + 280.0)
    up = (c >= PIT["start"] - 150.0) & (c < PIT["start"])
    assert np.all(np.abs(fit.station[down | up] - 0.002) <= 8 * se)


def test_culvert_and_its_plunge_pool_are_both_removed_to_the_grade():
    """A 1.5 m embankment over three stations with a 0.8 m scour pool over the
    next three (10 m spacing, 0.002 grade). Closed form: breaching the hump and
    filling the pool give the grade itself. Breaching alone lowered 400 m
    downstream of the pool; filling alone would raise 750 m upstream of the
    hump."""
    c = np.arange(0.0, 2000.0 + 1e-9, 10.0)
    grade = 100.0 - 0.002 * c
    z = grade + 1.5 * ((c >= 1000) & (c < 1030)) - 0.8 * ((c >= 1030) & (c < 1060))
    carved, flag = slope.carve(c, z)
    np.testing.assert_allclose(carved, grade, atol=1e-12)
    np.testing.assert_array_equal(flag, (c >= 1000) & (c < 1060))


def test_kettle_like_depressions_flag_the_reach_and_single_features_do_not():
    """Depressions 1 m deep and 40 m long every 100 m (sin² bowls) in a 0.002
    grade: each is filled to the grade (closed form), moving 30 % of the
    stations by more than RESHAPE_MOVE, so the reach is flagged; the single
    pit of the test above moves 1 %."""
    c = np.arange(0.0, 2000.0 + 1e-9, 10.0)
    grade = 100.0 - 0.002 * c
    phase = (c % 100.0) / 40.0
    z = grade - np.where(phase < 1, np.sin(np.pi * phase) ** 2, 0.0)
    carved, _ = slope.carve(c, z)
    np.testing.assert_allclose(carved, grade, atol=1e-12)
    assert np.mean(np.abs(carved - z) > slope.RESHAPE_MOVE) == pytest.approx(0.3, abs=0.01)
    assert slope.reshaped(z, carved)
    z, _ = _grade_with_pit(c)
    assert not slope.reshaped(z, slope.carve(c, z)[0])


def test_windowed_theil_sen_matches_scipy_per_window():
    rng = np.random.default_rng(11)
    z = 50 - 0.003 * C + rng.normal(0, 0.05, C.size)
    z[7] = np.nan
    z[20] += 2.0                                    # an outlier the robust fit shrugs off
    got = slope.theil_sen_windows(C, z, 200.0)
    for i, c in enumerate(C):
        w = (np.abs(C - c) <= 100.0) & np.isfinite(z)
        ref = stats.theilslopes(z[w], C[w]).slope  # scipy reference
        assert got[i] == pytest.approx(ref, rel=1e-12, abs=1e-15)


def _theil_sen_se(c, sigma):
    """Standard error of the exact Theil–Sen slope over points ``c`` with
    Gaussian noise ``sigma``: its asymptotic variance is π/3 times that of
    least squares, σ² / Σ(c − c̄)² (Sen 1968; efficiency 3/π for normal errors
    and evenly spread x [memory])."""
    return sigma * np.sqrt(np.pi / 3 / np.sum((c - c.mean()) ** 2))


def test_pairs_are_every_pair_or_the_long_ones_up_to_the_budget():
    """Checked against enumeration of all pairs of n points: every pair when
    n(n−1)/2 fits the budget; otherwise distinct pairs at least ⌈(n−1)/2⌉ apart,
    as many as the budget allows."""
    ns = np.arange(0, 90)
    for budget in (1, 10, 55, 512):
        i, j, valid = slope._pairs(ns, budget)
        assert i.shape[1] <= budget
        for r, n in enumerate(ns):
            got = set(zip(i[r][valid[r]].tolist(), j[r][valid[r]].tolist()))
            every = {(a, b) for a in range(n) for b in range(a + 1, n)}
            if len(every) <= budget:
                assert got == every
            else:
                long = {(a, b) for a, b in every if b - a >= (n - 1 + 1) // 2}
                assert got <= long and len(got) == valid[r].sum() == min(budget, len(long))


def test_dense_profile_gives_the_exact_estimate_within_its_noise():
    """0.5 m spacing over 5 km, slope 0.002, Gaussian noise σ = 0.05 m (about
    lidar noise on open ground, common practice), 200 m window: 401 stations
    per window, past the pair budget. Reference: scipy.stats.theilslopes over
    each station's full window (every 50th station). Each station's bounded
    estimate is within 4 standard errors of the exact estimate (its own noise,
    from Sen's asymptotic variance), and the rms difference is below one
    standard error: thinning the pairs adds less scatter than the noise
    already puts in the exact estimate. Estimating from 21 evenly spread
    stations would give an rms difference of about 4 standard errors."""
    rng = np.random.default_rng(8)
    sigma, window = 0.05, 200.0
    c = np.arange(0.0, 5000.0 + 1e-9, 0.5)
    z = 100.0 - 0.002 * c + rng.normal(0, sigma, c.size)
    got = slope.theil_sen_windows(c, z, window)
    idx = np.arange(0, c.size, 50)
    wins = [np.abs(c - c[k]) <= window / 2 for k in idx]
    ref = np.array([stats.theilslopes(z[w], c[w]).slope for w in wins])  # scipy reference
    se = np.array([_theil_sen_se(c[w], sigma) for w in wins])
    diff = got[idx] - ref
    assert np.all(np.abs(diff) <= 4 * se)
    assert np.sqrt(np.mean((diff / se) ** 2)) < 1.0


def test_reach_fit_is_scipy_up_to_the_budget_and_within_noise_beyond():
    """scipy.stats.theilslopes is the reference: exact for 600 stations (every
    pair fits REACH_PAIR_BUDGET), and within 2 standard errors of the exact
    estimate (Sen's asymptotic variance, as above) for 2,000 noisy stations."""
    rng = np.random.default_rng(9)
    for n, tol in ((600, None), (2000, 2.0)):
        c = np.arange(n) * 2.0
        z = 50.0 - 0.003 * c + rng.normal(0, 0.05, n)
        ref = stats.theilslopes(z, c).slope
        if tol is None:
            assert slope.reach_fit(c, z) == pytest.approx(ref, rel=1e-12)
        else:
            assert abs(slope.reach_fit(c, z) - ref) <= tol * _theil_sen_se(c, 0.05)


def test_reach_fit_exact_on_a_line_and_floor_on_flat_or_adverse():
    assert slope.reach_fit(C, 10 - 0.004 * C) == pytest.approx(-0.004, rel=1e-12)
    flat = slope.profile_slopes(C, np.full(C.size, 5.0), 200.0, 1e-4)
    assert flat.reach == 1e-4 and flat.reach_floored and flat.floored.all()
    assert np.all(flat.station == 1e-4)
    adverse = slope.profile_slopes(C, 5 + 0.001 * C, 200.0, 1e-4)
    assert adverse.reach == 1e-4 and np.all(adverse.station == 1e-4)
    fine = slope.profile_slopes(C, 5 - 0.001 * C, 200.0, 1e-4)
    np.testing.assert_allclose(fine.station, 0.001, rtol=1e-9)
    assert not fine.floored.any()


def test_station_without_window_data_takes_the_reach_slope():
    z = 10 - 0.002 * C
    z[20:30] = np.nan                               # 200 m without a thalweg
    fit = slope.profile_slopes(C, z, 40.0, 1e-5)
    assert np.all(np.isfinite(fit.station))
    np.testing.assert_allclose(fit.station, 0.002, rtol=1e-9)


def test_embankment_is_carved_out_and_slope_stays_right(tmp_path):
    """A road embankment 2.5 m above the floodplain, 12 m crest, 2:1 sides,
    across a straight channel with slope 0.002 (terrain_fixtures): the raw
    profile keeps the hump; the carved profile follows the true bed within
    0.02 m (sampling of a float32 raster); the reach slope is within 1 % and the
    station slopes around the embankment within 3 %."""
    line = straight_line(800, 15.0)
    v = make_valley_raster(tmp_path, line, res=1.0, valley_slope=0.002,
                           embankment=dict(chainage=400.0, height=2.5, crest=12.0, side=2.0))
    write_lines(tmp_path / "s.gpkg", [line])
    cfg = RunConfig(dem=v.path, streams=tmp_path / "s.gpkg", half_width=25, spacing=10)
    _, (r,) = cut_all(cfg)
    p = r.profile
    bed = v.bed(p.chainage.to_numpy())
    hump = np.abs(p.chainage - 400) <= 6
    assert (p.z_raw[hump] > bed[hump] + 3.0).all()      # floodplain + 2.5 m over a 1.5 m deep bed
    np.testing.assert_allclose(p.z_carved, bed, atol=0.02)
    assert p.carved[hump].all() and not p.carved[np.abs(p.chainage - 400) > 20].any()
    assert "carved" in r.transect_flags[int(np.argmax(hump))]
    assert "reshaped-profile" not in r.reach_flags   # one structure is not a reshaped reach
    assert r.reach_slope == pytest.approx(0.002, rel=0.01)
    near = np.abs(r.chainage - 400) <= 100
    np.testing.assert_allclose(r.slope[near], 0.002, rtol=0.03)
    # uncarved, the fit is Theil–Sen and the hump covers few stations of any
    # window, so the slope is barely moved: the robust fit's own protection
    _, (raw,) = cut_all(cfg.replace(carve=False))
    assert raw.reach_slope == pytest.approx(0.002, rel=0.05)
    assert np.array_equal(raw.profile.z_used, raw.profile.z_raw, equal_nan=True)


def test_water_surface_slope_of_hydro_flattened_terrain(tmp_path):
    """Hydro-flattened water 0.4 m deep, flat across the channel, stepping down
    every 50 m along it (terrain_fixtures): the water-surface slope fitted over
    the reach is the channel slope within 2 %; every station is flagged; the
    thalweg is the middle of the flat water, i.e. the channel centre (the line
    is drawn 3 m off it)."""
    line = straight_line(800, -10.0)
    v = make_valley_raster(tmp_path, line, res=1.0, bottom_width=6.0, valley_slope=0.0015,
                           water=dict(depth=0.4, step=50.0))
    write_lines(tmp_path / "s.gpkg", [line], offset=3.0)
    cfg = RunConfig(dem=v.path, streams=tmp_path / "s.gpkg", half_width=25, slope_source="water",
                    slope_window=300.0)
    _, (r,) = cut_all(cfg)
    assert r.reach_slope == pytest.approx(0.0015, rel=0.02)
    assert all("water-surface" in f for f in r.transect_flags)
    assert "water-surface" in r.reach_flags and r.slope_source == "water"
    # The channel centre is 3 m to the right of the drawn line; the water is
    # 7.6 m wide. Stations exactly on a step (every 200 m here) sample a blend
    # of two levels, which is not flat: there the thalweg is the low end of the
    # water. Elsewhere the middle of the water is found within one pixel.
    on_step = np.isclose(r.chainage % 50, 0) & (r.chainage > 0)
    np.testing.assert_allclose(r.thalweg_shift[~on_step], 3.0, atol=1.0)
    assert np.all(np.abs(r.thalweg_shift[on_step] - 3.0) <= 3.8 + 1e-9)  # still on the water
    # the profile is the water: within 1 cm of the stepped level off the steps
    level = v.bed(np.floor(r.chainage / 50) * 50) + 0.4
    np.testing.assert_allclose(r.profile.z_raw[~on_step], level[~on_step], atol=0.01)
