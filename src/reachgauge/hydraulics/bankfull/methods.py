"""The automatic bankfull methods, each an array operation over (transects, stages).

The trial stages of a block of transects (:func:`~reachgauge.hydraulics.bankfull.scales.stage_grid`)
go through ONE call of the section kernel (:func:`reachgauge.kernel.sections.wet`),
which gives top width, area, hydraulic depth and water edges of every (transect,
stage); every method then reads its curve row by row with whole-array operations.
The methods and their sources are in the package docstring
(:mod:`reachgauge.hydraulics.bankfull`).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from reachgauge.hydraulics.bankfull import peaks
from reachgauge.hydraulics.bankfull import rows as R
from reachgauge.hydraulics.bankfull.scales import Scales, blocks, scales, stage_grid
from reachgauge.kernel import sections as K

AUTOMATIC_METHODS = ("bank-top", "min-width-depth", "bench", "max-hydraulic-depth")

# bank-top: within one break rise, the water's edges must run out by at least this fraction
# of the section's top width (a floodplain, not a narrow inset bench or a noise spike)
SPREAD_FRACTION = 0.5
# bench: a peak of dW/dh is marked when it is this many times the channel's own median
# rate below it (a V's rate is constant, a floodplain's is many times the bank's)
BENCH_RATIO = 3.0
# min-width-depth / max-hydraulic-depth: a local extremum is marked when the curve
# moves away from it by at least this fraction of its value (peak prominence)
WIDTH_DEPTH_PROMINENCE = 0.25
HYDRAULIC_DEPTH_PROMINENCE = 0.10


@dataclass(frozen=True)
class Curves:
    """The trial curves of a block of b transects: (b, K) arrays over trial stages,
    and the per-row layout (b,) of :class:`~reachgauge.hydraulics.bankfull.scales.Scales`
    with ``last``, the last stage index searched (stage ≤ top + δ, and one break
    rise of stages left above it)."""

    stage: np.ndarray
    top_width: np.ndarray
    area: np.ndarray
    hydraulic_depth: np.ndarray
    count: np.ndarray
    step: np.ndarray
    lag: np.ndarray
    first: np.ndarray
    last: np.ndarray
    min_run: np.ndarray
    top: np.ndarray


def curves(p: K.Profiles, sc: Scales, rows) -> Curves:
    """Trial curves of the profiles ``rows`` of ``p``: one kernel call for all."""
    stage = stage_grid(sc, rows)
    w = K.wet(p.take(rows), stage)
    k = np.arange(stage.shape[1])[None, :]
    count, lag, rise = sc.count[rows], sc.lag[rows], sc.rise[rows]
    # Trial stages run one break rise past the lower profile end and are searched up
    # to it: a transect often ends on the floodplain itself, so the break (water
    # spreading over the plain) and the spill past the end coincide, and a method
    # must see the curve turn just beyond the end to find it.
    below = ((stage <= (sc.top[rows] + rise)[:, None]) & (k < count[:, None])).sum(axis=1)
    last = np.minimum(below - 1, count - 1 - lag)
    return Curves(stage, w.top_width, w.area, w.hydraulic_depth, count, sc.step[rows], lag, sc.first[rows], last,
                  sc.min_run[rows], sc.top[rows])


def bank_top(c: Curves) -> np.ndarray:
    """Lower of the two bank tops (b,), NaN where neither breaks.

    The water's edges are the running maxima of the ground walking out from the
    thalweg (the section kernel), so within one break rise δ an edge runs far only
    where its bank has flattened. A bank top is the first stage at which the edges,
    over the next δ, run out by at least SPREAD_FRACTION of the top width (and by at
    least MIN_RUN_SAMPLES sample steps): the first bank, of either side, to flatten
    into a surface wide on the channel's scale is the lower bank top. Within that
    window the break is the stage where the run is half done.
    """
    b, n = c.top_width.shape
    k = np.arange(n)[None, :]
    lag = c.lag[:, None]
    # the span between the water's edges is the top width (kernel: T = x_r − x_l)
    span = c.top_width
    run = np.take_along_axis(span, np.minimum(k + lag, n - 1), axis=1) - span
    hit = (k >= c.first[:, None]) & (k <= c.last[:, None]) & \
        (run >= np.maximum(SPREAD_FRACTION * span, c.min_run[:, None]))
    j = R.first_true(hit)
    out = np.full(b, np.nan)
    rows = np.nonzero(j >= 0)[0]
    if rows.size == 0:
        return out
    j, lag = j[rows], c.lag[rows]
    o = np.arange(int(lag.max()) + 1)[None, :]
    win = span[rows[:, None], np.minimum(j[:, None] + o, n - 1)]
    w0, w1 = win[:, 0], span[rows, j + lag]
    m = j + R.first_true((win >= (w0 + 0.5 * (w1 - w0))[:, None]) & (o <= lag[:, None]))
    st = c.stage[rows]
    mid = 0.5 * (st[np.arange(rows.size), np.maximum(m - 1, 0)] + st[np.arange(rows.size), m])
    # the run may end beyond the profile's lower end (the water spills there)
    out[rows] = np.minimum(mid, c.top[rows])
    return out


def _at(c: Curves, col) -> np.ndarray:
    """Stage at column ``col`` of each row, NaN where ``col`` is -1."""
    ok = col >= 0
    return np.where(ok, c.stage[np.arange(col.size), np.maximum(col, 0)], np.nan)


def min_width_depth(c: Curves) -> np.ndarray:
    """Stage of the first marked minimum of W/D = W² / A (b,), NaN if none."""
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = np.where(c.area > 0, c.top_width ** 2 / c.area, np.inf)   # W / (A/W)
    return _at(c, peaks.first_marked(-ratio, c.first, c.last, WIDTH_DEPTH_PROMINENCE))


def max_hydraulic_depth(c: Curves) -> np.ndarray:
    """Stage of the first marked maximum of hydraulic depth A/W (b,), NaN if none."""
    return _at(c, peaks.first_marked(c.hydraulic_depth, c.first, c.last,
                                     HYDRAULIC_DEPTH_PROMINENCE))


def bench(c: Curves) -> np.ndarray:
    """First marked peak of Riley's bench index dW/dh (b,), NaN if none.

    The index is the centred difference of top width over about one break rise.
    A local maximum of it is marked when it is BENCH_RATIO times the channel's own
    rate, the median of the index from the search start to one break rise below the
    peak, and when the width it gains across its window is at least MIN_RUN_SAMPLES
    sample steps (a floodplain, not one noise dip).
    """
    b, n = c.top_width.shape
    k = np.arange(n)[None, :]
    half = np.maximum(1, c.lag // 2)[:, None]
    window = 2 * half * c.step[:, None]           # stage rise across the difference
    inner = (k >= half) & (k <= c.count[:, None] - half - 1)
    w = c.top_width
    ahead = np.take_along_axis(w, np.clip(k + half, 0, n - 1), axis=1)
    behind = np.take_along_axis(w, np.clip(k - half, 0, n - 1), axis=1)
    index = np.where(inner, (ahead - behind) / window, 0.0)
    first = np.maximum(c.first, half[:, 0])
    last = np.minimum(c.last, c.count - half[:, 0] - 1)
    pk = peaks.local_maxima(index, first, last) & \
        (index * 2 * half * c.step[:, None] >= c.min_run[:, None])
    r, i = np.nonzero(pk)
    out = np.full(b, np.nan)
    if r.size == 0:
        return out
    ends = first[r] + np.maximum(i - first[r] - c.lag[r], 1)

    def marked(q):
        ref = R.prefix_median(index, r[q], first[r[q]], ends[q])
        return index[r[q], i[q]] >= BENCH_RATIO * np.maximum(ref, 1e-12)

    ok = R.first_passing(r, marked)
    rows, at = np.unique(r[ok], return_index=True)
    out[rows] = c.stage[rows, i[ok][at]]
    return out


def block_candidates(c: Curves) -> np.ndarray:
    """Stage of every automatic method for a block (b, 4), columns in the order of
    :data:`AUTOMATIC_METHODS`; NaN where a method found no break."""
    found = np.column_stack([bank_top(c), min_width_depth(c), bench(c), max_hydraulic_depth(c)])
    found[c.first > c.last] = np.nan
    # a break seen just past the profile's lower end is the floodplain at that end
    return np.where(np.isfinite(found), np.minimum(found, c.top[:, None]), found)


def candidates(p: K.Profiles, sc: Scales | None = None) -> np.ndarray:
    """Stage (m) picked by each automatic method for every profile (t, 4), in the
    order of :data:`AUTOMATIC_METHODS`, NaN where it found no clear break. The work
    runs in blocks of profiles of similar stage count, bounded in memory."""
    sc = scales(p) if sc is None else sc
    out = np.full((p.count, len(AUTOMATIC_METHODS)), np.nan)
    for rows in blocks(sc.count, np.nonzero(sc.searched)[0]):
        out[rows] = block_candidates(curves(p, sc, rows))
    return out


def candidate_stages(section) -> dict:
    """Stage (m) picked by each automatic method for one
    :class:`~reachgauge.kernel.crosssection.CrossSection`, NaN where it found no
    clear break: the one-row view of :func:`candidates`."""
    row = candidates(section.profiles)[0]
    return {m: float(v) for m, v in zip(AUTOMATIC_METHODS, row)}
