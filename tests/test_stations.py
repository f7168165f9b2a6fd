"""Stations, directions and crossing checks against plane geometry.

Closed forms (standard plane geometry): a point interpolated on a line lies on it;
a chord of a circle between points symmetric about P is parallel to the tangent
at P; the perpendicular to a unit vector (tx, ty) turned anticlockwise is
(−ty, tx); two parallel lines at distance d cross a perpendicular transect at d.
"""

import numpy as np
import shapely
from hypothesis import given, settings
from hypothesis import strategies as st

from reachgauge.transects import stations as S


def test_stations_every_spacing_from_the_upstream_end_on_the_line():
    line = shapely.LineString([(0, 0), (30, 40), (130, 40)])   # 50 + 100 m
    st_ = S.place_stations(line, 20.0, 10.0)
    np.testing.assert_allclose(st_.chainage, np.arange(0, 141, 20))
    assert np.allclose(shapely.distance(shapely.points(st_.xy), line), 0, atol=1e-9)
    np.testing.assert_allclose(st_.xy[0], [0, 0])
    np.testing.assert_allclose(st_.xy[-1], [120, 40])  # chainage 140 = 50 + 90 along the second leg
    # on the first leg the direction is (0.6, 0.8) and left is (-0.8, 0.6)
    np.testing.assert_allclose(st_.tangent[0], [0.6, 0.8], atol=1e-12)
    np.testing.assert_allclose(st_.left[0], [-0.8, 0.6], atol=1e-12)


def test_smoothing_follows_the_mean_direction_of_a_jagged_line():
    # a zigzag of ±1 m every 5 m along the x axis: the smoothed direction is +x
    x = np.arange(0, 401, 5.0)
    y = np.where(np.arange(x.size) % 2, 1.0, -1.0)
    line = shapely.LineString(np.column_stack([x, y]))
    st_ = S.place_stations(line, 20.0, 30.0)
    inner = (st_.chainage > 20) & (st_.chainage < line.length - 20)
    angle = np.degrees(np.arctan2(st_.tangent[inner, 1], st_.tangent[inner, 0]))
    # the chord over 30 m of a zigzag of period 10 m spans 3 periods ± part of
    # one leg: at most 2 m of rise over ≥ 26 m of run, i.e. < 4.4°
    assert np.max(np.abs(angle)) < 4.4
    raw = S.place_stations(line, 20.0, 0.5)  # barely smoothed: the zigzag's own 21.8°
    assert np.max(np.abs(np.degrees(np.arctan2(raw.tangent[:, 1], raw.tangent[:, 0])))) > 20


def test_direction_on_a_circle_is_the_tangent():
    r = 100.0
    a = np.linspace(0, np.pi, 2001)
    line = shapely.LineString(np.column_stack([r * np.cos(a), r * np.sin(a)]))  # anticlockwise
    st_ = S.place_stations(line, 10.0, 30.0)
    inner = (st_.chainage > 15) & (st_.chainage < line.length - 15)
    p = st_.xy[inner]
    true_t = np.column_stack([-p[:, 1], p[:, 0]]) / r
    np.testing.assert_allclose(st_.tangent[inner], true_t, atol=1e-5)  # polyline of 2000 chords
    # left of an anticlockwise circle points to its centre
    np.testing.assert_allclose(st_.left[inner], -p / r, atol=1e-5)


@settings(max_examples=40, deadline=None)
@given(st.lists(st.tuples(st.floats(-500, 500), st.floats(-500, 500)), min_size=2, max_size=12),
       st.floats(1, 50), st.floats(0.5, 80))
def test_station_invariants_on_random_polylines(pts, spacing, smoothing):
    line = shapely.LineString(pts)
    if line.length < 1:
        return
    st_ = S.place_stations(line, spacing, smoothing)
    assert np.all(np.diff(st_.chainage) > 0) and st_.chainage[0] == 0
    assert st_.chainage[-1] <= line.length + 1e-9
    assert np.all(shapely.distance(shapely.points(st_.xy), line) < 1e-6 * max(1, line.length))
    np.testing.assert_allclose(np.hypot(*st_.tangent.T), 1, rtol=1e-12)
    np.testing.assert_allclose(np.einsum("ij,ij->i", st_.tangent, st_.left), 0, atol=1e-12)
    # left is the tangent turned anticlockwise: cross product +1
    cross = st_.tangent[:, 0] * st_.left[:, 1] - st_.tangent[:, 1] * st_.left[:, 0]
    np.testing.assert_allclose(cross, 1, rtol=1e-12)


def test_transect_points_and_lines_run_left_to_right():
    centre = np.array([[10.0, 5.0]])
    left = np.array([[0.0, 1.0]])               # flow toward +x: left is +y
    pts = S.transect_points(centre, left, np.array([-4.0, 0.0, 4.0]))
    np.testing.assert_allclose(pts[0], [[10, 9], [10, 5], [10, 1]])
    line = S.transect_lines(centre, left, [4.0], [2.0])[0]
    assert line.coords[0] == (10.0, 9.0) and line.coords[-1] == (10.0, 3.0)


def _straight_stations(n=10):
    c = np.arange(n) * 20.0
    xy = np.column_stack([c, np.zeros(n)])
    left = np.tile([0.0, 1.0], (n, 1))
    return c, xy, left


def test_a_parallel_stream_shortens_the_side_it_is_on():
    c, xy, left = _straight_stations()
    own = shapely.LineString([(0, 0), (180, 0)])
    other = shapely.LineString([(-50, 25), (250, 25)])   # 25 m to the left
    lim = S.crossing_limits(xy, left, 40.0, xy, c, own=own, others=other, margin=8.0, min_keep=8.0)
    np.testing.assert_allclose(lim.left, 17.0)       # max(25 − 8, 25 / 2)
    np.testing.assert_allclose(lim.right, 40.0)
    assert lim.shortened.all() and not lim.crossing.any()
    near = shapely.LineString([(-50, 10), (250, 10)])    # 10 m away: max(2, 5) = 5 < 8
    lim = S.crossing_limits(xy, left, 40.0, xy, c, own=own, others=near, margin=8.0, min_keep=8.0)
    np.testing.assert_allclose(lim.left, 40.0)
    assert lim.crossing.all() and not lim.shortened.any()


def test_own_line_at_the_station_and_a_junction_at_the_station_are_ignored():
    c, xy, left = _straight_stations(5)
    own = shapely.LineString([(0, 0), (80, 0)])
    junction = shapely.LineString([(40, 0), (40, -30), (60, -60)])  # meets station 2 exactly
    lim = S.crossing_limits(xy, left, 40.0, xy, c, own=own, others=junction, margin=8, min_keep=8)
    assert not lim.shortened[[0, 1, 3, 4]].any() and not lim.crossing.any()


def test_meander_loop_of_the_own_line_shortens():
    # the own line comes back 30 m to the right of the first stations
    own = shapely.LineString([(0, 0), (100, 0), (130, -15), (100, -30), (-20, -30)])
    st_ = S.place_stations(own, 20.0, 10.0)
    first = st_.chainage <= 60
    lim = S.crossing_limits(st_.xy, st_.left, 40.0, st_.xy, st_.chainage, own=own, margin=8,
                            min_keep=8, own_skip=5.0, check_neighbours=False)
    np.testing.assert_allclose(lim.right[first], 22.0)    # max(30 − 8, 15)
    assert lim.shortened[first].all()


@settings(max_examples=25, deadline=None)
@given(radius=st.floats(12, 60), spacing=st.floats(3, 15), hw=st.floats(20, 60))
def test_transects_on_a_tight_bend_no_longer_cross_after_cutting(radius, spacing, hw):
    a = np.linspace(0, 1.5 * np.pi, 400)
    line = shapely.LineString(np.column_stack([radius * np.cos(a), radius * np.sin(a)]))
    st_ = S.place_stations(line, spacing, 2.0)
    lim = S.crossing_limits(st_.xy, st_.left, hw, st_.xy, st_.chainage, margin=5.0, min_keep=5.0)
    cut = S.transect_lines(st_.xy, st_.left, lim.left, lim.right)
    tree = shapely.STRtree(cut)
    i, j = tree.query(cut, predicate="intersects")
    i, j = i[i < j], j[i < j]
    if hw > radius:   # on the inside of the bend (left) transects meet near the centre
        assert lim.shortened.any()
        # interior stations (the end ones have one-sided tangents, so their rays may
        # pass just beside the centre without meeting a neighbour)
        assert np.all(lim.left[1:-1] <= radius * 1.0001)
    # a crossing that remains is one neither transect could avoid: both flagged
    assert np.all(lim.crossing[i] & lim.crossing[j])
    # No transect reaches the centre of the bend: nothing to cut. The line is a polygon
    # of chords (length r·Δθ), so a station's tangent can be off the circle's by up to
    # about Δθ/2 and a transect can miss the centre sideways by up to r·Δθ/2: two
    # neighbours that end within a chord length of the centre may still cross there
    # (a random search found hw = 39.875 on r = 40), and cutting them is right.
    chord = radius * 1.5 * np.pi / (a.size - 1)
    if hw < radius - chord:
        assert not lim.shortened.any() and not lim.crossing.any()
