"""Longitudinal profile and slope of a reach.

The profile is the thalweg elevation (or, for hydro-flattened terrain, the water
level) against chainage from the upstream end. Two steps:

*Carving (conditioning).* Water runs downhill, so the profile is made
monotone (non-increasing downstream) before fitting. Road embankments,
culverts and bridges stand in a terrain profile as humps the water in fact
passes through; pits and closed depressions (pools, kettles, bad thalweg
picks) sink below it. Both are violations of the same kind, and
:func:`carve` treats them alike, by least change:

- *breaching* a hump: the stations above all upstream ground are lowered onto
  the straight grade between the stations either side that are not (a hump
  running to the downstream end is held level);
- *filling* a pit: the stations below all downstream ground are raised onto the
  straight grade between the stations either side that are not (a pit at the
  upstream end is held level);
- each run of stations that one of them would move is a candidate with a cost,
  the sum of its moves (m); a run applies when it is cheaper than every run of
  the other kind that overlaps or touches it (the other way of removing the
  same violation); repeat until monotone (:func:`_condition`).

So a 3-station embankment is breached (cheaper than raising everything
upstream of it to its crest) and a 2-station pit is filled (cheaper than
lowering everything downstream of it to its floor), each onto the grade between
untouched stations: on a straight grade the result is the grade itself.
(Lindsay, J. B., 2016, "Efficient hybrid breaching-filling sink removal
methods for flow path enforcement in digital elevation models", Hydrological
Processes 30(6) [memory], makes the same choice per depression in 2-D terrain
by least cost; this is our 1-D form of it.)

Evidence (``benchmarks/bench_slope.py --part conditioning``: 2 km of a 0.002
grade, stations every 10 m, 200 m window, 2 cm noise, medians of 30 draws;
largest station-slope error over the reach / within 150 m upstream of the
feature, % of the true slope / length with less than half the true slope, m)::

                             breach only      least squares    isotonic pools  least change
                             (before)         (isotonic)       -> grade        (chosen)
    embankment 1.5 m x 3 st  14 / 6 / 0       95 / 95 / 180    14 / 3 / 0      15 / 8 / 0
    pit 0.5 m x 2 st         107 / 107 / 230  49 / 25 / 0      14 / 6 / 0      15 / 9 / 0
    kettle-like depressions  463 / 82 / 845   121 / 95 / 1160  95 / 36 / 290   25 / 10 / 0
    clean grade              16 / 8 / 0       13 / 6 / 0       16 / 6 / 0      17 / 7 / 0
    embankment + plunge pool 244 / 241 / 390  103 / 95 / 335   17 / 3 / 0      17 / 10 / 0

Breaching alone (the old carving) lowers everything downstream of a pit to its
floor: the slope there falls to the floor and the slope into the pit doubles.
The least-squares monotone fit (pool-adjacent-violators, Barlow, R. E.,
Bartholomew, D. J., Bremner, J. M. and Brunk, H. D., 1972, "Statistical
inference under order restrictions", Wiley [memory];
``scipy.optimize.isotonic_regression``) spreads each violation into a level
pool: flat stretches, slopes at the floor next to an embankment. Putting the
stations it pooled onto the grade between the others fixes single features
but not kettles (pools merge). Least change is at the noise level (the clean
grade's figures) in every case; choosing breach or fill once for a whole
stretch between untouched stations does as well except for an embankment with
a plunge pool, where one must be breached and the other filled.

The station flag ``carved`` marks stations moved by more than
:data:`CARVE_TOLERANCE`; the reach flag ``reshaped-profile``
(:func:`reshaped`) marks a reach where more than :data:`RESHAPE_SHARE` of the
stations moved more than :data:`RESHAPE_MOVE` (kettle-like case: 21 % of
stations, median; a single structure or pit: 1–3 %).

*Fitting.* Slope at each station is a Theil–Sen estimate (the median of the
slopes between pairs of points; Theil, H., 1950, "A rank-invariant method of
linear and polynomial regression analysis", Proc. KNAW 53; Sen, P. K., 1968,
"Estimates of the regression coefficient based on Kendall's tau", JASA 63)
over the valid stations within ``window / 2`` of it, with a bounded number of
pairs so that its cost per station does not grow with station density:

- a window of n stations with at most :data:`PAIR_BUDGET` pairs uses every
  pair: the exact Theil–Sen estimate (n ≤ 32; e.g. the default 200 m window at
  10–20 m spacing);
- a larger window uses only the pairs at least half the window apart (index
  lag ≥ ⌈(n − 1)/2⌉, the long baselines that carry the information, as in
  Theil's own abbreviated method, which pairs point i with point i + n/2
  [memory]), thinned to :data:`PAIR_BUDGET` pairs spread evenly over them.

The estimate is the same kind (a median of pair slopes, robust to a few bad
thalweg picks). Measured on a straight grade with Gaussian noise and a 200 m
window (``benchmarks/bench_slope.py``), its spread about the true slope is
1.01×, 1.17× and 1.10× the exact estimate's at 5, 1 and 0.5 m spacing (41, 201
and 401 stations a window), and it differs from the exact estimate by about
half of that estimate's own standard error (rms); its cost is
O(t · PAIR_BUDGET) for t stations, where the exact one's is O(t · n²). The reach slope is the same estimate over the
whole reach with :data:`REACH_PAIR_BUDGET` pairs (exact up to 632 stations).
Slopes are returned positive (a drop downstream), dimensionless, and never
below the floor ``min_slope``; stations whose fit fell below it are flagged.

Chainage is measured along the digitised line, as the stations are; a jagged
line is a little longer than the channel it follows (a 1 m wobble every 10 m adds
about 1 %), which makes the slope that much lower.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

# A station counts as carved when conditioning moved it by more than this (m):
# about the size of lidar noise on open ground.
CARVE_TOLERANCE = 0.05
# A reach is flagged reshaped-profile when conditioning moved more than
# RESHAPE_SHARE of its stations by more than RESHAPE_MOVE (m): five times the
# noise-sized tolerance, so noise alone does not count (none such on clean
# profiles with 2–5 cm noise), while an isolated structure or pit moves only a
# few stations (1–3.5 % of a 2 km reach) and kettle-like sequences 16–46 %
# (comparison in the module docstring).
RESHAPE_MOVE = 0.25
RESHAPE_SHARE = 0.10
# Rounds of the conditioning before it falls back to breaching what is left.
_MAX_ROUNDS = 64

# Pairs per station window: at most this many slopes enter each station's median,
# so the cost per station is bounded whatever the station spacing.
PAIR_BUDGET = 512
# The same bound for the one fit over the whole reach: every pair up to 632 points.
REACH_PAIR_BUDGET = 200_000
# Slopes held at once (rows × pairs) by the windowed fit (bounds memory).
_BLOCK = 1 << 20


def carve(chainage, z, tol=CARVE_TOLERANCE):
    """Condition a profile: breach humps and fill pits with least change, so
    that it never rises downstream (see the module docstring).

    ``chainage`` (t,) m increasing downstream, ``z`` (t,) m (NaN allowed: such
    points are skipped and stay NaN). Returns ``(z_carved, carved)`` where
    ``carved`` marks points moved (lowered or raised) by more than ``tol`` m.
    """
    c = np.asarray(chainage, dtype=float)
    z = np.asarray(z, dtype=float)
    out = z.copy()
    ok = np.isfinite(z)
    if ok.sum() >= 2:
        out[ok] = _condition(c[ok], z[ok])
    carved = ok & (np.abs(z - out) > tol)
    return out, carved


def reshaped(z_raw, z_carved) -> bool:
    """True when conditioning moved more than :data:`RESHAPE_SHARE` of the
    valid stations by more than :data:`RESHAPE_MOVE` m (the reach flag
    ``reshaped-profile``)."""
    move = np.abs(np.asarray(z_carved, dtype=float) - np.asarray(z_raw, dtype=float))
    ok = np.isfinite(move)
    return bool(ok.any() and np.mean(move[ok] > RESHAPE_MOVE) > RESHAPE_SHARE)


def _condition(c, z):
    """Least-change monotone profile of ``z`` (no NaN) at chainage ``c``.

    Each round finds the humps (runs above the breached profile) and pits (runs
    below the filled one) and applies every one that costs less (sum of
    |moves|, m) than each rival of the other kind it overlaps or touches; such
    rivals are the two ways of removing the same violation, and runs that do not
    touch change disjoint stations between unchanged anchors, so they can be
    applied together. A round is a few array passes; the cheapest run always
    applies, and rounds are few (6 on 10,000 stations of a grade under noise
    larger than its drop per station, measured).
    """
    y = z.copy()
    for _ in range(_MAX_ROUNDS):
        lowered, raised = _breach(c, y), _fill(c, y)
        hump, pit = lowered < y, raised > y
        if not hump.any():
            return y
        hid, pid = _runs(hump), _runs(pit)
        hcost = np.bincount(hid, y - lowered)
        pcost = np.bincount(pid, raised - y)
        hcost[0] = pcost[0] = np.inf              # label 0: not in a run
        hrival = _rival_cost(hid, pid, pcost, hcost.size)
        prival = _rival_cost(pid, hid, hcost, pcost.size)
        use_h = hcost <= hrival                   # a tie goes to the breach, as before
        use_p = pcost < prival
        use_h[0] = use_p[0] = False
        y = np.where(use_h[hid], lowered, np.where(use_p[pid], raised, y))
    return _breach(c, y)      # not reached in any test or benchmark; monotone anyway


def _rival_cost(own, other, other_cost, n):
    """Per run of ``own`` labels: the least cost of the ``other`` runs that
    overlap it or touch it (a station either side); inf when none."""
    pad = np.concatenate
    near = np.minimum(np.minimum(other_cost[other], other_cost[pad([[0], other[:-1]])]),
                      other_cost[pad([other[1:], [0]])])
    out = np.full(n, np.inf)
    np.minimum.at(out, own, near)
    return out


def _runs(mask):
    """Label runs of True 1, 2, … (0 elsewhere)."""
    start = mask & ~np.concatenate([[False], mask[:-1]])
    return np.where(mask, np.cumsum(start), 0)


def _breach(c, z):
    """Every point above all upstream ground lowered onto the straight grade
    between the points either side that are not (held level past the last)."""
    anchor = z <= np.minimum.accumulate(z)
    return np.where(anchor, z, np.interp(c, c[anchor], z[anchor]))


def _fill(c, z):
    """Every point below all downstream ground raised onto the straight grade
    between the points either side that are not (held level before the first):
    the breach of the profile seen upside down from the downstream end."""
    return -_breach(-c[::-1], -z[::-1])[::-1]


def theil_sen_windows(chainage, z, window, budget=None):
    """Slope dz/dchainage at each point over the valid points within
    ``window / 2`` of it (signed: negative where z falls downstream), by the
    bounded Theil–Sen estimate of the module docstring.

    ``chainage`` (t,) m, increasing; ``z`` (t,) m, NaN where no data (a point
    without data still gets the slope of its window); ``window`` m. ``budget``
    bounds the pairs per window (default :data:`PAIR_BUDGET`). NaN where a
    window holds fewer than two valid points. Vectorised over points: the cost
    is O(t · budget) at any spacing.
    """
    c = np.asarray(chainage, dtype=float)
    z = np.asarray(z, dtype=float)
    ok = np.isfinite(z) & np.isfinite(c)
    cv, zv = c[ok], z[ok]
    lo = np.searchsorted(cv, c - window / 2, side="left")
    hi = np.searchsorted(cv, c + window / 2, side="right")
    return _median_pair_slopes(cv, zv, lo, hi - lo, budget or PAIR_BUDGET)


def reach_fit(chainage, z) -> float:
    """Slope dz/dchainage over the whole reach, by the same estimate with
    :data:`REACH_PAIR_BUDGET` pairs (the exact Theil–Sen estimate, as
    :func:`scipy.stats.theilslopes`, up to 632 valid points); NaN with fewer
    than two valid points."""
    c = np.asarray(chainage, dtype=float)
    z = np.asarray(z, dtype=float)
    ok = np.isfinite(z) & np.isfinite(c)
    if ok.sum() < 2 or np.ptp(c[ok]) == 0:
        return float("nan")
    order = np.argsort(c[ok], kind="stable")
    cv, zv = c[ok][order], z[ok][order]
    return float(_median_pair_slopes(cv, zv, np.zeros(1, np.int64), np.array([cv.size]),
                                     REACH_PAIR_BUDGET)[0])


def _median_pair_slopes(c, z, lo, n, budget):
    """Median pair slope of each window ``c[lo:lo+n]`` (all arrays; ``c``
    sorted, no NaN), over the pairs of :func:`_pairs`; NaN for n < 2."""
    out = np.full(lo.size, np.nan)
    if c.size < 2 or lo.size == 0:
        return out
    step = max(1, _BLOCK // budget)
    for s in range(0, lo.size, step):
        sl = slice(s, s + step)
        # the pairs depend on the window size only: design each size once
        sizes, which = np.unique(n[sl], return_inverse=True)
        i, j, valid = (x[which] for x in _pairs(sizes, budget))
        a = np.minimum(lo[sl, None] + i, c.size - 1)
        b = np.minimum(lo[sl, None] + j, c.size - 1)
        dc = c[b] - c[a]
        good = valid & (dc > 0)
        if not good.any():
            continue
        # NaN sorts last, so the k valid slopes of a row come first
        slopes = np.sort(np.where(good, (z[b] - z[a]) / np.where(good, dc, 1.0), np.nan), axis=1)
        k = good.sum(axis=1)
        mid = np.stack([np.maximum(k - 1, 0) // 2, k // 2], axis=1)
        med = np.take_along_axis(slopes, mid, axis=1).mean(axis=1)
        out[sl] = np.where(k > 0, med, np.nan)
    return out


def _pairs(n, budget):
    """Index pairs ``(i, j)``, ``i < j``, into windows of ``n`` points (array,
    one window a row): every pair when there are at most ``budget`` of them,
    otherwise the pairs at least half a window apart (lag ≥ ⌈(n−1)/2⌉), thinned
    to ``budget`` spread evenly over their lexicographic order.

    Returns ``(i, j, valid)``, each (rows, P) with P ≤ ``budget``; the pair
    number q of a row is mapped to its (i, j) in closed form, so no Python
    loop runs per window.
    """
    n = np.asarray(n, dtype=np.int64)
    every = n * (n - 1) // 2 <= budget
    lag = np.where(every, 1, np.maximum(1, n // 2))              # n // 2 = ⌈(n−1)/2⌉
    rows = np.maximum(n - lag, 0)                                # i runs over 0..rows−1
    total = rows * (rows + 1) // 2                               # row i holds rows − i pairs
    width = int(min(budget, total.max(initial=0)))
    k = np.arange(width, dtype=np.int64)[None, :]
    thin = total[:, None] > width
    q = np.where(thin, ((2 * k + 1) * total[:, None]) // (2 * max(width, 1)), k)
    valid = q < total[:, None]
    q = np.where(valid, q, 0)
    # q lies in row i when start(i) ≤ q < start(i + 1), start(i) = i (2·rows − i + 1) / 2
    def start(r):
        return r * (2 * rows[:, None] - r + 1) // 2

    b = 2 * rows[:, None] + 1
    i = np.floor((b - np.sqrt(np.maximum(b * b - 8 * q, 0))) / 2).astype(np.int64)
    i = np.where(start(i) > q, i - 1, i)           # guard the square root's rounding
    i = np.where(start(i + 1) <= q, i + 1, i)
    j = i + lag[:, None] + (q - start(i))
    return i, j, valid


@dataclass(frozen=True)
class SlopeResult:
    """Slopes of one reach (dimensionless, positive downhill).

    ``station`` (t,): slope at each station after the floor; ``fitted`` (t,):
    the windowed fit before the floor (signed as a drop, NaN where no window);
    ``reach``: the reach slope after the floor; ``reach_fitted`` before it;
    ``floored`` (t,): the station's slope is the floor; ``reach_floored``.
    """

    station: np.ndarray
    fitted: np.ndarray
    reach: float
    reach_fitted: float
    floored: np.ndarray
    reach_floored: bool


def profile_slopes(chainage, z, window, min_slope) -> SlopeResult:
    """Station and reach slopes of profile ``z`` (m) at ``chainage`` (m).

    A station whose window holds fewer than two valid points takes the reach
    slope. Slopes below ``min_slope`` (flat or adverse) are raised to it.
    """
    drop = -theil_sen_windows(chainage, z, window)
    drop_reach = -reach_fit(chainage, z)
    filled = np.where(np.isfinite(drop), drop, drop_reach)
    floored = np.isfinite(filled) & (filled < min_slope)
    station = np.where(floored, min_slope, filled)
    reach_floored = bool(np.isfinite(drop_reach) and drop_reach < min_slope)
    reach = min_slope if reach_floored else drop_reach
    return SlopeResult(station=station, fitted=drop, reach=float(reach),
                       reach_fitted=float(drop_reach), floored=floored,
                       reach_floored=reach_floored)
