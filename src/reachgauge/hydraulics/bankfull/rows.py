"""Row-wise helpers over (t, n) arrays whose rows have different valid lengths.

numpy's reductions take one length per axis; the bankfull step needs medians of
ragged rows (one per transect), the first True of each row, medians of a prefix of
a row, and linear interpolation on each row's own ground line. Each helper gives,
row by row, exactly what the one-row numpy function gives (``np.median``,
``np.argmax`` of a mask, ``np.interp``), so the vectorised step reproduces the
per-transect answers to the last bit.
"""

from __future__ import annotations

import numpy as np

from reachgauge.kernel.sections import count_below

# Φ⁻¹(0.75): the median absolute deviation of a normal distribution in units of its
# standard deviation (the "normal" scale of scipy.stats.median_abs_deviation)
MAD_NORMAL = 0.6744897501960817
# cells of a (rows, columns) temporary above which work is split into row chunks
CHUNK_CELLS = 100_000


def first_true(mask) -> np.ndarray:
    """Column of the first True of each row of ``mask`` (t, n); -1 where none."""
    mask = np.asarray(mask, dtype=bool)
    if mask.shape[1] == 0:
        return np.full(mask.shape[0], -1)
    return np.where(mask.any(axis=1), mask.argmax(axis=1), -1)


def first_passing(rows, test) -> np.ndarray:
    """Which candidates pass ``test`` (a function of an index array into the
    candidates, returning bools), where only the first passing candidate of each row
    matters: ``rows`` (q,) sorted, the candidates in order along each row. The first
    candidate of every row is tested, then the others only in rows where it failed
    (False where not tested). Most rows settle on their first candidate, so most
    candidates are never tested; the answer for the first passing one is the same."""
    rows = np.asarray(rows)
    ok = np.zeros(rows.size, dtype=bool)
    if rows.size == 0:
        return ok
    lead = np.ones(rows.size, dtype=bool)
    lead[1:] = rows[1:] != rows[:-1]
    ok[lead] = test(np.nonzero(lead)[0])
    failed = np.zeros(int(rows.max()) + 1, dtype=bool)
    failed[rows[lead & ~ok]] = True
    rest = np.nonzero(failed[rows] & ~lead)[0]
    ok[rest] = test(rest)
    return ok


def median(values, valid) -> np.ndarray:
    """Median of the ``valid`` entries of each row of ``values`` (t, n), as
    ``np.median`` gives it for that row alone (mean of the two middle values for an
    even count); NaN for a row with none."""
    valid = np.asarray(valid, dtype=bool)
    v = np.where(valid, values, np.nan)          # NaN sorts last
    t, cols = v.shape
    n = valid.sum(axis=1)
    if cols == 0:
        return np.full(t, np.nan)
    s = np.sort(v, axis=1)
    rows = np.arange(t)
    lo = s[rows, np.clip((n - 1) // 2, 0, cols - 1)]
    hi = s[rows, np.clip(n // 2, 0, cols - 1)]
    out = np.where(n % 2 == 1, lo, (lo + hi) / 2)
    return np.where(n > 0, out, np.nan)


def mad(values, valid) -> np.ndarray:
    """Normal-scaled median absolute deviation of each row's valid entries, as
    ``scipy.stats.median_abs_deviation(row, scale="normal")``: median |v − median(v)|
    divided by Φ⁻¹(0.75) (a robust standard deviation). NaN for an empty row."""
    med = median(values, valid)
    return median(np.abs(values - med[:, None]), valid) / MAD_NORMAL


def prefix_median(values, rows, start, stop) -> np.ndarray:
    """Median of ``values[rows[q], start[q]:stop[q]]`` for each query q (as
    ``np.median`` of that slice), all queries at once; rows of ``values`` are
    gathered in chunks of at most :data:`CHUNK_CELLS` cells."""
    rows, start, stop = (np.asarray(a, dtype=np.intp) for a in (rows, start, stop))
    out = np.full(rows.size, np.nan)
    n = values.shape[1]
    k = np.arange(n)
    step = max(1, CHUNK_CELLS // max(n, 1))
    for c in range(0, rows.size, step):
        q = slice(c, c + step)
        inside = (k >= start[q, None]) & (k < stop[q, None])
        out[q] = median(values[rows[q]], inside)
    return out


def count_le(sorted_rows, values) -> np.ndarray:
    """Number of entries of each row of ``sorted_rows`` (t, m; ascending, +inf
    past a row's end) at or below each of ``values`` (t, k): ``searchsorted(...,
    side="right")`` per row. No float lies strictly between v and the next float
    above it, so "≤ v" is "< nextafter(v, +inf)"."""
    return count_below(sorted_rows, np.nextafter(np.asarray(values, dtype=float), np.inf))


def interp(xq, x, z, size) -> np.ndarray:
    """``np.interp(xq[i], x[i, :size[i]], z[i, :size[i]])`` for every row i at once,
    for query points inside each row's range: the same formula as numpy's (the
    vertex value where a query hits a vertex, else slope × (xq − x_j) + z_j)."""
    t, m = x.shape
    rows = np.arange(t)[:, None]
    last = np.maximum(np.asarray(size) - 1, 0)[:, None]
    xs = np.where(np.arange(m)[None, :] <= last, x, np.inf)
    j = np.clip(count_le(xs, xq) - 1, 0, last)
    j1 = np.minimum(j + 1, last)
    xj, zj = x[rows, j], z[rows, j]
    with np.errstate(divide="ignore", invalid="ignore"):
        slope = (z[rows, j1] - zj) / (x[rows, j1] - xj)
        return np.where((xq == xj) | (j == last), zj, slope * (xq - xj) + zj)
