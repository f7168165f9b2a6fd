"""Flat thalwegs and the baseflow correction, for one section and for every
profile of a reach at once.

What the checks lean on (sources beside each check):
- closed-form plane geometry: a flat run of known width; Archimedes' quadrature of
  the parabola, area = (2/3)·width·depth, and the trapezoid rule on a parabola with
  N equal steps, (2/3)·W·D·(1 − 1/N²) (exact for the section's straight segments);
- synthetic sections of known shape (tests/section_fixtures.py): a hydro-flattened
  bed is flat by construction, a noisy one is not.
"""

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from reachgauge import CrossSection
from reachgauge.errors import InputError
from reachgauge.hydraulics.bankfull import (baseflow_correct, correct_profiles, flat_thalweg_width,
                                            is_flat_thalweg, pick_bankfull)
from reachgauge.kernel import sections as K

from section_fixtures import compound_channel, trapezoid, v_valley

FAST = settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])


# ---------------------------------------------------------------- flat thalweg
def test_flat_bottom_width_closed_form():
    syn = trapezoid()                           # bed from 2.25 to 8.25: 6 m flat
    cs = CrossSection(*syn.vertices)
    assert flat_thalweg_width(cs) == pytest.approx(6.0, abs=1e-12)
    assert is_flat_thalweg(cs, min_points=2)   # a 4-vertex survey, not a sampled DEM
    assert not is_flat_thalweg(cs)             # default: 3 points in a run
    v = CrossSection(*v_valley().vertices)
    assert flat_thalweg_width(v) == 0.0 and not is_flat_thalweg(v)


def test_flat_thalweg_hydro_flattened_versus_noisy_bed():
    for seed in range(5):
        flat = compound_channel(flat_bed=True, noise=0.05, seed=seed)
        noisy = compound_channel(noise=0.05, seed=seed)
        assert flat_thalweg_width(flat.section) == pytest.approx(5.0)   # 6 m bed, 1 m samples
        assert is_flat_thalweg(flat.section)
        assert "flat-thalweg" in pick_bankfull(flat.section).flags
        assert not is_flat_thalweg(noisy.section)


@FAST
@given(st.floats(0.5, 20.0), st.floats(0.02, 1.0), st.integers(0, 1000))
def test_property_flat_run_width(width, lift, seed):
    # a flat run of known width, every other point at least `lift` above it
    rng = np.random.default_rng(seed)
    left = np.sort(rng.uniform(-30, -1, 6))
    right = np.sort(rng.uniform(1, 30, 6))
    x = np.concatenate([left, [0.0, width], width + right])
    z = np.concatenate([lift + rng.uniform(0, 5, 6), [0.0, 0.0], lift + rng.uniform(0, 5, 6)])
    assert flat_thalweg_width(CrossSection(x, z), tolerance=0.01) == pytest.approx(width)


# --------------------------------------------------------------- baseflow correction
def test_baseflow_depth_adds_a_parabola():
    cs = CrossSection(*trapezoid().vertices)    # flat bed 6 m wide at 100.0
    d = 0.4
    new = baseflow_correct(cs, depth=d)
    assert new.thalweg == pytest.approx(100.0 - d, abs=1e-12)   # centre of the parabola
    added = float(new.geometry(100.0).area)
    n = 100
    # trapezoid rule on a parabola with 100 equal steps (exact for the section's lines)
    assert added == pytest.approx(2 / 3 * 6.0 * d * (1 - 1 / n ** 2), rel=1e-12)
    # Archimedes: (2/3) W D, to the 1/N² = 0.01 % of the discretisation
    assert added == pytest.approx(2 / 3 * 6.0 * d, rel=1.5e-4)
    # above the bed the whole difference is the added area
    st = np.linspace(100.0, 101.5, 7)
    np.testing.assert_allclose(new.geometry(st).area - cs.geometry(st).area, added, rtol=1e-10)


def test_baseflow_area_is_added_exactly():
    syn = compound_channel(flat_bed=True, noise=0.05, seed=1)
    a = 1.7
    new = baseflow_correct(syn.section, area=a)
    st = np.array([100.0, 100.5, 101.2])
    np.testing.assert_allclose(new.geometry(st).area - syn.section.geometry(st).area, a, rtol=1e-9)
    w = flat_thalweg_width(syn.section)
    # the depth that carries it: A = (2/3) W D (1 - 1/N²)
    assert 100.0 - new.thalweg == pytest.approx(a / (2 / 3 * w * (1 - 1e-4)), rel=1e-9)


def test_baseflow_on_a_bed_that_is_not_flat_uses_the_two_thalweg_segments():
    cs = CrossSection(np.arange(0.0, 21.0), np.abs(np.arange(0.0, 21.0) - 10.0) * 0.25)
    new = baseflow_correct(cs, depth=0.5)
    # parabola over [9, 11]: (2/3) × 2 × 0.5 × (1 − 1/100²)
    added = float(new.geometry(1.0).area - cs.geometry(1.0).area)
    assert added == pytest.approx(2 / 3 * 2.0 * 0.5 * (1 - 1e-4), rel=1e-10)
    assert new.thalweg == pytest.approx(-0.5)
    assert new.thalweg_offset == pytest.approx(10.0)


@FAST
@given(st.floats(0.5, 30.0), st.floats(0.01, 3.0))
def test_property_baseflow_area_closed_form(width, depth):
    x = np.array([-5.0, 0.0, width, width + 5.0])
    cs = CrossSection(x, np.array([2.0, 0.0, 0.0, 2.0]))
    new = baseflow_correct(cs, depth=depth)
    added = float(new.geometry(0.0).area)
    assert added == pytest.approx(2 / 3 * width * depth, rel=1.5e-4)   # Archimedes, 1/N²
    assert new.thalweg == pytest.approx(-depth, rel=1e-9)


def test_baseflow_bad_input_and_zero():
    cs = CrossSection(*trapezoid().vertices)
    for kw in ({}, {"depth": 0.3, "area": 1.0}, {"depth": -0.1}, {"area": float("inf")}):
        with pytest.raises(InputError):
            baseflow_correct(cs, **kw)
    same = baseflow_correct(cs, depth=0.0)
    assert float(same.geometry(101.0).area) == pytest.approx(float(cs.geometry(101.0).area))
    banked = CrossSection(*trapezoid().vertices, banks=(1.0, 9.0))
    assert baseflow_correct(banked, depth=0.2).banks == (1.0, 9.0)


def test_baseflow_over_a_reach_corrects_each_row_closed_form():
    # rows of different lengths and flat widths W, each corrected by its own D or area;
    # a 2-point flat run is a bed span between two surveyed vertices (no widening)
    widths, depths, areas = [2.0, 6.0, 11.0], [0.2, 0.5, 1.0], [0.4, 1.7, 5.0]
    rows = [(np.array([-5.0, 0.0, w, w + 5.0]), np.array([2.0, 0.0, 0.0, 2.0])) for w in widths]
    rows.insert(1, (np.array([0.0, 1.0]), np.array([1.0, 0.0])))       # invalid: kept as it is
    m = 4
    x = np.array([np.pad(r[0], (0, m - r[0].size), constant_values=np.nan) for r in rows])
    z = np.array([np.pad(r[1], (0, m - r[1].size), constant_values=np.nan) for r in rows])
    p = K.profiles(x, z)
    by_depth = correct_profiles(p, depth=np.insert(depths, 1, 0.0))
    by_area = correct_profiles(p, area=np.insert(areas, 1, 0.0))
    assert by_depth.size[1] == 2 and by_area.size[1] == 2
    for j, (w, d, a) in zip([0, 2, 3], zip(widths, depths, areas)):
        for q, want, tol in ((by_depth, 2 / 3 * w * d * (1 - 1e-4), 1e-12), (by_area, a, 1e-9)):
            n = int(q.size[j])
            cs = CrossSection(q.x[j, :n], q.z[j, :n])
            # everything below the old flat bed is the added parabola
            assert float(cs.geometry(0.0).area) == pytest.approx(want, rel=tol)


def _reach(sections):
    """Profiles of several fixture sections (one reach)."""
    m = max(s.section.offset.size for s in sections)
    x = np.full((len(sections), m), np.nan)
    z = np.full((len(sections), m), np.nan)
    for i, s in enumerate(sections):
        n = s.section.offset.size
        x[i, :n], z[i, :n] = s.section.offset, s.section.elevation
    return K.profiles(x, z)


def test_baseflow_leaves_sections_with_a_bed_alone():
    # noisy lidar ground (5 cm) is bed, not water: no correction, the same picks as
    # without baseflow. Before, every section was deepened, the noise scale collapsed
    # on the smooth synthetic bed and the picks fell on it (about 100.0 m instead of
    # the built bank top at 101.5 m, rated "high")
    from reachgauge.hydraulics import bankfull

    p = _reach([compound_channel(noise=0.05, seed=s) for s in range(5)])
    plain = bankfull.pick_all(p, bankfull.BankfullParams())
    with_bf = bankfull.pick_all(p, bankfull.BankfullParams(baseflow_depth=0.3))
    np.testing.assert_allclose(with_bf.stage, plain.stage)
    assert not any("baseflow-added" in c for c in with_bf.codes)
    # the built bank top, within the 3σ break rise (0.15 m) of this noise
    assert np.all(np.abs(with_bf.stage - 101.5) < 0.15)


def test_baseflow_corrects_the_flat_water_sections_and_flags_them():
    # hydro-flattened: the channel bottom is the water surface, flat to the mm; the
    # banks and plains keep 3 cm of lidar noise. With 0.3 m of water added back the
    # bankfull stage stays at the built bank top (101.5 m) within the break rise
    # (max(5 cm, 3σ) = 9 cm), the depth is measured from the new bed (0.3 m lower)
    from reachgauge.hydraulics import bankfull

    flat = [compound_channel(noise=0.03, seed=s, flat_bed=True) for s in range(3)]
    noisy = [compound_channel(noise=0.03, seed=10 + s) for s in range(2)]
    p = _reach(flat + noisy)
    got = bankfull.pick_all(p, bankfull.BankfullParams(baseflow_depth=0.3))
    added = np.array(["baseflow-added" in c for c in got.codes])
    assert added.tolist() == [True, True, True, False, False]
    assert np.all(np.abs(got.stage - 101.5) < 0.09 + 0.03)
    np.testing.assert_allclose(got.profiles.thalweg[:3], 100.0 - 0.3, atol=1e-3)
    np.testing.assert_allclose(got.profiles.thalweg[3:], p.thalweg[3:])
