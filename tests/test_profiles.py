"""ProfileSet (all transects of a reach at once) against CrossSection (one at a
time) and closed-form geometry.

The batch engine is a second implementation of the same exact geometry; the
closed forms (trapezoid A = (b + z y) y, P = b + 2 y sqrt(1 + z²), standard
geometry) and the single-profile engine (itself checked against closed forms
and a brute-force reference in test_section_*.py) are the references.
"""

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from reachgauge import CrossSection
from reachgauge.kernel.profiles import ProfileSet


def trapezoids(x, b, z, depth):
    """One row per (b, z): trapezoid of bottom b, side slope z, banks at depth, flat beyond."""
    rows = []
    for bi, zi in zip(b, z):
        half = bi / 2
        e = np.clip((np.abs(x) - half) / zi, 0, depth)
        rows.append(e)
    return np.array(rows)


def test_closed_form_trapezoids_many_at_once():
    x = np.linspace(-20, 20, 401)
    b = np.array([2.0, 4.0, 6.0, 8.0])
    z = np.array([1.0, 1.5, 2.0, 3.0])
    ps = ProfileSet(x, trapezoids(x, b, z, 2.0))
    y = np.linspace(0, 2.0, 11)
    g = ps.geometry(np.tile(y, (4, 1)))
    np.testing.assert_allclose(g.area, (b[:, None] + z[:, None] * y) * y, rtol=1e-9, atol=1e-9)
    np.testing.assert_allclose(g.wetted_perimeter[:, 1:],
                               (b[:, None] + 2 * y[1:] * np.sqrt(1 + z[:, None] ** 2)), rtol=1e-9)


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
def test_batch_equals_one_at_a_time(r, frac):
    x, z = r
    ps = ProfileSet(x, z)
    stages = ps.thalweg + frac * 4.0
    g = ps.geometry(stages)
    for i in range(z.shape[0]):
        ok = np.isfinite(z[i])
        if ok.sum() < 3:
            assert not ps.valid[i] and g.area[i] == 0
            continue
        cs = CrossSection(x, z[i], drop_nan=True)
        ref = cs.geometry(stages[i])
        assert g.area[i] == pytest.approx(float(ref.area), rel=1e-9, abs=1e-9)
        assert g.wetted_perimeter[i] == pytest.approx(float(ref.wetted_perimeter), rel=1e-9, abs=1e-9)
        assert g.top_width[i] == pytest.approx(float(ref.top_width), rel=1e-9, abs=1e-9)
        assert bool(g.spills[i]) == bool(ref.spills)


@settings(max_examples=60, deadline=None)
@given(reach(), st.floats(0.05, 0.95), st.floats(0.1, 0.9))
def test_subsections_and_divided_discharge_match_cross_section(r, frac, bank_frac):
    x, z = r
    z = np.where(np.isfinite(z), z, 0.0)
    ps = ProfileSet(x, z)
    span = x[-1] - x[0]
    lb = x[0] + bank_frac * span * 0.5
    rb = x[-1] - (1 - bank_frac) * span * 0.4
    banks = np.tile([lb, rb], (z.shape[0], 1))
    stages = ps.thalweg + frac * 3.0
    q = ps.discharge(stages, 0.001, (0.06, 0.03, 0.07), banks)
    for i in range(z.shape[0]):
        cs = CrossSection(x, z[i], banks=(lb, rb))
        assert q[i] == pytest.approx(float(cs.discharge(stages[i], 0.001, (0.06, 0.03, 0.07))),
                                     rel=1e-9, abs=1e-12)


def test_normal_depth_batch_matches_single():
    x = np.linspace(-20, 20, 201)
    z = trapezoids(x, [2.0, 4.0, 6.0], [1.0, 2.0, 3.0], 2.0) + np.array([[0.0], [1.0], [-0.5]])
    ps = ProfileSet(x, z)
    stage, ok = ps.stage_for_discharge(np.array([3.0, 8.0, 1e6]), 0.002, 0.035)
    assert ok.tolist() == [True, True, False] and np.isnan(stage[2])
    for i in range(2):
        ref = CrossSection(x, z[i]).stage_for_discharge([3.0, 8.0][i], 0.002, 0.035)
        assert stage[i] == pytest.approx(ref, abs=1e-7)
