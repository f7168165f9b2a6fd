"""Flat thalwegs and the baseflow correction, for one section or every profile at once.

Lidar does not see through water (Smart, Bind & Duncan, 2009, MODSIM): where the
terrain under a channel is the water surface at flight time the bottom of a section
is flat, and the unseen channel can be added back as a parabolic bed under it.
"""

from __future__ import annotations

import numpy as np

from reachgauge.errors import InputError
from reachgauge.hydraulics.bankfull import rows as R
from reachgauge.hydraulics.bankfull.methods import candidate_stages
from reachgauge.hydraulics.bankfull.regional import finite
from reachgauge.kernel import sections as K
from reachgauge.kernel.crosssection import CrossSection

# A hydro-flattened surface (or lidar returns off water) is flat to the millimetre,
# while lidar ground has centimetres of scatter (REFERENCES: about 0.17-0.26 m RMSE in
# one study; 3-5 cm on open ground is common practice): a run of points within 5 mm
# of the thalweg is water, not bed.
FLAT_TOLERANCE = 0.005
# sample points laid across the corrected bed: with N equal steps the piecewise-linear
# parabola holds (2/3)·W·D·(1 − 1/N²) (trapezoid rule on a parabola), 0.01 % short at N = 100
_BED_STEPS = 100


def _check_tolerance(tolerance):
    t = finite(tolerance, "flat tolerance")
    if t < 0:
        raise InputError(f"the flat tolerance must be 0 or more, got {t:g} m",
                         "give how far above the thalweg (m) a point still counts as flat")
    return t


def flat_run(p: K.Profiles, tolerance: float = FLAT_TOLERANCE):
    """First and last point index (t,), (t,) of the run of points within
    ``tolerance`` (m) of the thalweg elevation that contains the thalweg: the running
    maxima of the ground outward from the thalweg (the kernel's) that stay within it."""
    # from the thalweg point itself (the lowest sample), not the bed level
    limit = (p.z[np.arange(p.count), p.i0] + tolerance)[:, None]
    left = (p.left_max <= limit).sum(axis=1)
    right = (p.right_max <= limit).sum(axis=1)
    return p.i0 - (left - 1), p.i0 + right - 1


def flat_rows(p: K.Profiles, channel_width, tolerance: float = FLAT_TOLERANCE,
              min_fraction: float = 0.2, min_points: int = 3) -> np.ndarray:
    """True (t,) where the flat bottom of a profile looks like a water surface: at
    least ``min_points`` consecutive points within ``tolerance`` (m) of the thalweg
    whose span is at least ``min_fraction`` of ``channel_width`` (t,) m. A channel's
    water surface at low flow covers much of its bed, while chance flatness of a
    noisy bed covers two or three points at most (common practice)."""
    a, b = flat_run(p, tolerance)
    rows = np.arange(p.count)
    width = p.x[rows, np.maximum(b, 0)] - p.x[rows, np.maximum(a, 0)]
    return (b - a + 1 >= min_points) & (width >= min_fraction * np.asarray(channel_width))


def flat_thalweg_width(section: CrossSection, tolerance: float = FLAT_TOLERANCE) -> float:
    """Width (m) of the bottom that lies within ``tolerance`` (m) of the thalweg
    elevation and is connected to the thalweg: the span of the run of profile points,
    containing the lowest, that all stand no more than ``tolerance`` above it.

    A hydro-flattened DEM, or lidar returns off a water surface, show up as a
    perfectly flat bottom; a sampled natural bed rarely keeps several points within
    5 mm of each other (see :data:`FLAT_TOLERANCE`).
    """
    a, b = flat_run(section.profiles, _check_tolerance(tolerance))
    return float(section.offset[b[0]] - section.offset[a[0]])


def is_flat_thalweg(section: CrossSection, tolerance: float = FLAT_TOLERANCE, *, channel_width=None,
                    min_fraction: float = 0.2, min_points: int = 3) -> bool:
    """True when the flat bottom (:func:`flat_thalweg_width`) looks like a water surface
    (see :func:`flat_rows`). ``channel_width`` (m) defaults to the top width at the
    bank-top stage (at the profile's lower end when there is none); pick_bankfull
    passes the width at its pick."""
    t = _check_tolerance(tolerance)
    a, b = flat_run(section.profiles, t)
    if b[0] - a[0] + 1 < min_points:
        return False
    if channel_width is None:
        at = candidate_stages(section)["bank-top"]
        channel_width = float(section.geometry(at if np.isfinite(at) else section.top).top_width)
    return bool(flat_rows(section.profiles, [float(channel_width)], t, min_fraction, min_points)[0])


def _bed_points(p: K.Profiles, rows, tolerance):
    """Offsets of the corrected bed of ``rows``: the union of _BED_STEPS equal steps
    across the flat span [x_a, x_b] and the old points inside it, sorted, as
    ``np.union1d(np.linspace(x_a, x_b, N + 1), x[a:b + 1])`` per row. Returns
    a, b, x_a, x_b (r,), xn (r, L) padded with +inf, and L (r,)."""
    a, b = flat_run(p, tolerance)
    a, b = a[rows], b[rows]
    size = p.size[rows]
    x = p.x[rows]
    single = a == b          # no flat: the two segments either side of the thalweg
    a = np.where(single, np.maximum(a - 1, 0), a)
    b = np.where(single, np.minimum(b + 1, size - 1), b)
    r = np.arange(rows.size)[:, None]
    xa, xb = x[r[:, 0], a], x[r[:, 0], b]
    # np.linspace: k · step + start, the last point exactly the stop
    lin = np.arange(_BED_STEPS + 1)[None, :] * ((xb - xa) / _BED_STEPS)[:, None] + xa[:, None]
    lin[:, -1] = xb
    j = np.arange(int((b - a).max(initial=0)) + 1)[None, :]
    old = np.where(j <= (b - a)[:, None], x[r, np.minimum(a[:, None] + j, x.shape[1] - 1)], np.inf)
    both = np.sort(np.concatenate([lin, old], axis=1), axis=1)
    keep = np.isfinite(both)
    keep[:, 1:] &= both[:, 1:] != both[:, :-1]
    length = keep.sum(axis=1)
    xn = np.sort(np.where(keep, both, np.inf), axis=1)[:, :int(length.max(initial=1))]
    return a, b, xa, xb, xn, length


def correct_profiles(p: K.Profiles, depth=None, area=None,
                     tolerance: float = FLAT_TOLERANCE, where=None) -> K.Profiles:
    """:func:`baseflow_correct` of the valid profiles of ``p`` at once (``where``
    (t,) bool: only those; invalid ones are kept as they are). ``depth`` (m) or
    ``area`` (m²): scalar or one per profile (exactly one of them). Returns new
    :class:`~reachgauge.kernel.sections.Profiles`, each corrected row the bed points
    inserted and lowered; every row keeps its thalweg (a corrected row's is the
    lowest point of its new bed)."""
    chosen = p.valid if where is None else p.valid & np.asarray(where, dtype=bool)
    rows = np.nonzero(chosen)[0]
    a, b, xa, xb, xn, length = _bed_points(p, rows, tolerance)
    x, z, size = p.x[rows], p.z[rows], p.size[rows]
    half = 0.5 * (xb - xa)
    col = np.arange(xn.shape[1])[None, :]
    inside = col < length[:, None]
    with np.errstate(invalid="ignore", divide="ignore"):
        shape = 1.0 - ((xn - 0.5 * (xa + xb)[:, None]) / half[:, None]) ** 2
    shape = np.where(inside & (col > 0) & (col < (length - 1)[:, None]), shape, 0.0)
    if area is not None:
        xf = np.where(inside, xn, xb[:, None])
        unit = np.sum(0.5 * (shape[:, 1:] + shape[:, :-1]) * np.diff(xf, axis=1), axis=1)
        d = np.broadcast_to(np.asarray(area, dtype=float), (p.count,))[rows] / unit
    else:
        d = np.broadcast_to(np.asarray(depth, dtype=float), (p.count,))[rows]
    zn = R.interp(np.where(inside, xn, xb[:, None]), x, z, size) - d[:, None] * shape
    # new rows: the points left of the span, the bed, the points right of it
    new_size = a + length + (size - b - 1)
    k = np.arange(int(new_size.max(initial=0)))[None, :]
    a2, ab = a[:, None], (a + length)[:, None]
    src = np.clip(np.where(k < ab, k, k - ab + b[:, None] + 1), 0, x.shape[1] - 1)
    mid = np.clip(k - a2, 0, xn.shape[1] - 1)
    r = np.arange(rows.size)[:, None]
    in_bed = (k >= a2) & (k < ab)
    xo = np.where(in_bed, xn[r, mid], x[r, src])
    zo = np.where(in_bed, zn[r, mid], z[r, src])
    width = max(k.shape[1], p.x.shape[1])
    X = np.full((p.count, width), np.nan)
    Z = np.full((p.count, width), np.nan)
    kept = np.arange(p.x.shape[1])[None, :] < p.size[:, None]     # rows left as they are
    X[:, :p.x.shape[1]] = np.where(kept, p.x, np.nan)
    Z[:, :p.x.shape[1]] = np.where(kept, p.z, np.nan)
    valid = k < new_size[:, None]
    X[rows] = np.nan
    Z[rows] = np.nan
    X[rows, :k.shape[1]] = np.where(valid, xo, np.nan)
    Z[rows, :k.shape[1]] = np.where(valid, zo, np.nan)
    thalweg = p.i0.copy()                       # rows are written without gaps
    thalweg[rows] = np.argmin(np.where(in_bed, zo, np.inf), axis=1)
    bed = p.thalweg.copy()                      # a corrected row's bed is its new bottom
    bed[rows] = np.nan
    return K.profiles(X, Z, thalweg, bed)


def baseflow_correct(section: CrossSection, depth=None, area=None,
                     tolerance: float = FLAT_TOLERANCE) -> CrossSection:
    """Lower the flat water-surface bottom of ``section`` by a parabolic bed.

    Lidar sees the water surface, not the bed (Smart, Bind & Duncan, 2009, MODSIM).
    Across the flat bottom (:func:`flat_thalweg_width`, span W between x_a and x_b),
    the ground is lowered by D·(1 − ((x − x_c)/(W/2))²), x_c the span's centre: a
    parabolic bed of maximum depth D whose added area is (2/3)·W·D (Archimedes'
    quadrature of the parabola). Give exactly one of ``depth`` (D, m) or ``area``
    (m²); for an area, D is solved so that the added area, as the section computes
    it, equals ``area`` exactly.

    If the bottom is not flat (fewer than two points within ``tolerance``), the lidar
    saw no water surface wider than one sample: the parabola spans the two segments
    either side of the thalweg, the narrowest bed the profile can represent, so the
    correction adds the submerged area where the thalweg is without widening it.

    The new section has ``_BED_STEPS`` equal steps across the span plus the old points
    inside it (so the old ground between them is kept exactly); banks carry over.
    The one-row view of :func:`correct_profiles`.
    """
    if (depth is None) == (area is None):
        raise InputError("give exactly one of depth or area for the baseflow correction",
                         "give the depth (m) or the area (m²) of water under the surface")
    value = finite(depth if depth is not None else area,
                   "baseflow depth" if depth is not None else "baseflow area")
    if value < 0:
        raise InputError(f"the baseflow {'depth' if depth is not None else 'area'} must be 0 "
                         f"or more, got {value:g}", "give the water under the surface to add")
    p = correct_profiles(section.profiles, depth=value if depth is not None else None,
                         area=value if area is not None else None,
                         tolerance=_check_tolerance(tolerance))
    n = int(p.size[0])
    return CrossSection(p.x[0, :n], p.z[0, :n], banks=section.banks)
