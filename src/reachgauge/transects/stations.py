"""Stations along a reach and the transects across it.

All geometry here is in a metre frame (the working CRS scaled by its unit
factor, see :mod:`reachgauge.cutting`), the line oriented downstream.

*Stations* sit every ``spacing`` metres of chainage from the upstream end
(0, spacing, 2·spacing, … up to the line's length).

*Direction.* Digitised centrelines are jagged, so the direction at a station is
the chord of the line between chainage ``c − smoothing/2`` and ``c + smoothing/2``
(clipped to the ends). The chord is exactly the length-weighted mean of the
line's unit tangents over that stretch (the segment vectors sum to it), i.e. a
moving average of the direction over ``smoothing`` metres. The transect is
perpendicular to it; ``left`` is the unit normal pointing to the left bank
looking downstream (the tangent turned 90° anticlockwise).

*Offsets.* Across a transect, ``u`` is the signed distance from its centre,
positive toward the right bank; the offset from the left end is
``half_width + u``.

*Crossings* (:func:`crossing_limits`). A transect that crosses a stream line —
another reach, or its own line away from the station (a meander loop) — stops
short of it: at ``max(d − margin, d / 2)`` from the centre, ``d`` being the
distance to the crossing and ``margin`` the snap distance, because the other
channel lies anywhere within the snap distance of its line. Crossings of the own
line within ``smoothing / 2`` of chainage from the station (a jagged line meeting
its transect twice) and crossings exactly at the station (a junction) are not
avoidable and are ignored. Transects of the reach that cross each other at a
tight bend are both cut back, on the crossing side, to 95 % of their distance to
the crossing point (the two cut segments then cannot meet). Either is flagged
``shortened``. A crossing so close that cutting would leave less than
``min_keep`` metres on that side is not cut: that side keeps its length and the
transect is flagged ``crosses-neighbour``.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import shapely

# Transects that cross each other are cut back to this fraction of the distance
# from their centre to the crossing.
CROSS_BACK = 0.95
# Crossings this close to the station point are the station itself (or a
# junction exactly at it), not a crossing to avoid (m).
_AT_STATION = 1e-6


@dataclass(frozen=True)
class Stations:
    """Stations of one reach (metre frame).

    ``chainage`` (t,) m from the upstream end; ``xy`` (t, 2) points on the line;
    ``tangent`` (t, 2) unit vectors downstream; ``left`` (t, 2) unit normals to
    the left bank.
    """

    chainage: np.ndarray
    xy: np.ndarray
    tangent: np.ndarray
    left: np.ndarray


def place_stations(line, spacing, smoothing) -> Stations:
    """Stations every ``spacing`` m along ``line`` (a LineString in metres,
    oriented downstream), with directions smoothed over ``smoothing`` m."""
    length = float(line.length)
    chainage = np.arange(0.0, length + 1e-9 * max(length, 1.0), spacing)
    chainage = np.minimum(chainage, length)
    xy = shapely.get_coordinates(shapely.line_interpolate_point(line, chainage))
    half = max(smoothing, 0.0) / 2

    def at(c):
        return shapely.get_coordinates(shapely.line_interpolate_point(line, np.clip(c, 0, length)))

    def chord(h):
        return at(chainage + h) - at(chainage - h)

    vec = chord(half)
    norm = np.hypot(vec[:, 0], vec[:, 1])
    # A smoothing window that closes on itself (a loop) has no chord: fall back
    # to the local direction.
    tiny = norm <= 1e-9 * max(length, 1.0)
    if tiny.any():
        h = min(1e-3 * length, 0.5)
        local = chord(h)
        vec = np.where(tiny[:, None], local, vec)
        norm = np.hypot(vec[:, 0], vec[:, 1])
        # at the tip of a line that doubles back even the local chord closes: take
        # the direction the line arrives from (or leaves by, at its start)
        tip = norm <= 1e-9 * max(length, 1.0)
        if tip.any():
            one_sided = np.where((chainage > 0)[:, None], at(chainage) - at(chainage - h),
                                 at(chainage + h) - at(chainage))
            vec = np.where(tip[:, None], one_sided, vec)
            norm = np.hypot(vec[:, 0], vec[:, 1])
    tangent = vec / norm[:, None]
    left = np.column_stack([-tangent[:, 1], tangent[:, 0]])
    return Stations(chainage=chainage, xy=xy, tangent=tangent, left=left)


def transect_points(centre, left, u) -> np.ndarray:
    """Points at signed offsets ``u`` (n,) m (positive to the right bank) across
    transects centred on ``centre`` (t, 2) with left normals ``left`` (t, 2).
    Returns (t, n, 2)."""
    u = np.asarray(u, dtype=float)
    return centre[:, None, :] - u[None, :, None] * left[:, None, :]


def transect_lines(centre, left, left_len, right_len) -> np.ndarray:
    """Transect LineStrings (left end first) from ``left_len`` m left of
    ``centre`` to ``right_len`` m right of it. Returns an array of ``t``."""
    a = centre + np.asarray(left_len, dtype=float)[:, None] * left
    b = centre - np.asarray(right_len, dtype=float)[:, None] * left
    return shapely.linestrings(np.stack([a, b], axis=1))


@dataclass(frozen=True)
class Limits:
    """How far each transect reaches from its centre after crossing checks (m),
    and why it was changed."""

    left: np.ndarray
    right: np.ndarray
    shortened: np.ndarray
    crossing: np.ndarray


def _signed_u(points, centre, left):
    return -np.einsum("ij,ij->i", points - centre, left)


def _stream_hits(lines, streams, centre, left, margin):
    """Crossings of transects with a line geometry: (owner, u, points, allowed length)."""
    hits = shapely.intersection(lines, streams)
    pts, owner = shapely.get_coordinates(hits, return_index=True)
    u = _signed_u(pts, centre[owner], left[owner])
    d = np.abs(u)
    return owner, u, pts, np.maximum(d - margin, d / 2)


def crossing_limits(centre, left, half_width, station_xy, station_chainage, own=None, others=None,
                    *, margin, min_keep, own_skip=0.0, check_neighbours=True) -> Limits:
    """Cut transects back so they cross neither a stream line nor each other;
    see the module docstring for the rules.

    ``centre`` (t, 2): transect centres (the thalweg); ``left`` (t, 2) left
    normals; ``station_xy`` (t, 2) and ``station_chainage`` (t,): where each
    transect meets its own line. ``own``: the reach's line (metres); its
    crossings within ``own_skip`` m of chainage from the station are the
    station's own (a jagged line may meet its transect more than once there)
    and are ignored. ``others``: the lines of other streams (metres); a crossing
    exactly at the station (a junction) is ignored. ``half_width`` m;
    ``margin`` m kept clear of another stream; ``min_keep`` m: the least length
    a side may be cut to.
    """
    t = centre.shape[0]
    full = np.full(t, float(half_width))
    lines = transect_lines(centre, left, full, full)
    cands = []  # (transect index, signed u, allowed length if cut)
    if own is not None:
        owner, u, pts, allowed = _stream_hits(lines, own, centre, left, margin)
        along = shapely.line_locate_point(own, shapely.points(pts))
        away = np.abs(along - station_chainage[owner]) > max(own_skip, _AT_STATION)
        cands.append((owner[away], u[away], allowed[away]))
    if others is not None and not shapely.is_empty(others):
        owner, u, pts, allowed = _stream_hits(lines, others, centre, left, margin)
        away = np.hypot(*(pts - station_xy[owner]).T) > _AT_STATION
        cands.append((owner[away], u[away], allowed[away]))
    if check_neighbours and t > 1:
        tree = shapely.STRtree(lines)
        i, j = tree.query(lines, predicate="intersects")
        keep = i < j
        i, j = i[keep], j[keep]
        if i.size:
            hits = shapely.intersection(lines[i], lines[j])
            pts, k = shapely.get_coordinates(hits, return_index=True)
            for owner in (i[k], j[k]):
                u = _signed_u(pts, centre[owner], left[owner])
                cands.append((owner, u, CROSS_BACK * np.abs(u)))
    lim_l, lim_r = full.copy(), full.copy()
    shortened = np.zeros(t, dtype=bool)
    crossing = np.zeros(t, dtype=bool)
    if cands:
        owner = np.concatenate([c[0] for c in cands])
        u = np.concatenate([c[1] for c in cands])
        allowed = np.concatenate([c[2] for c in cands])
        cut = allowed >= min(min_keep, half_width)
        crossing[owner[~cut]] = True
        on_left = u < 0
        np.minimum.at(lim_l, owner[cut & on_left], allowed[cut & on_left])
        np.minimum.at(lim_r, owner[cut & ~on_left], allowed[cut & ~on_left])
        shortened = (lim_l < full) | (lim_r < full)
    return Limits(left=lim_l, right=lim_r, shortened=shortened, crossing=crossing)
