"""Thalweg search against closed-form profiles, and through the terrain.

Closed forms: a V profile z = |u − a| has its lowest point at a; a flat bottom
from a − w/2 to a + w/2 has its middle at a (plane geometry).
"""

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from reachgauge.config import RunConfig
from reachgauge.batch.pipeline import cut_all
from reachgauge.transects.thalweg import find_thalweg
from terrain_fixtures import make_valley_raster, straight_line, write_lines

U = np.linspace(-10, 10, 81)  # 0.25 m step


@settings(max_examples=50, deadline=None)
@given(apex=st.floats(-9.5, 9.5), k1=st.floats(0.05, 3), k2=st.floats(0.05, 3), base=st.floats(-50, 500))
def test_v_profile_apex_found_within_one_step(apex, k1, k2, base):
    z = base + np.where(U < apex, k1 * (apex - U), k2 * (U - apex))
    tw = find_thalweg(U, z[None, :], snap_distance=10)
    assert tw.found[0]
    # the lowest sample is one of the two that bracket the apex (0.25 m step);
    # which one depends on the side slopes, not on distance
    assert abs(tw.shift[0] - apex) <= 0.25 + 1e-9


@settings(max_examples=50, deadline=None)
@given(centre=st.floats(-6, 6), width=st.floats(1, 6))
def test_flat_bottom_gives_its_middle(centre, width):
    # trapezoid bottom sampled at 0.25 m: the middle of the sampled flat is within
    # one step of the true middle (its ends are quantised to the step)
    z = np.clip(np.abs(U - centre) - width / 2, 0, None) * 0.5 + 20.0
    tw = find_thalweg(U, z[None, :], snap_distance=10)
    assert abs(tw.shift[0] - centre) <= 0.25 + 1e-9
    assert tw.level[0] == pytest.approx(20.0)
    assert tw.run_width[0] == pytest.approx(width, abs=0.5)


def test_lower_ground_beyond_the_snap_distance_is_ignored_and_far_is_flagged():
    z = np.abs(U - 2.0)            # apex at +2 m
    z[U < -8] = -5.0               # a deeper ditch 8 m to the left
    tw = find_thalweg(U, z[None, :], snap_distance=6)
    assert tw.shift[0] == pytest.approx(2.0)
    assert not tw.far[0]
    far = find_thalweg(U, np.abs(U - 5.75)[None, :], snap_distance=6)
    assert far.far[0]              # 5.75 m of a 6 m snap: beyond 90 %


def test_rows_are_independent_and_empty_rows_not_found():
    z = np.vstack([np.abs(U - 1), np.full(U.size, np.nan), np.abs(U + 3)])
    tw = find_thalweg(U, z, snap_distance=10)
    np.testing.assert_array_equal(tw.found, [True, False, True])
    np.testing.assert_allclose(tw.shift, [1.0, 0.0, -3.0])
    assert np.isnan(tw.level[1])


def test_single_pixel_pit_is_not_taken_for_the_thalweg(tmp_path):
    """A 3 m deep single-pixel pit 5 m beside the channel (inside the snap
    distance) on a noise-free straight channel: the thalweg stays on the
    channel (distance to the true centreline within half the bottom width)."""
    line = straight_line(300, 0.0)
    x0, y0 = line.coords[0]
    pits = [(x0 + 100.0, y0 + 5.0, 3.0), (x0 + 160.0, y0 - 6.0, 3.0)]
    # margin 60.5 puts pixel centres on whole metres from the line's start, so
    # the transects' samples fall on the pit pixels themselves
    v = make_valley_raster(tmp_path, line, res=1.0, bottom_width=4.0, pits=pits, margin=60.5)
    write_lines(tmp_path / "s.gpkg", [line])
    cfg = RunConfig(dem=v.path, streams=tmp_path / "s.gpkg", half_width=20, snap_distance=8,
                    spacing=10)
    _, (r,) = cut_all(cfg)
    near_pits = np.isin(r.chainage, [100.0, 160.0])
    assert near_pits.sum() == 2
    assert np.all(np.abs(r.thalweg_shift) <= 2.0)   # on the 4 m wide bottom
    # the pits are still in the sampled sections (only the search ignores them):
    # searching those raw sections would have picked each pit
    hw = cfg.half_width
    raw = find_thalweg(r.offsets - hw, r.elevations[near_pits], snap_distance=8)
    np.testing.assert_allclose(raw.shift, [-5.0, 6.0])   # left is +y for a line running east
