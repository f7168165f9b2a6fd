"""CrossSection geometry against closed-form plane geometry.

Closed forms (standard geometry; also REFERENCES.md "Closed forms"):
trapezoid A = (b + z y) y, P = b + 2 y sqrt(1 + z²), T = b + 2 z y (z = 0 is a
rectangle, b = 0 a triangle); circle of diameter D at depth y:
theta = 2 acos(1 - 2y/D), A = D² (theta - sin theta) / 8, P = D theta / 2,
T = D sin(theta / 2).
"""

import numpy as np
import pytest

from reachgauge import CrossSection
from reachgauge.errors import InputError


def trapezoid(b, z, depth, freeboard_width=0.0):
    """Profile of a trapezoid of bottom width b, side slope z (H:V), bank height depth."""
    t = z * depth
    x = [0.0, freeboard_width, freeboard_width + t, freeboard_width + t + b,
         freeboard_width + 2 * t + b, 2 * freeboard_width + 2 * t + b]
    e = [depth, depth, 0.0, 0.0, depth, depth]
    if freeboard_width == 0:
        x, e = x[1:-1], e[1:-1]
    return CrossSection(x, e)


@pytest.mark.parametrize("b,z", [(6.0, 0.0), (4.0, 1.5), (0.0, 2.0), (10.0, 3.0)])
def test_trapezoid_family_closed_form(b, z):
    depth = 3.0
    if z == 0:  # rectangle: walls need distinct offsets, so lean them 1e-9
        cs = CrossSection([0, 1e-9, b, b + 1e-9], [depth, 0, 0, depth])
    elif b == 0:  # triangle
        cs = CrossSection([0, z * depth, 2 * z * depth], [depth, 0, depth])
    else:
        cs = trapezoid(b, z, depth)
    y = np.concatenate([np.linspace(0.0, depth, 61), [1.0, 2.0]])  # includes 0 and the top
    g = cs.geometry(y)
    np.testing.assert_allclose(g.area, (b + z * y) * y, rtol=1e-9, atol=1e-9)
    np.testing.assert_allclose(g.wetted_perimeter, np.where(y > 0, b + 2 * y * np.sqrt(1 + z * z), 0),
                               rtol=1e-9, atol=1e-6)
    np.testing.assert_allclose(g.top_width, np.where(y > 0, b + 2 * z * y, 0), rtol=1e-9, atol=1e-6)
    assert not g.spills.any()  # stage exactly at the top touches but does not spill


def test_stage_exactly_at_a_vertex():
    # compound section: a vertex at elevation 1.0 on both banks (bench edge)
    cs = CrossSection([0, 2, 3, 5, 6, 8], [2, 1, 0, 0, 1, 2])
    g = cs.geometry(1.0)
    # at y = 1 the channel is a trapezoid b = 2, z = 1: A = 3, T = 4, P = 2 + 2 sqrt 2
    assert g.area == pytest.approx(3.0)
    assert g.top_width == pytest.approx(4.0)
    assert g.wetted_perimeter == pytest.approx(2 + 2 * np.sqrt(2))
    assert g.left_edge == pytest.approx(2.0) and g.right_edge == pytest.approx(6.0)


@pytest.mark.parametrize("fill", [0.05, 0.1, 0.25, 0.4, 0.5])
def test_partly_full_circle_sampled_finely(fill):
    """Lower half of a circle of diameter 2 sampled with 4000 chords.

    A ground line is single-valued in offset, so only fills up to half the
    diameter can be drawn; 0.5 is the stage exactly at the top of the profile.
    The chords under-estimate arc figures by O(h²), about 1e-7 here: rtol 1e-5.
    """
    d = 2.0
    phi = np.linspace(np.pi, 2 * np.pi, 4001)
    cs = CrossSection((d / 2) * np.cos(phi), (d / 2) * np.sin(phi) + d / 2)
    y = fill * d
    theta = 2 * np.arccos(1 - 2 * y / d)
    g = cs.geometry(y)
    assert g.area == pytest.approx(d * d * (theta - np.sin(theta)) / 8, rel=1e-5)
    assert g.wetted_perimeter == pytest.approx(d * theta / 2, rel=1e-5)
    assert g.top_width == pytest.approx(d * np.sin(theta / 2), rel=1e-5)


def test_depression_behind_bank_is_not_wetted_until_overtopped():
    # channel (floor -1) on the left; a pond (floor 0.5) on the right behind a bank
    # whose top is at 2.0 (offset 3)
    x = [0, 1, 2, 3, 4, 5, 6]
    cs = CrossSection(x, [3, -1.0, -1.0, 2.0, 0.5, 0.5, 3])
    g = cs.geometry(np.array([1.0, 1.9, 2.5]))
    channel_only = CrossSection([0, 1, 2, 3], [3, -1.0, -1.0, 2.0]).geometry(np.array([1.0, 1.9]))
    np.testing.assert_allclose(g.area[:2], channel_only.area)  # pond ignored below 2.0
    # at 2.5 the bank is overtopped: the pond (2 m wide, 2 m deep at 2.5) joins
    assert g.area[2] > 6.0 + 3.0


def test_spill_is_flagged_not_walled():
    cs = CrossSection([0, 1, 2, 3], [1.0, 0.0, 0.0, 2.0])
    g = cs.geometry(np.array([0.5, 1.5]))
    assert list(g.spills_left) == [False, True]
    assert list(g.spills_right) == [False, False]
    # no wall added: perimeter is ground only (the left slope and the bed and part of the right)
    assert g.wetted_perimeter[1] == pytest.approx(np.sqrt(2) + 1 + np.hypot(0.75, 1.5))


def test_scalar_stage_gives_scalars_and_dry_is_zero():
    cs = trapezoid(2, 1, 1)
    g = cs.geometry(-5.0)
    assert np.ndim(g.area) == 0 and g.area == 0 and g.hydraulic_radius == 0
    assert np.isnan(g.left_edge)


@pytest.mark.parametrize("kwargs,msg", [
    (dict(offset=[0, 1], elevation=[1, 0]), "at least 3 points"),
    (dict(offset=[0, 1, 2], elevation=[1, 0]), "differ in length"),
    (dict(offset=[0, 2, 1], elevation=[1, 0, 1]), "increase strictly"),
    (dict(offset=[0, 1, 1, 2], elevation=[1, 0, 0, 1]), "increase strictly"),
    (dict(offset=[0, 1, 2, 3], elevation=[1, np.nan, 0, 1]), "NaN"),
])
def test_bad_profiles_raise_clear_errors(kwargs, msg):
    with pytest.raises(InputError, match=msg):
        CrossSection(**kwargs)


def test_nan_points_can_be_dropped():
    cs = CrossSection([0, 1, 2, 3, 4], [2, np.nan, 0, 1, 2], drop_nan=True)
    assert cs.offset.tolist() == [0, 2, 3, 4]


def test_top_is_the_lower_of_the_highest_points_either_side():
    # levee-like banks at 2.0 and 2.5 with the ground falling to 1.0 at both ends:
    # water up to 2.0 stays in the channel; above it, it flows over the left bank
    cs = CrossSection([0, 5, 8, 10, 12, 15, 20], [1.0, 2.0, 0.5, 0.0, 0.5, 2.5, 1.0])
    assert cs.top == 2.0
    g = cs.geometry(np.array([1.5, 1.99, 2.01]))
    assert list(g.spills) == [False, False, True]
