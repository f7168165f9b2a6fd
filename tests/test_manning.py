"""Manning's equation against a reference library and published worked examples."""

import math

import numpy as np
import pytest

from reachgauge import CrossSection, manning
from reachgauge.errors import InputError
from reachgauge.manning import FOOT


@pytest.fixture(scope="module")
def fluids_open_flow():
    """The reference library, for the tests that use it only (the rest run without it)."""
    return pytest.importorskip("fluids.open_flow")


def rectangle(b, wall=10.0):
    return CrossSection([0, 1e-9, b, b + 1e-9], [wall, 0, 0, wall])


def trapezoid(b, z, wall):
    t = z * wall
    return CrossSection([0, t, t + b, 2 * t + b], [wall, 0, 0, wall])


def test_velocity_matches_fluids_over_a_grid(fluids_open_flow):
    # Reference: fluids.open_flow.V_Manning(Rh, S, n) = Rh^(2/3) S^(1/2) / n (SI),
    # Bell, C., fluids (PyPI), citing Chow (1959).
    for r in (0.05, 0.3, 1.0, 2.5, 8.0):
        for s in (1e-5, 1e-3, 0.02, 0.1):
            for n in (0.012, 0.03, 0.07, 0.15):
                ref = fluids_open_flow.V_Manning(Rh=r, S=s, n=n)
                assert manning.velocity(r, s, n) == pytest.approx(ref, rel=1e-12)


def test_cengel_cimbala_example_via_fluids_docstring():
    # Cengel & Cimbala (2006), as quoted in the fluids V_Manning docstring:
    # V_Manning(0.2859, 0.005236, 0.03) = 1.0467781958118971 m/s [read]
    assert manning.velocity(0.2859, 0.005236, 0.03) == pytest.approx(1.0467781958118971, rel=1e-12)


def test_chezy_relation_matches_fluids(fluids_open_flow):
    # C = R^(1/6) / n (fluids.open_flow.n_Manning_to_C_Chezy); then V = C sqrt(R S)
    r, s, n = 1.7, 0.004, 0.035
    c = fluids_open_flow.n_Manning_to_C_Chezy(n, r)
    assert manning.velocity(r, s, n) == pytest.approx(c * math.sqrt(r * s), rel=1e-12)


@pytest.mark.parametrize("b,y,n,s,r_ref,v_ref,q_ref", [
    # Ponce, V. M., San Diego State University, CIVE 530 examinations [read]
    (6.0, 1.6, 0.015, 0.0025, 1.043, 3.428, 32.91),   # Fall 2008
    (5.0, 0.8, 0.015, 0.0025, 0.606, 2.387, 9.548),   # Spring 2007
])
def test_ponce_rectangular_worked_examples_si(b, y, n, s, r_ref, v_ref, q_ref):
    cs = rectangle(b)
    g = cs.geometry(y)
    assert g.hydraulic_radius == pytest.approx(r_ref, abs=6e-4)   # printed to 3 decimals
    assert manning.velocity(g.hydraulic_radius, s, n) == pytest.approx(v_ref, rel=1e-3)
    assert cs.discharge(y, s, n) == pytest.approx(q_ref, rel=1e-3)
    # normal depth: the inverse returns the example's depth
    assert cs.stage_for_discharge(q_ref, s, n) == pytest.approx(y, rel=1e-3)


def test_chow_example_normal_depth_us_customary():
    # Chow, V. T., 1959, Open-Channel Hydraulics, Example 6-2 [memory]: trapezoidal
    # channel b = 20 ft, side slopes 2:1, S = 0.0016, n = 0.025, Q = 400 ft³/s:
    # normal depth 3.36 ft. Chow used k = 1.49; we use 1.486 (0.27 % less
    # conveyance, about 0.15 % more depth), so the tolerance is 0.5 %.
    cs = trapezoid(20.0, 2.0, 10.0)
    y = cs.stage_for_discharge(400.0, 0.0016, 0.025, units="us")
    assert y == pytest.approx(3.36, rel=5e-3)


def test_si_and_us_agree_after_conversion():
    # the same physical channel: trapezoid b = 5 m, z = 1.5, y = 1.2 m, S = 0.001, n = 0.03
    si = trapezoid(5.0, 1.5, 4.0)
    us = trapezoid(5.0 / FOOT, 1.5, 4.0 / FOOT)
    q_si = si.discharge(1.2, 0.001, 0.03, units="si")
    q_us = us.discharge(1.2 / FOOT, 0.001, 0.03, units="us")
    assert q_us * FOOT**3 == pytest.approx(q_si, rel=1e-3)
    # and back: normal depth in feet for the SI discharge converted to ft³/s
    assert us.stage_for_discharge(q_si / FOOT**3, 0.001, 0.03, units="us") * FOOT == pytest.approx(
        1.2, rel=1e-3)


def test_us_constant_is_the_textbook_value():
    # White, Fluid Mechanics, Eq. 10.17: 1.486; exact (1/0.3048)^(1/3) = 1.48592
    assert manning.US.k == 1.486
    assert (1 / FOOT) ** (1 / 3) == pytest.approx(manning.US.k, rel=1e-4)


def test_back_calculated_n_reproduces_n():
    cs = trapezoid(3.0, 2.0, 3.0)
    for n in (0.02, 0.035, 0.08):
        for stage in (0.4, 1.1, 2.5):
            q = cs.discharge(stage, 0.002, n)
            g = cs.geometry(stage)
            assert manning.roughness(q, g.area, g.hydraulic_radius, 0.002) == pytest.approx(n, rel=1e-12)


def test_critical_depth_rectangle_closed_form():
    # y_c = (q²/g)^(1/3) for a rectangle, q = Q / b (Chow 1959, §4-2)
    b, q = 4.0, 12.0
    yc = ((q / b) ** 2 / 9.80665) ** (1 / 3)
    assert rectangle(b).critical_stage(q) == pytest.approx(yc, rel=1e-8)


def test_froude_shear_power_closed_form():
    # F = V / sqrt(g D); tau = gamma R S; omega = gamma Q S / w
    assert manning.froude(2.0, 0.5) == pytest.approx(2.0 / math.sqrt(9.80665 * 0.5))
    assert manning.shear_stress(1.0, 0.001) == pytest.approx(9806.65 * 0.001)
    assert manning.unit_stream_power(10.0, 0.002, 5.0) == pytest.approx(9806.65 * 10 * 0.002 / 5)
    assert manning.shear_stress(1.0, 0.001, units="us") == pytest.approx(62.4 * 0.001)


@pytest.mark.parametrize("call,msg", [
    (lambda: manning.velocity(1.0, 0.0, 0.03), "slope"),
    (lambda: manning.velocity(1.0, -0.01, 0.03), "slope"),
    (lambda: manning.velocity(1.0, 0.01, 0.0), "Manning's n"),
    (lambda: manning.discharge(1.0, 1.0, 0.01, -0.02), "Manning's n"),
    (lambda: manning.roughness(-1.0, 1.0, 1.0, 0.01), "discharge"),
    (lambda: manning.velocity(1.0, 0.01, 0.03, units="metric"), "'si' or 'us'"),
])
def test_bad_values_raise_valueerror_naming_the_range(call, msg):
    with pytest.raises(ValueError, match=msg):
        call()


def test_discharge_beyond_profile_is_a_clear_error():
    cs = trapezoid(2.0, 1.0, 1.0)
    with pytest.raises(InputError, match="cannot be reached inside the profile"):
        cs.stage_for_discharge(1e6, 0.001, 0.03)


def test_vectorised_over_arrays(fluids_open_flow):
    r = np.array([0.5, 1.0, 2.0])
    np.testing.assert_allclose(manning.velocity(r, 0.001, 0.03),
                               [fluids_open_flow.V_Manning(v, 0.001, 0.03) for v in r])
