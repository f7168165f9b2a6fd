"""Bankfull picking and reach summaries (flat thalwegs and the baseflow correction:
test_bankfull_baseflow.py; the vectorised step against the per-transect code it
replaced: test_bankfull_regression.py).

What the checks lean on (sources beside each check):
- synthetic sections of known shape (tests/section_fixtures.py): the bankfull stage is
  the lower bank top by construction; a V valley has none;
- closed-form plane geometry: trapezoid water edges b/2 + z·d from the centre;
- reference libraries: scipy.stats.median_abs_deviation, numpy.percentile;
- published regional curves (REFERENCES.md): Bieger et al., 2015, JAWRA, national
  depth D = 0.30·DA^0.213 (m, km²) [memory]; Bent & Waite, 2013, USGS SIR
  2013-5155, D = 0.9502·DA^0.2960 (ft, mi²) [read via a reproduction]; 1 mi =
  1609.344 m and 1 ft = 0.3048 m exactly (international yard and pound, 1959).

Tolerances on picked stages come from the method's own scales: the trial-stage step
(at most 1 cm here), the 5 cm break rise (half of it for the bench index's centred
window), and the DEM noise σ added (a bank top cannot be placed closer than the
noise that blurs it: a few σ).
"""

import math

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from scipy.stats import median_abs_deviation

from reachgauge import CrossSection
from reachgauge.config import BANKFULL_METHODS, RunConfig
from reachgauge.errors import InputError
from reachgauge.flags import FLAGS
from reachgauge.hydraulics.bankfull import (AUTOMATIC_METHODS, DEFAULT_METHOD, BankfullPick,
                                            candidate_stages, pick_bankfull, profile_noise,
                                            regional_coef_to_si, regional_depth, summarise_reach)

from section_fixtures import compound_channel, random_profiles as profiles, trapezoid, v_valley

FAST = settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])


# ------------------------------------------------------------------ vocabulary
def test_methods_and_default_match_the_config():
    assert set(AUTOMATIC_METHODS) | {"fixed-depth", "regional"} == set(BANKFULL_METHODS)
    assert DEFAULT_METHOD == RunConfig().bankfull_method  # evidence: benchmarks/bankfull_methods.py


# ------------------------------------------------- compound channel: clear floodplain
def test_clean_compound_channel_every_method_at_the_floodplain():
    syn = compound_channel()  # bank tops at 101.5, floodplains 25 m wide, no noise
    cand = candidate_stages(syn.section)
    # step <= 1 cm; bench index is centred on a 5 cm window: half of it + one step
    for m, tol in (("bank-top", 0.01), ("min-width-depth", 0.01),
                   ("max-hydraulic-depth", 0.01), ("bench", 0.035)):
        assert cand[m] == pytest.approx(syn.bankfull, abs=tol), m
    pick = pick_bankfull(syn.section)
    assert pick.method == DEFAULT_METHOD
    assert pick.confidence == "high"
    assert pick.depth == pytest.approx(1.5, abs=0.01)
    # banks are the edges half a break rise (2.5 cm) below the pick. The left bank top
    # (offset 31) is a sample: on a 1.5 H:V slope the edge is within 1.5 × (0.025 + 0.01) m.
    # The right one (41.5) falls between samples 41 and 42, whose line cuts the corner:
    # the edge lies on that chord, within one sample step of the true corner.
    assert pick.left_bank == pytest.approx(syn.bank_offsets[0], abs=0.06)
    assert syn.bank_offsets[1] - 0.06 <= pick.right_bank <= 42.0
    # a perfectly flat synthetic bed is, rightly, what a water surface looks like
    assert "flat-thalweg" in pick.flags
    assert set(pick.candidates) == set(AUTOMATIC_METHODS)


@pytest.mark.parametrize("sigma", [0.03, 0.05])
def test_noisy_compound_channel_methods_near_the_floodplain(sigma):
    # tolerance 3σ + 5 cm: the noise scatters the floodplain and bank by σ, and the water
    # runs out across it over a few σ of stage; min-width-depth 4σ + 5 cm, since its
    # minimum is flat and noise moves it (its bias is in the benchmark's table)
    for seed in range(8):
        syn = compound_channel(noise=sigma, seed=seed)
        cand = candidate_stages(syn.section)
        for m in ("bank-top", "bench", "max-hydraulic-depth"):
            assert cand[m] == pytest.approx(syn.bankfull, abs=3 * sigma + 0.05), (m, seed)
        assert cand["min-width-depth"] == pytest.approx(syn.bankfull, abs=4 * sigma + 0.05), seed
        pick = pick_bankfull(syn.section)
        assert pick.confidence in ("high", "medium")
        assert "no-clear-break" not in pick.flags and "spills-first" not in pick.flags
        assert "flat-thalweg" not in pick.flags  # a noisy bed is not flat


def test_noise_estimate_recovers_the_added_noise():
    # residuals about the neighbours' line have variance 1.5 σ² on an even grid (and
    # σ²(1 + w² + (1 − w)²) on an uneven one); the MAD of 400 residuals scatters by
    # about 1.2/sqrt(400) = 6 %, and the median of 10 seeds by less: 10 %
    x = np.arange(400.0)
    uneven = np.cumsum(np.random.default_rng(0).uniform(0.3, 1.7, 400))
    for xs in (x, uneven):
        est = [profile_noise(CrossSection(xs, 0.01 * xs + np.random.default_rng(s).normal(0, 0.05, 400)))
               for s in range(10)]
        assert np.median(est) == pytest.approx(0.05, rel=0.1)
    assert profile_noise(compound_channel().section) == pytest.approx(0.0, abs=1e-12)
    # a real section's few bends (10 of 71 residuals here) bias it high, never low:
    # 14 % contamination moves the MAD's quantile from 0.5 to 0.58 → about +19 %
    est = [profile_noise(compound_channel(noise=0.05, seed=s).section) for s in range(10)]
    assert 0.05 <= np.median(est) <= 0.05 * 1.3


def test_asymmetric_section_takes_the_lower_bank_top():
    # left bank top at 101.5, right at 102.3: bankfull is the lower (the first spill)
    syn = compound_channel(bank_rise=(0.0, 0.8), noise=0.03, seed=4)
    pick = pick_bankfull(syn.section, "bank-top")
    assert pick.stage == pytest.approx(101.5, abs=3 * 0.03 + 0.05)
    # left edge at the left bank top; right edge on the right bank at about 101.5:
    # bed edge 39.25 + 1.5 × 1.5 = 41.5 (closed form), within the stage tolerance × z
    assert pick.left_bank == pytest.approx(syn.bank_offsets[0], abs=0.3)
    assert pick.right_bank == pytest.approx(41.5, abs=0.3)
    assert pick.right_bank < syn.bank_offsets[1] - 0.5


def test_one_sided_floodplain_and_terrace():
    one = compound_channel(floodplain=(25.0, 0.0), noise=0.03, seed=1)
    assert pick_bankfull(one.section).stage == pytest.approx(101.5, abs=0.14)
    ter = compound_channel(floodplain=(10.0, 10.0), terrace=(1.0, 3.0, 12.0), noise=0.03, seed=1)
    # the first floodplain, not the terrace a metre above it
    assert pick_bankfull(ter.section).stage == pytest.approx(101.5, abs=0.14)


def test_inset_bench_bench_index_finds_it_bank_top_does_not():
    # a 3 m flat bench 0.8 m above the bed: Riley's bench index is defined to report
    # the first bench; the bank-top method needs a spread of half the channel's width
    syn = compound_channel(bench=(0.8, 3.0, "left"), noise=0.03, seed=0)
    cand = candidate_stages(syn.section)
    assert cand["bench"] == pytest.approx(100.8, abs=3 * 0.03 + 0.05)
    assert cand["bank-top"] == pytest.approx(syn.bankfull, abs=3 * 0.03 + 0.05)
    pick = pick_bankfull(syn.section, "bank-top")
    assert pick.confidence == "medium"
    assert "methods-disagree" in pick.flags


# -------------------------------------------------------------- no floodplain at all
@pytest.mark.parametrize("method", AUTOMATIC_METHODS)
def test_v_valley_every_method_no_confidence_no_clear_break(method):
    # a V has no floodplain: the stage is a fallback, confidence "none" (issue 9)
    for syn in [v_valley()] + [v_valley(noise=0.05, seed=s) for s in range(6)]:
        pick = pick_bankfull(syn.section, method)
        assert pick.confidence == "none", syn
        assert "no-clear-break" in pick.flags
        assert pick.source in ("methods-median", "profile-end") and pick.source == pick.fallback
        assert syn.section.thalweg <= pick.stage <= syn.section.top + 1e-9


def test_clean_v_valley_has_no_candidate_and_falls_back_to_the_profile_end():
    syn = v_valley()
    assert all(np.isnan(v) for v in candidate_stages(syn.section).values())
    pick = pick_bankfull(syn.section)
    assert pick.fallback == "profile-end" and pick.source == "profile-end"
    assert pick.stage == pytest.approx(syn.section.top)
    assert set(pick.flags) >= {"no-clear-break", "spills-first"}


def test_trapezoid_cut_at_its_bank_tops_spills_first():
    syn = trapezoid(noise=0.02, seed=3)
    pick = pick_bankfull(syn.section)
    # no floodplain inside the transect: a fallback at the profile's end, no confidence
    assert pick.confidence == "none" and pick.source == "profile-end"
    assert "spills-first" in pick.flags
    assert pick.stage == pytest.approx(syn.section.top)


def test_method_without_a_break_falls_back_to_the_median_of_the_others():
    # A triangular channel (side slopes z = 2 H:V, depth h = 1 m) in a flat floodplain
    # 40 m wide between rising valley walls. In a triangle T = 2zy and A = zy², so the
    # width-depth measure T²/A = 4z at every stage below the bank top (closed form,
    # plane geometry): it has no minimum there to mark, and above the bank top it only
    # rises, so the min-width-depth method finds no break by construction. The floodplain
    # is a clear break for the other methods (the width jumps from 4 m to 40 m; the
    # hydraulic depth A/T = y/2 peaks at the bank top). Noise-free: noise would give
    # T²/A minima of its own, and which of them are marked depends on the draw.
    z, h = 2.0, 1.0
    x = np.arange(-22.0, 22.0 + 1e-9, 0.5)
    ground = np.where(np.abs(x) > 20.0, h + (np.abs(x) - 20.0), np.minimum(np.abs(x) / z, h))
    cs = CrossSection(x, 100.0 + ground)
    y = np.linspace(0.1, 0.99, 50)
    g = cs.geometry(100.0 + y)
    np.testing.assert_allclose(g.top_width ** 2 / g.area, 4 * z, rtol=1e-9)   # the premise
    cand = candidate_stages(cs)
    assert np.isnan(cand["min-width-depth"])
    found = [v for v in cand.values() if np.isfinite(v)]
    assert len(found) == 3
    # the others find the bank top within the 5 cm break rise (package docstring)
    np.testing.assert_allclose(found, 100.0 + h, atol=0.05)
    pick = pick_bankfull(cs, "min-width-depth")
    assert pick.stage == pytest.approx(np.median(found))
    assert pick.fallback == "methods-median" and pick.source == "methods-median"
    assert pick.method == "min-width-depth"
    assert pick.confidence == "none" and "no-clear-break" in pick.flags


# ---------------------------------------------------------------- user-given depths
def test_pick_whose_water_reaches_a_transect_end_is_at_end_though_its_bank_top_is_not():
    # random ground (a Hypothesis finding of test_bankfull_regression.py): the
    # min-width-depth stage is the elevation of the first point, so the water at it
    # reaches the transect's start (closed form: z[0] = stage). The fitted bank top
    # lies well inside; break-at-end asks where the water's edge is, not the bank top
    # (its flag text: the bank may lie beyond the transect)
    z = np.array([
        1.7, 1.5, 1.3, 1.2, 0.9, 1.2, 1.2, 1.4, 1.4, 1.3, 1.4, 1.2, 0.7, 0.5, 0.2, 0.2,
        0.6, 0.4, 0.4, 0.5, 0.6, 0.8, 1.1, 1.2, 1.3, 1.3, 1.2, 1.4, 1.4, 1.2, 1.5, 1.4,
        1.3, 1.7, 1.0, 1.3, 1.7, 1.6, 1.7, 1.6, 1.4, 1.5, 1.4, 1.2, 1.4, 1.6, 1.4, 0.8,
        1.5, 1.5, 1.7, 2.1, 1.8, 1.9, 1.5, 1.8, 1.3, 1.5, 1.1, 1.2, 1.2, 1.3, 1.0, 1.7,
        2.0, 1.5, 1.9, 2.4])
    pick = pick_bankfull(CrossSection(np.arange(z.size, dtype=float), z), "min-width-depth")
    assert pick.source == "min-width-depth" and pick.stage == z[0]
    assert pick.left_bank > 3.0                  # the bank top: more than 3 steps in
    assert "break-at-end" in pick.flags and pick.confidence == "low"


def test_fixed_depth_on_a_trapezoid_closed_form_edges():
    syn = compound_channel()           # channel: b = 6, z = 1.5, centre at offset 36.25
    d = 1.0
    pick = pick_bankfull(syn.section, "fixed-depth", fixed_depth=d)
    assert pick.stage == pytest.approx(100.0 + d, abs=1e-12)
    assert pick.depth == pytest.approx(d, abs=1e-12)
    # trapezoid water edges at b/2 + z d from the centre (closed form)
    assert pick.left_bank == pytest.approx(36.25 - (3.0 + 1.5 * d), abs=1e-9)
    assert pick.right_bank == pytest.approx(36.25 + (3.0 + 1.5 * d), abs=1e-9)
    # every automatic method finds 101.5, half a metre away: they disagree
    assert pick.confidence == "medium" and "methods-disagree" in pick.flags
    agree = pick_bankfull(syn.section, "fixed-depth", fixed_depth=1.5)
    assert agree.confidence == "high" and "methods-disagree" not in agree.flags


def test_fixed_depth_above_the_profile_spills():
    syn = trapezoid()
    pick = pick_bankfull(syn.section, "fixed-depth", fixed_depth=5.0)
    assert pick.stage == pytest.approx(105.0)
    assert "spills-first" in pick.flags and pick.confidence == "low"


def test_regional_depth_published_coefficients_worked():
    # Bieger et al. 2015 national curve [memory]: 0.30 × 100^0.213; by hand
    # 100^0.213 = 10^0.426 = 2.66686 → 0.80006 m
    assert regional_depth(100.0, 0.30, 0.213) == pytest.approx(0.80006, rel=1e-5)
    # Bent & Waite 2013: 0.9502 × 10^0.2960 = 0.9502 × 1.97697 = 1.87852 ft at 10 mi²
    assert regional_depth(10.0, 0.9502, 0.2960) == pytest.approx(1.87852, rel=1e-5)
    # vectorised, against the power law written out with math.pow
    da = np.array([0.5, 3.0, 40.0, 900.0])
    got = regional_depth(da, 0.30, 0.213)
    np.testing.assert_allclose(got, [0.30 * math.pow(a, 0.213) for a in da], rtol=1e-14)


def test_regional_coefficient_conversion_from_us_units():
    # the same stream: 10 mi² = 25.89988110336 km²; depth in ft × 0.3048 = depth in m
    a_si = regional_coef_to_si(0.9502, 0.2960)
    d_m = regional_depth(10.0 * 2.589988110336, a_si, 0.2960)
    assert d_m == pytest.approx(regional_depth(10.0, 0.9502, 0.2960) * 0.3048, rel=1e-12)


def test_regional_pick_uses_the_curve():
    syn = compound_channel(noise=0.03, seed=5)
    pick = pick_bankfull(syn.section, "regional", drainage_area_km2=100.0,
                         regional_coef=0.30, regional_exp=0.213)
    assert pick.depth == pytest.approx(0.30 * 100.0 ** 0.213, rel=1e-12)
    assert pick.stage == pytest.approx(syn.section.thalweg + pick.depth, rel=1e-12)


# ----------------------------------------------------------------------- bad input
@pytest.mark.parametrize("kwargs, words", [
    (dict(method="highest-point"), "bank-top"),
    (dict(method="fixed-depth"), "fixed_depth"),
    (dict(method="fixed-depth", fixed_depth=-0.5), "greater than 0"),
    (dict(method="fixed-depth", fixed_depth=0.0), "greater than 0"),
    (dict(method="fixed-depth", fixed_depth=float("nan")), "finite"),
    (dict(method="regional", regional_coef=0.3, regional_exp=0.2), "drainage_area_km2"),
    (dict(method="regional", drainage_area_km2=10.0), "regional_coef"),
    (dict(method="regional", drainage_area_km2=-3.0, regional_coef=0.3, regional_exp=0.2),
     "drainage area"),
    (dict(method="regional", drainage_area_km2=3.0, regional_coef=0.0, regional_exp=0.2),
     "coefficient"),
    (dict(method="regional", drainage_area_km2=[3.0, 4.0], regional_coef=0.3, regional_exp=0.2),
     "drainage area"),
    (dict(tolerance=-0.1), "tolerance"),
])
def test_bad_arguments_are_input_errors(kwargs, words):
    method = kwargs.pop("method", DEFAULT_METHOD)
    with pytest.raises(InputError) as err:
        pick_bankfull(compound_channel().section, method, **kwargs)
    assert words in str(err.value)
    assert err.value.fix


def test_unknown_method_names_every_allowed_one():
    with pytest.raises(InputError) as err:
        pick_bankfull(compound_channel().section, "auto")
    for m in BANKFULL_METHODS:
        assert m in str(err.value)


def test_not_a_section_is_an_input_error():
    with pytest.raises(InputError):
        pick_bankfull([(0, 1), (1, 0), (2, 1)])


# ------------------------------------------------------------------- property tests
@st.composite
def compound_shapes(draw):
    # resolved by the sampling: a channel of >= 2 m, a floodplain of >= 5 samples
    spacing = draw(st.sampled_from([0.5, 1.0]))
    b = draw(st.floats(2.0, 20.0))
    h = draw(st.floats(0.5, 3.0))
    z = draw(st.floats(0.5, 3.0))
    t = b + 2 * z * h  # bankfull top width
    fl = max(draw(st.floats(1.0, 3.0)) * t, 5 * spacing)
    fr = draw(st.floats(0.0, 3.0)) * t
    return dict(bottom_width=b, bank_height=h, side_slope=z, floodplain=(fl, fr), spacing=spacing)


@FAST
@given(compound_shapes())
def test_property_bank_top_finds_any_clean_compound_channel(shape):
    # floodplain at least one top width wide on one side: the spread is always a
    # floodplain's; tolerance: one stage step (<= 1.5 cm) plus float slack
    syn = compound_channel(**shape)
    got = candidate_stages(syn.section)["bank-top"]
    assert got == pytest.approx(syn.bankfull, abs=0.02)


@FAST
@given(compound_shapes(), st.integers(0, 10_000), st.floats(-50.0, 50.0))
def test_property_mirror_and_datum_shift(shape, seed, shift):
    # a section seen from the other bank, or on another vertical datum, is the same
    # channel: stages shift by the datum (to one stage step), banks mirror. (Confidence
    # is a threshold on differences of stages, so rounding may flip it at the boundary.)
    syn = compound_channel(noise=0.03, seed=seed, **shape)
    x, z = syn.section.offset, syn.section.elevation
    p = pick_bankfull(syn.section)
    m = pick_bankfull(CrossSection(-x[::-1], z[::-1]))
    s = pick_bankfull(CrossSection(x, z + shift))
    step = max(p.break_rise / 5, 1e-9) + 1e-6
    assert m.stage == pytest.approx(p.stage, abs=step)
    assert s.stage == pytest.approx(p.stage + shift, abs=step)
    if m.stage == pytest.approx(p.stage, abs=1e-9):
        assert m.left_bank == pytest.approx(-p.right_bank, abs=1e-6)


@FAST
@given(profiles(), st.sampled_from(AUTOMATIC_METHODS))
def test_property_any_profile_gets_a_pick_never_an_error(p, method):
    cs = CrossSection(*p)
    pick = pick_bankfull(cs, method)
    assert isinstance(pick, BankfullPick)
    assert pick.confidence in ("high", "medium", "low", "none")
    assert (pick.confidence == "none") == ("no-clear-break" in pick.flags)
    assert pick.source == (pick.fallback or method)
    assert set(pick.flags) <= set(FLAGS)
    assert cs.thalweg - 1e-9 <= pick.stage <= max(cs.top, cs.thalweg) + 1e-9
    assert set(pick.candidates) == set(AUTOMATIC_METHODS)
    for v in pick.candidates.values():
        assert np.isnan(v) or cs.thalweg <= v <= cs.top + 1e-9
    if not (pick.left_bank != pick.left_bank):  # not NaN: the banks bracket the thalweg
        assert pick.left_bank <= cs.thalweg_offset <= pick.right_bank


# ------------------------------------------------------------------- reach summary
def test_reach_summary_against_scipy_and_numpy():
    rng = np.random.default_rng(7)
    d = rng.normal(1.2, 0.08, 41)
    d[[5, 30]] = [2.4, 0.3]                    # two transects far off the reach
    d[12] = np.nan                              # one without a pick
    s = np.where(np.isfinite(d), 100.0 + d, np.nan)
    r = summarise_reach(d, s)
    ok = np.isfinite(d)
    assert r.count == 40
    assert r.median_depth == pytest.approx(np.median(d[ok]))
    assert r.spread == pytest.approx(median_abs_deviation(d[ok], scale="normal"))
    q1, q3 = np.percentile(d[ok], [25, 75])
    assert r.iqr == pytest.approx(q3 - q1)
    assert r.median_stage == pytest.approx(np.nanmedian(s))
    # 3 scaled MADs (~0.24 m here): exactly the two planted values are outliers
    assert np.flatnonzero(r.outliers).tolist() == [5, 30]


def test_reach_summary_edge_cases():
    empty = summarise_reach(np.array([np.nan, np.nan]))
    assert empty.count == 0 and np.isnan(empty.median_depth) and not empty.outliers.any()
    same = summarise_reach(np.array([1.0, 1.0, 1.0, 1.005]))
    assert not same.outliers.any()             # the 1 cm spread floor
    with pytest.raises(InputError):
        summarise_reach(np.ones((2, 2)))
    with pytest.raises(InputError):
        summarise_reach(np.ones(3), np.ones(4))
