"""Divided-channel method and Horton–Einstein composite n, against hand computation.

Sources: Chow, V. T., 1959, Open-Channel Hydraulics, §6-9 (divided-channel
method: total conveyance is the sum of subsection conveyances, vertical division
lines not wetted perimeter; Horton–Einstein composite n, Eq. 6-17).
"""

import numpy as np
import pytest

from reachgauge import CrossSection, manning
from reachgauge.hydraulics.roughness import horton_einstein

E = 1e-9  # vertical walls are leant by 1e-9 so offsets increase strictly


def compound():
    # 10 m flood plains at elevation 2 either side of a 4 m rectangular channel 2 m deep,
    # walled at elevation 4 at both ends; banks at offsets 10 and 14 + E.
    x = [0, E, 10, 10 + E, 14, 14 + E, 24, 24 + E]
    z = [4, 2, 2, 0, 0, 2, 2, 4]
    return CrossSection(x, z, banks=(10, 14 + E))


def test_subsection_geometry_by_hand():
    sub = compound().subsections(3.0)
    # left overbank: 10 m × 1 m of water; wetted: 10 m of plain + 1 m of outer wall
    assert sub.left.area == pytest.approx(10.0, rel=1e-6)
    assert sub.left.wetted_perimeter == pytest.approx(11.0, rel=1e-6)
    assert sub.left.top_width == pytest.approx(10.0, rel=1e-6)
    # channel: 4 m × 3 m; wetted: bed 4 m + two walls of 2 m (division lines excluded)
    assert sub.channel.area == pytest.approx(12.0, rel=1e-6)
    assert sub.channel.wetted_perimeter == pytest.approx(8.0, rel=1e-6)
    assert sub.right.area == pytest.approx(10.0, rel=1e-6)


def test_divided_channel_discharge_by_hand():
    s, n_ob, n_ch = 0.001, 0.06, 0.03
    k_ob = (1 / n_ob) * 10.0 * (10.0 / 11.0) ** (2 / 3)
    k_ch = (1 / n_ch) * 12.0 * (12.0 / 8.0) ** (2 / 3)
    q_hand = (2 * k_ob + k_ch) * np.sqrt(s)
    q = compound().discharge(3.0, s, (n_ob, n_ch, n_ob))
    assert q == pytest.approx(q_hand, rel=1e-6)
    # below the banks only the channel carries flow
    q_low = compound().discharge(1.5, s, (n_ob, n_ch, n_ob))
    assert q_low == pytest.approx((1 / n_ch) * 6.0 * (6.0 / 7.0) ** (2 / 3) * np.sqrt(s), rel=1e-6)


def test_divided_channel_carries_more_than_the_lumped_section():
    # lumping a compound section under-states conveyance just above bankfull (the
    # reason for dividing it; Chow 1959, §6-9)
    cs = compound()
    lumped = CrossSection(cs.offset, cs.elevation)
    assert cs.discharge(2.2, 0.001, 0.03) > lumped.discharge(2.2, 0.001, 0.03)


def test_horton_einstein_by_hand():
    # P = (2, 4, 2) m with n = (0.05, 0.02, 0.05):
    # n_c = [(2·0.05^1.5 + 4·0.02^1.5 + 2·0.05^1.5) / 8]^(2/3) = 0.036608 (hand)
    assert horton_einstein([2, 4, 2], [0.05, 0.02, 0.05]) == pytest.approx(0.036608, rel=1e-4)
    assert horton_einstein([1, 7], [0.03, 0.03]) == pytest.approx(0.03)


def test_banks_outside_profile_rejected():
    with pytest.raises(ValueError, match="bank offsets"):
        CrossSection([0, 1, 2], [1, 0, 1], banks=(1.5, 0.5))


def test_manning_conveyance_definition():
    # K = (k/n) A R^(2/3) and Q = K S^(1/2) (Chow 1959, §6-9)
    assert manning.conveyance(12.0, 1.5, 0.03) * np.sqrt(0.001) == pytest.approx(
        manning.discharge(12.0, 1.5, 0.001, 0.03))
