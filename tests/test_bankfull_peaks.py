"""Row-wise peaks, prominences, medians and interpolation of the bankfull package
against the reference libraries, row by row, on random data.

References (PyPI): scipy.signal.find_peaks and scipy.signal.peak_prominences (one
1-D signal per call: scipy has no row-wise version), scipy.stats.median_abs_deviation,
numpy.median, numpy.searchsorted, numpy.interp. The row-wise functions are meant to
give the same numbers as these to the last bit (they run the same comparisons and
the same arithmetic), so values are compared exactly.

Random rows: rounded values (ties, plateaus of every length), some NaN and -inf,
every row searched over its own random [first, last] (including slices too short
to hold a peak).
"""

import warnings

import numpy as np
import pytest
from scipy.signal import find_peaks, peak_prominences
from scipy.stats import median_abs_deviation

from reachgauge.hydraulics.bankfull import peaks, rows

RNG_SEEDS = range(6)


def random_rows(seed, t=400, n=60):
    rng = np.random.default_rng(seed)
    y = np.round(rng.normal(0.0, 1.0, (t, n)).cumsum(axis=1), rng.integers(0, 3))
    y[rng.random((t, n)) < 0.02] = np.nan
    y[rng.random((t, n)) < 0.01] = -np.inf
    first = rng.integers(0, n, t)
    last = np.minimum(first + rng.integers(-1, n, t), n - 1)
    return y, first, last


@pytest.mark.parametrize("seed", RNG_SEEDS)
def test_local_maxima_and_prominences_match_scipy_row_by_row(seed):
    y, first, last = random_rows(seed)
    mask = peaks.local_maxima(y, first, last)
    r, c = np.nonzero(mask)
    prom = peaks.prominences(y, r, c, first[r], last[r])
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")          # scipy warns on zero prominences
        for i in range(y.shape[0]):
            seg = y[i, first[i]:last[i] + 1]
            ref = find_peaks(seg)[0] if seg.size else np.array([], int)
            got = np.nonzero(mask[i])[0] - first[i]
            np.testing.assert_array_equal(got, ref, err_msg=f"row {i}")
            if ref.size:
                np.testing.assert_array_equal(prom[r == i], peak_prominences(seg, ref)[0])


def reference_first_marked(seg, min_prominence):
    """One row: scipy find_peaks with prominences, the first peak whose prominence is
    at least min_prominence × |value|, then the end of its plateau within 2 %."""
    if seg.size < 3:
        return -1
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        pk, props = find_peaks(seg, prominence=0.0)
    mag = np.abs(seg[pk])
    with np.errstate(invalid="ignore"):
        ok = props["prominences"] >= min_prominence * np.where(mag > 0, mag, np.inf)
    if not ok.any():
        return -1
    k = int(pk[ok][0])
    away = np.nonzero(seg[k:] < seg[k] - peaks.PLATEAU_FRACTION * abs(seg[k]))[0]
    return k + (int(away[0]) - 1 if away.size else seg.size - 1 - k)


@pytest.mark.parametrize("seed", RNG_SEEDS)
@pytest.mark.parametrize("prominence", [0.0, 0.1, 0.5])
def test_first_marked_matches_scipy_row_by_row(seed, prominence):
    y, first, last = random_rows(seed)
    y = y + 5.0                                 # values of both signs
    got = peaks.first_marked(y, first, last, prominence)
    for i in range(y.shape[0]):
        ref = reference_first_marked(y[i, first[i]:last[i] + 1], prominence)
        assert got[i] == (ref + first[i] if ref >= 0 else -1), i


def ragged(seed, t=300, n=25):
    rng = np.random.default_rng(seed)
    v = np.round(rng.normal(0.0, 1.0, (t, n)), 1)
    count = rng.integers(0, n + 1, t)
    return v, np.arange(n)[None, :] < count[:, None], count


@pytest.mark.parametrize("seed", RNG_SEEDS)
def test_row_median_and_mad_match_numpy_and_scipy(seed):
    v, valid, count = ragged(seed)
    med = rows.median(v, valid)
    mad = rows.mad(v, valid)
    for i in range(v.shape[0]):
        if count[i] == 0:
            assert np.isnan(med[i]) and np.isnan(mad[i])
            continue
        assert med[i] == np.median(v[i, :count[i]])
        assert mad[i] == median_abs_deviation(v[i, :count[i]], scale="normal")


@pytest.mark.parametrize("seed", RNG_SEEDS)
def test_prefix_median_matches_numpy(seed):
    v, _, _ = ragged(seed, n=40)
    rng = np.random.default_rng(seed)
    q = 500
    r = rng.integers(0, v.shape[0], q)
    start = rng.integers(0, 20, q)
    stop = start + rng.integers(1, 21, q)
    got = rows.prefix_median(v, r, start, stop)
    ref = [np.median(v[a, b:c]) for a, b, c in zip(r, start, stop)]
    np.testing.assert_array_equal(got, ref)


@pytest.mark.parametrize("seed", RNG_SEEDS)
def test_row_searchsorted_and_interp_match_numpy(seed):
    rng = np.random.default_rng(seed)
    t, m = 200, 30
    size = rng.integers(2, m + 1, t)
    x = np.cumsum(rng.uniform(0.05, 3.0, (t, m)), axis=1)
    z = rng.normal(0.0, 2.0, (t, m))
    inside = np.arange(m)[None, :] < size[:, None]
    xs = np.where(inside, x, np.inf)
    lo, hi = x[:, 0], x[np.arange(t), size - 1]
    xq = lo[:, None] + (hi - lo)[:, None] * rng.random((t, 50))
    xq[:, :5] = x[:, :5]                          # queries on vertices
    xq[:, 5] = hi                                 # and on the last one
    cnt = rows.count_le(xs, xq)
    zq = rows.interp(xq, x, z, size)
    for i in range(t):
        xi, zi = x[i, :size[i]], z[i, :size[i]]
        np.testing.assert_array_equal(cnt[i], np.searchsorted(xi, xq[i], side="right"))
        np.testing.assert_array_equal(zq[i], np.interp(xq[i], xi, zi))


@pytest.mark.parametrize("seed", RNG_SEEDS)
def test_first_passing_finds_the_same_first_candidate_as_testing_all(seed):
    # definition: the first candidate of each row that passes, candidates in row order
    rng = np.random.default_rng(seed)
    r = np.sort(rng.integers(0, 50, 300))
    passes = rng.random(300) < 0.3
    ok = rows.first_passing(r, lambda q: passes[q])
    assert not (ok & ~passes).any()
    for i in np.unique(r):
        want = np.flatnonzero(passes[r == i])
        got = np.flatnonzero(ok[r == i])
        assert got[:1].tolist() == want[:1].tolist(), i
