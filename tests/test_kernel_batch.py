"""The section kernel on many profiles at once (kernel.sections, kernel.solver).

References: closed-form trapezoids (A = (b + z y) y, P = b + 2 y sqrt(1 + z²);
standard geometry); an independent brute-force midpoint integration of the water
connected to the thalweg (as in test_section_properties.py); and the kernel's own
one-row view (CrossSection) for ragged rows with gaps, which checks that padding
and compaction change nothing.
"""

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from reachgauge import CrossSection
from reachgauge.kernel import sections as K
from reachgauge.kernel import solver

from test_section_properties import brute_force


def trapezoids(x, b, z, depth):
    """One row per (b, z): trapezoid of bottom b, side slope z, banks at depth, flat beyond."""
    return np.array([np.clip((np.abs(x) - bi / 2) / zi, 0, depth) for bi, zi in zip(b, z)])


def test_closed_form_trapezoids_many_at_once():
    x = np.linspace(-20, 20, 401)
    b = np.array([2.0, 4.0, 6.0, 8.0])
    z = np.array([1.0, 1.5, 2.0, 3.0])
    p = K.profiles(x, trapezoids(x, b, z, 2.0))
    y = np.linspace(0, 2.0, 11)
    w = K.wet(p, np.tile(y, (4, 1)))
    np.testing.assert_allclose(w.area, (b[:, None] + z[:, None] * y) * y, rtol=1e-9, atol=1e-9)
    np.testing.assert_allclose(w.wetted_perimeter[:, 1:],
                               (b[:, None] + 2 * y[1:] * np.sqrt(1 + z[:, None] ** 2)), rtol=1e-9)
    np.testing.assert_allclose(w.top_width[:, 1:], b[:, None] + 2 * z[:, None] * y[1:], rtol=1e-9)


def test_count_below_matches_searchsorted():
    rng = np.random.default_rng(1)
    rows = np.sort(rng.normal(size=(50, 37)), axis=1)
    rows[:, 30:] = np.inf
    vals = rng.normal(size=(50, 9)) * 2
    vals[:, 0] = rows[:, 3]                      # ties count as not below
    got = K.count_below(rows, vals)
    ref = np.array([np.searchsorted(rows[i], vals[i], side="left") for i in range(50)])
    np.testing.assert_array_equal(got, ref)


@st.composite
def reach(draw):
    t = draw(st.integers(1, 6))
    n = draw(st.integers(3, 25))
    x = np.cumsum(draw(st.lists(st.floats(0.1, 3.0), min_size=n, max_size=n)))
    z = np.array(draw(st.lists(st.lists(st.floats(-3, 3), min_size=n, max_size=n),
                               min_size=t, max_size=t)))
    # knock out some samples: interior gaps and end runs
    mask = np.array(draw(st.lists(st.lists(st.booleans(), min_size=n, max_size=n),
                                  min_size=t, max_size=t)))
    z = np.where(mask & (np.arange(n) % 3 == 0), np.nan, z)
    return x, z


@settings(max_examples=120, deadline=None)
@given(reach(), st.floats(0, 1))
def test_batch_equals_one_at_a_time_and_brute_force(r, frac):
    x, z = r
    p = K.profiles(x, z)
    stages = p.thalweg + frac * 4.0
    w = K.wet(p, stages)
    for i in range(z.shape[0]):
        ok = np.isfinite(z[i])
        if ok.sum() < 3:
            assert not p.valid[i] and w.area[i, 0] == 0
            continue
        cs = CrossSection(x, z[i], drop_nan=True)
        ref = cs.geometry(stages[i])
        assert w.area[i, 0] == pytest.approx(float(ref.area), rel=1e-9, abs=1e-9)
        assert w.wetted_perimeter[i, 0] == pytest.approx(float(ref.wetted_perimeter), rel=1e-9,
                                                         abs=1e-9)
        assert w.top_width[i, 0] == pytest.approx(float(ref.top_width), rel=1e-9, abs=1e-9)
        assert bool(w.spills[i, 0]) == bool(ref.spills)
        # brute force: midpoint rule on 20,000 strips; its error is about the strip
        # width times the depth near the edges, so 1e-3 of the area plus a little
        bf = brute_force(x[ok], z[i][ok], stages[i])
        assert w.area[i, 0] == pytest.approx(bf, rel=2e-3, abs=1e-3)


@settings(max_examples=60, deadline=None)
@given(reach(), st.floats(0.05, 0.95), st.floats(0.1, 0.9))
def test_subsections_and_divided_discharge_match_cross_section(r, frac, bank_frac):
    x, z = r
    z = np.where(np.isfinite(z), z, 0.0)
    p = K.profiles(x, z)
    span = x[-1] - x[0]
    lb = x[0] + bank_frac * span * 0.5
    rb = x[-1] - (1 - bank_frac) * span * 0.4
    banks = np.tile([lb, rb], (z.shape[0], 1))
    stages = p.thalweg + frac * 3.0
    fl = K.flow(p, stages, 0.001, (0.06, 0.03, 0.07), banks)
    # the three parts add up to the whole section (vertical division lines)
    np.testing.assert_allclose(fl.parts.area.sum(axis=0), fl.wet.area, rtol=1e-9, atol=1e-9)
    np.testing.assert_allclose(fl.parts.top_width.sum(axis=0), fl.wet.top_width, rtol=1e-9,
                               atol=1e-9)
    np.testing.assert_allclose(fl.parts.wetted_perimeter.sum(axis=0), fl.wet.wetted_perimeter,
                               rtol=1e-9, atol=1e-9)
    for i in range(z.shape[0]):
        cs = CrossSection(x, z[i], banks=(lb, rb))
        assert fl.discharge[i, 0] == pytest.approx(
            float(cs.discharge(stages[i], 0.001, (0.06, 0.03, 0.07))), rel=1e-9, abs=1e-12)


def test_normal_depth_batch_matches_single_and_closed_form():
    x = np.linspace(-20, 20, 201)
    z = trapezoids(x, [2.0, 4.0, 6.0], [1.0, 2.0, 3.0], 2.0) + np.array([[0.0], [1.0], [-0.5]])
    p = K.profiles(x, z)
    sol = solver.normal_stage(p, np.array([3.0, 8.0, 1e6]), 0.002, 0.035)
    assert sol.reached.tolist() == [True, True, False] and np.isnan(sol.stage[2])
    assert sol.above == "inside" and not sol.over_profile.any()
    for i in range(2):
        ref = CrossSection(x, z[i]).stage_for_discharge([3.0, 8.0][i], 0.002, 0.035)
        assert sol.stage[i] == pytest.approx(ref, abs=1e-7)
    # the first profile is a trapezoid b = 2, z = 1 (standard geometry): Manning's
    # equation at the solved depth gives the target back
    y = sol.stage[0] - p.thalweg[0]
    a, per = (2 + y) * y, 2 + 2 * y * np.sqrt(2)
    assert (1 / 0.035) * a * (a / per) ** (2 / 3) * np.sqrt(0.002) == pytest.approx(3.0, rel=1e-8)


def test_walled_policy_counts_the_water_inside_and_says_so():
    x = np.linspace(-20, 20, 201)
    z = trapezoids(x, [4.0], [2.0], 1.0)
    p = K.profiles(x, z)
    inside = solver.normal_stage(p, np.array([50.0]), 0.002, 0.035)
    walled = solver.normal_stage(p, np.array([50.0]), 0.002, 0.035, above="walled")
    assert not inside.reached[0]
    assert walled.reached[0] and walled.over_profile[0] and walled.stage[0] > p.top[0]
    assert walled.above == "walled"


def test_many_flows_at_once_equal_one_at_a_time():
    x = np.linspace(-20, 20, 201)
    z = trapezoids(x, [2.0, 4.0], [1.0, 2.0], 2.0)
    p = K.profiles(x, z)
    q = np.array([[1.0, 5.0, 20.0], [2.0, 6.0, 30.0]])
    many = solver.normal_stage(p, q, 0.002, 0.035)
    for f in range(3):
        one = solver.normal_stage(p, q[:, f], 0.002, 0.035)
        np.testing.assert_allclose(many.stage[:, f], one.stage, atol=1e-9)


def test_a_target_inside_a_jump_is_marked():
    # issue example: water tops the right bank (elevation 2) into a lower area behind
    # it; just below 2 the section carries less than 15 m³/s, just above more
    x = np.array([0, 2, 4, 6, 8, 10, 15, 45, 50], float)
    z = np.array([3, 1, 0, 0, 1, 2, .5, .5, 3], float)
    p = K.profiles(x, z[None, :])
    sol = solver.normal_stage(p, np.array([15.0]), 0.001, 0.035)
    q_at = K.flow(p, sol.stage, 0.001, 0.035).discharge[0, 0]
    assert sol.stage[0] == pytest.approx(2.0, abs=1e-6)
    assert q_at < 15.0 and sol.at_jump[0]
    assert K.flow(p, sol.stage + 1e-6, 0.001, 0.035).discharge[0, 0] > 15.0


def test_cross_section_warns_when_the_stage_sits_at_a_jump():
    from reachgauge.errors import ReachgaugeWarning

    cs = CrossSection([0, 2, 4, 6, 8, 10, 15, 45, 50], [3, 1, 0, 0, 1, 2, .5, .5, 3])
    with pytest.warns(ReachgaugeWarning, match="tops a bank"):
        assert cs.stage_for_discharge(15.0, 0.001, 0.035) == pytest.approx(2.0, abs=1e-6)


def test_design_checks_mark_a_flow_whose_stage_sits_at_a_jump():
    from reachgauge.hydraulics import capacity

    x = np.array([0, 2, 4, 6, 8, 10, 15, 45, 50], float)
    z = np.array([3, 1, 0, 0, 1, 2, .5, .5, 3], float)
    p = K.profiles(x, z[None, :])
    checks = capacity.check_flows(p, {"q": 15.0, "small": 1.0}, 0.001, 0.035, None,
                                  np.array([2.0]), np.array([11.0]))
    by = checks.set_index("flow")
    assert bool(by.loc["q", "stage_at_jump"]) and not bool(by.loc["small", "stage_at_jump"])
