"""Local maxima and their prominence along every row of a (rows, K) array at once,
each row searched over its own column range [first, last].

scipy.signal has no row-wise version: ``find_peaks`` and ``peak_prominences`` take
one 1-D signal per call, which costs a Python call (and its overhead) per transect.
The functions here give, row by row, what those give on the row's slice
``y[first:last + 1]`` (checked against them on random rows in
tests/test_bankfull_peaks.py):

- a *peak* is a maximal run of equal values (a plateau of one or more samples)
  with a strictly lower sample on each side inside the slice, reported at the
  run's middle (rounded down); a run touching either end of the slice is not a
  peak (the definition of scipy.signal.find_peaks);
- its *prominence* is its height above the higher of the two lowest points
  reached walking from it to either side until ground higher than the peak (or
  the end of the slice; a NaN also stops the walk): the topographic prominence,
  as scipy.signal.peak_prominences defines it with no window (common practice).

Cost: a few passes over the array for the peaks; each prominence one pass over its
row (done only for peaks that an upper bound cannot rule out).
"""

from __future__ import annotations

import numpy as np

from reachgauge.hydraulics.bankfull import rows as R

# the stage of a marked extremum is the end of its plateau within this fraction of
# the extreme value (see first_marked)
PLATEAU_FRACTION = 0.02


def local_maxima(y, first, last) -> np.ndarray:
    """Boolean (rows, K): True at the peaks of each row's slice ``y[first:last+1]``
    (see the module docstring for the plateau rule)."""
    y = np.asarray(y, dtype=float)
    t, n = y.shape
    k = np.arange(n)[None, :]
    first = np.asarray(first)[:, None]
    last = np.asarray(last)[:, None]
    out = np.zeros((t, n), dtype=bool)
    if n < 3:
        return out
    inner = (k[:, 1:-1] > first) & (k[:, 1:-1] < last)
    with np.errstate(invalid="ignore"):
        out[:, 1:-1] = inner & (y[:, :-2] < y[:, 1:-1]) & (y[:, 2:] < y[:, 1:-1])
        # a row with two equal neighbours in its slice may hold a plateau
        ties = ((y[:, 1:] == y[:, :-1]) & (k[:, 1:] > first) & (k[:, 1:] <= last)).any(axis=1)
    if ties.any():
        rows = np.nonzero(ties)[0]
        out[rows] = _plateau_maxima(y[rows], first[rows], last[rows])
    return out


def _plateau_maxima(y, first, last) -> np.ndarray:
    """:func:`local_maxima` of rows that may hold plateaus: each run of equal values
    found by its start and end, the peak at its middle."""
    t, n = y.shape
    k = np.arange(n)[None, :]
    inside = (k >= first) & (k <= last)
    nan = np.full((t, 1), np.nan)
    prev = np.concatenate([nan, y[:, :-1]], axis=1)
    nxt = np.concatenate([y[:, 1:], nan], axis=1)
    # runs of equal values (a NaN is never equal, so it is a run of its own)
    start = (k == first) | ~(y == prev)
    end = (k == last) | ~(y == nxt)
    a = np.maximum.accumulate(np.where(start & inside, k, -1), axis=1)
    b = np.minimum.accumulate(np.where(end & inside, k, n)[:, ::-1], axis=1)[:, ::-1]
    rows = np.arange(t)[:, None]
    with np.errstate(invalid="ignore"):
        lower_left = y[rows, np.clip(a - 1, 0, n - 1)] < y
        lower_right = y[rows, np.clip(b + 1, 0, n - 1)] < y
    return inside & (k == (a + b) // 2) & (a > first) & (b < last) & lower_left & lower_right


def prominences(y, rows, cols, first, last) -> np.ndarray:
    """Prominence of the peaks at (``rows``, ``cols``) of ``y``, each searched
    within its row's [first, last] (arrays per peak), as
    scipy.signal.peak_prominences gives it on the row's slice. The peaks' rows are
    gathered in chunks of at most :data:`~reachgauge.hydraulics.bankfull.rows.CHUNK_CELLS`
    cells."""
    y = np.asarray(y, dtype=float)
    n = y.shape[1]
    k = np.arange(n)[None, :]
    out = np.empty(len(rows))
    step = max(1, R.CHUNK_CELLS // max(n, 1))
    for c in range(0, len(rows), step):
        q = slice(c, c + step)
        seg = y[rows[q]]
        p = cols[q][:, None]
        lo, hi = first[q][:, None], last[q][:, None]
        v = seg[np.arange(seg.shape[0]), cols[q]][:, None]
        with np.errstate(invalid="ignore"):
            stop = ~(seg <= v)                     # higher ground, or NaN, ends a walk
        left = np.where(stop & (k < p) & (k >= lo), k, lo - 1).max(axis=1)[:, None]
        right = np.where(stop & (k > p) & (k <= hi), k, hi + 1).min(axis=1)[:, None]
        left_min = np.where((k > left) & (k <= p), seg, np.inf).min(axis=1)
        right_min = np.where((k >= p) & (k < right), seg, np.inf).min(axis=1)
        out[q] = v[:, 0] - np.maximum(left_min, right_min)
    return out


def _side_minima(y, first, last):
    """Lowest value of each row's slice left of and at, and right of and at, each
    column (NaN ignored): bounds below every walk's minimum, so v − max(both) bounds
    a peak's prominence from above."""
    k = np.arange(y.shape[1])[None, :]
    inside = (k >= np.asarray(first)[:, None]) & (k <= np.asarray(last)[:, None])
    m = np.where(inside, y, np.inf)
    left = np.fmin.accumulate(m, axis=1)
    right = np.fmin.accumulate(m[:, ::-1], axis=1)[:, ::-1]
    return left, right


def first_marked(y, first, last, min_prominence) -> np.ndarray:
    """Column of the first *marked* local maximum of each row's slice
    ``y[first:last+1]`` (rows, K), or -1 where there is none.

    Marked: its prominence is at least ``min_prominence`` × its own magnitude |y|
    (a peak of value 0 is never marked). Near such a maximum the curve can be nearly
    flat, where DEM noise alone decides which stage holds the extreme value; so the
    column returned is the last one, before the curve leaves the maximum for good,
    whose value is within :data:`PLATEAU_FRACTION` of it: the end of the plateau,
    where the curve turns at the break. For a first marked minimum pass −y.
    """
    y = np.asarray(y, dtype=float)
    t, n = y.shape
    first, last = np.asarray(first), np.asarray(last)
    out = np.full(t, -1)
    r, c = np.nonzero(local_maxima(y, first, last))     # row-major: in order along each row
    if r.size == 0:
        return out
    v = y[r, c]
    mag = np.abs(v)
    with np.errstate(invalid="ignore"):         # 0 × inf: a zero prominence asked of a zero value
        need = min_prominence * np.where(mag > 0, mag, np.inf)
    left, right = _side_minima(y, first, last)
    # the upper bound rules most noise peaks out before the exact walk
    with np.errstate(invalid="ignore"):
        maybe = v - np.maximum(left[r, c], right[r, c]) >= need
    r, c, need = r[maybe], c[maybe], need[maybe]
    ok = R.first_passing(r, lambda q: prominences(y, r[q], c[q], first[r[q]], last[r[q]]) >= need[q])
    r, c = r[ok], c[ok]
    if r.size == 0:
        return out
    rows, at = np.unique(r, return_index=True)          # the first marked peak of each row
    peak = c[at]
    v = y[rows, peak]
    margin = v - PLATEAU_FRACTION * np.abs(v)
    k = np.arange(n)[None, :]
    with np.errstate(invalid="ignore"):
        leaves = (k >= peak[:, None]) & (k <= last[rows, None]) & (y[rows] < margin[:, None])
    away = R.first_true(leaves)
    out[rows] = np.where(away >= 0, away - 1, last[rows])
    return out
