"""The cells of a reach's corridor: where each cell lies along and across the reach,
and which reach a cell belongs to.

A footprint is mapped on the terrain grid around one reach. For every cell centre
of the window read around the reach this module gives:

- ``chainage`` (m): the chainage of the nearest point of the reach's centreline
  (:func:`nearest_on_line`: a k-d tree of the densified line's vertices and a
  projection on the segments there, vectorised over the cell centres; shapely's
  ``line_locate_point`` and ``distance`` gave the same figures 20 times slower
  on the demo's reaches): the
  water-surface elevation of a cell is the one interpolated at that chainage;
- ``distance`` (m) from the centreline and ``side`` (+1 left, −1 right, looking
  downstream);
- ``own``: the cell belongs to this reach.

Ownership, so that footprints of the same flow join where reaches meet without
gaps or double counting: a cell belongs to the reach whose centreline is nearest
(the corridors are the cells of a Voronoi partition of the plane by the lines,
so each cell belongs to exactly one reach). Distances to the shared junction
point are computed from the same coordinates in both tasks and are bitwise equal
where a cell is equidistant (the wedge outside a bend, a cell on a bisector); such
a tie goes to the line whose first vertex is lexicographically smaller, a rule
both tasks evaluate alike. At a *free* end (no other reach within a pixel of it)
the corridor stops at the perpendicular through the end point: a footprint ends
where its reach ends. Chosen over clipping every reach at its end perpendiculars
because at a bend those perpendiculars leave a wedge uncovered on the outside
and counted twice on the inside; nearest-line assignment leaves neither.

All inputs in the work CRS; ``xy_factor`` (m per CRS unit) gives metres.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import shapely
from rasterio import features
from scipy.spatial import cKDTree


@dataclass(frozen=True)
class Corridor:
    """Per cell of a (h, w) window: ``inside`` (within ``half`` m of the line),
    ``own`` (inside and belonging to this reach), ``chainage`` and ``distance``
    (m; NaN outside), ``side`` (+1 left, −1 right, 0 outside). ``cell_area`` m²,
    ``cell_size`` m (the larger pixel side), ``half`` m."""

    inside: np.ndarray
    own: np.ndarray
    chainage: np.ndarray
    distance: np.ndarray
    side: np.ndarray
    cell_area: float
    cell_size: float
    half: float
    along: np.ndarray = None      # (h, w) m along the valley line (:func:`valley_line`)
    valley: object = None         # the valley line (work CRS)
    xy_factor: float = 1.0        # m per work-CRS unit

    def valley_position(self, xy) -> np.ndarray:
        """Positions (m along :attr:`valley`) of points ``xy`` (k, 2; work CRS), e.g.
        the transects' stations, to interpolate their stages at :attr:`along`."""
        k = self.xy_factor
        return nearest_on_line(self.valley, np.asarray(xy, float).reshape(-1, 2),
                               self.cell_size / k)[1] * k


def cell_centres(transform, shape, grid=None) -> np.ndarray:
    """(h, w, 2) work-CRS coordinates of the centres of a window's cells. With
    ``grid``, the transform of the whole raster the window was read from, each
    centre is computed from its cell's index in the whole raster: the same cell
    gets the same coordinates, to the last bit, in every reach's window (the
    ownership rule compares distances computed in different tasks)."""
    h, w = shape
    c0 = r0 = 0
    if grid is not None:
        inv = ~grid
        c0 = int(round(inv.a * transform.c + inv.b * transform.f + inv.c))
        r0 = int(round(inv.d * transform.c + inv.e * transform.f + inv.f))
        transform = grid
    cols, rows = np.meshgrid(np.arange(w) + (c0 + 0.5), np.arange(h) + (r0 + 0.5))
    a, b, c, d, e, f = transform[:6]
    return np.stack([a * cols + b * rows + c, d * cols + e * rows + f], axis=-1)


def _key(line) -> tuple:
    return tuple(float(c) for c in line.coords[0])


def _free_end_mask(line, others, pts, tol):
    """Cells beyond a free end of ``line``: past the perpendicular through that end
    point, on the outward side. An end within ``tol`` (CRS units) of another line
    is a junction, not free."""
    xy = np.asarray(line.coords, dtype=float)
    beyond = np.zeros(len(pts), dtype=bool)
    for end, prev in ((xy[0], xy[1]), (xy[-1], xy[-2])):
        if others is not None and shapely.distance(shapely.Point(end), others) <= tol:
            continue
        out = (end - prev) / np.hypot(*(end - prev))
        beyond |= (pts - end) @ out > 0.0
    return beyond


def nearest_on_line(line, xy, step, bound=np.inf):
    """Distance from points ``xy`` (k, 2) to ``line``, the chainage of the nearest
    point on it and the side (+1 left, −1 right of the line's direction), all in
    the line's units. The line is densified to vertices at most ``step`` apart
    (``shapely.segmentize``); the nearest vertex (``scipy.spatial.cKDTree``) and the
    projections on the two segments meeting there give the nearest point, within
    ``step / 2`` of the exact distance. The result depends on the line and the
    point only, so two tasks computing it for the same cell agree exactly. Points
    farther than ``bound`` from every vertex get a distance > ``bound - step``, not
    necessarily the exact one (they cannot be in, or win, a corridor)."""
    v = shapely.get_coordinates(shapely.segmentize(line, step))
    seg = np.diff(v, axis=0)
    seglen = np.hypot(seg[:, 0], seg[:, 1])
    seglen = np.where(seglen > 0, seglen, 1e-300)
    cum = np.concatenate([[0.0], np.cumsum(seglen)])
    # the nearest vertex beyond `bound` is not needed: such a point is farther than that
    _, k = cKDTree(v).query(xy, distance_upper_bound=bound)
    k = np.minimum(k, len(v) - 1)   # none within bound: any vertex, its distance is large
    best_d = np.full(len(xy), np.inf)
    best_s = np.zeros(len(xy))
    best_side = np.zeros(len(xy))
    for j in (np.maximum(k - 1, 0), np.minimum(k, len(seg) - 1)):
        p = xy - v[j]
        tt = np.clip(np.einsum("ij,ij->i", p, seg[j]) / seglen[j] ** 2, 0.0, 1.0)
        off = p - tt[:, None] * seg[j]
        d = np.hypot(off[:, 0], off[:, 1])
        better = d < best_d
        best_d = np.where(better, d, best_d)
        best_s = np.where(better, cum[j] + tt * seglen[j], best_s)
        cross = seg[j][:, 0] * p[:, 1] - seg[j][:, 1] * p[:, 0]
        best_side = np.where(better, np.sign(cross), best_side)
    return best_d, best_s, best_side


def valley_line(line, window, step):
    """The centreline smoothed by a moving average of its densified vertices over
    ``window`` (CRS units; ends held): the line along which the water surface is
    interpolated. Far from a sinuous channel the nearest point of the channel
    itself jumps from one meander to the next, and so would the surface; the
    smoothed line's nearest point moves steadily down the valley."""
    from scipy.ndimage import uniform_filter1d

    v = shapely.get_coordinates(shapely.segmentize(line, step))
    size = int(min(len(v), max(1, round(window / step)))) | 1
    if size < 3:
        return line
    sm = uniform_filter1d(v, size, axis=0, mode="nearest")
    sm[0], sm[-1] = v[0], v[-1]
    out = shapely.LineString(sm)
    return out if out.is_valid and out.length > 0 else line


def _distance_if_near(line, xy, d_own, step, half):
    """Distance from ``xy`` to ``line`` where it may beat ``d_own``: points whose
    distance to the line's bounding box exceeds ``d_own`` keep +inf (the line cannot
    be nearer), so a long neighbour costs only the cells near it."""
    x0, y0, x1, y1 = line.bounds
    dx = np.maximum(np.maximum(x0 - xy[:, 0], xy[:, 0] - x1), 0.0)
    dy = np.maximum(np.maximum(y0 - xy[:, 1], xy[:, 1] - y1), 0.0)
    near = np.hypot(dx, dy) <= d_own
    out = np.full(len(xy), np.inf)
    if near.any():
        out[near] = nearest_on_line(line, xy[near], step, half + 2 * step)[0]
    return out


def corridor(line, others, transform, shape, half_m: float, xy_factor: float = 1.0,
             grid=None, candidates=None) -> Corridor:
    """The corridor of ``line`` (the reach's centreline, downstream first) on a
    window of ``shape`` with affine ``transform`` read from a raster whose whole
    transform is ``grid``: cells within ``half_m`` metres of the line, owned by it
    against the lines of ``others`` (the neighbouring reaches, a (Multi)LineString
    or None), see the module docstring. ``candidates`` (h, w) bool: only these cells
    can be wet (the terrain below the highest water surface); the others are left
    out of the corridor, which saves the distances of high ground."""
    f = float(xy_factor)
    half = half_m / f
    poly = line.buffer(half)
    inside = features.geometry_mask([poly], out_shape=shape, transform=transform,
                                    invert=True, all_touched=True)
    if candidates is not None:
        inside &= candidates
    idx = np.flatnonzero(inside)
    centres = cell_centres(transform, shape, grid).reshape(-1, 2)[idx]
    a, b, _c, d, e, _f = transform[:6]
    size = max(np.hypot(a, d), np.hypot(b, e))
    step = size
    d_own, s, side = nearest_on_line(line, centres, step, half + 2 * step)
    own = d_own <= half
    parts = [] if others is None else [g for g in shapely.get_parts(others) if not g.is_empty]
    if parts:
        dist = np.stack([_distance_if_near(g, centres, d_own, step, half) for g in parts])
        near = np.argmin(dist, axis=0)
        d_other = dist[near, np.arange(len(centres))]
        mine = _key(line)
        wins_tie = np.array([mine < _key(g) for g in parts])[near]
        own &= (d_own < d_other) | ((d_own == d_other) & wins_tie)
    own &= ~_free_end_mask(line, others, centres, size)

    def full(v, fill):
        out = np.full(inside.size, fill, dtype=np.asarray(v).dtype)
        out[idx] = v
        return out.reshape(shape)

    valley = valley_line(line, half, step)
    along = nearest_on_line(valley, centres, step)[1] if valley is not line else s
    inside = full(d_own <= half, False)
    return Corridor(inside=inside, own=full(own, False), chainage=full(s * f, np.nan),
                    distance=full(d_own * f, np.nan), side=full(side.astype(np.int8), 0),
                    cell_area=abs(a * e - b * d) * f * f, cell_size=size * f, half=half_m,
                    along=full(along * f, np.nan), valley=valley, xy_factor=f)


def window_points(line, half_m: float, xy_factor: float = 1.0) -> np.ndarray:
    """(2, 2) corners of the bounding box of the corridor (work CRS), for the window
    read (:func:`reachgauge.inputs.sampler.read_window`)."""
    x0, y0, x1, y1 = line.buffer(half_m / xy_factor).bounds
    return np.array([[x0, y0], [x1, y1]])
