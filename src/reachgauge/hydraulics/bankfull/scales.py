"""Scales of the bankfull shape tests and the trial stages, for every profile at once.

Each scale comes from the profile itself, so noisy and clean DEMs are read alike:

- the *noise* σ: a robust estimate of the elevation scatter of the profile's own
  samples about its local ground line (:func:`reachgauge.kernel.bed.noise`: the
  normal-scaled median absolute deviation of the residuals about the points two
  places either side, bends left out; Rousseeuw, P. J. & Croux, C., 1993,
  "Alternatives to the median absolute deviation", JASA 88 [memory], for the MAD as
  a robust scale). Per profile, not per reach (the bed level uses the reach's,
  :func:`reachgauge.kernel.bed.reach_noise`): the break rise guards against the
  spikes on *this* section's banks holding the water edge back, and a section
  rougher than its reach (brush, a rocky bank) needs the larger rise. Measured for
  issue 9 with benchmarks/bench_banks.py: the reach's σ here instead changed the 18
  synthetic cases by at most 0.2 % in width, area and Q but one (meander, 2 m, 5 cm:
  Q -4.5 -> -5.3 %, past the 5 % target), and moved the demo reaches' widths by
  -0.02 to +0.22 m (all but one wider); no gain to pay for the lost local guard;
- the *break rise* δ = max(5 cm, 3σ): the rise of stage over which a break must show
  (below 3σ a noise spike on a bank can hold the water edge back);
- breaks are sought only at depths of at least 2δ, because within a few σ of the
  thalweg the water spreads over the (noisy or flat) bed itself, which every shape
  criterion would otherwise take for a floodplain.

Trial stages: per profile, even steps of a fifth of δ or finer (at least 200 over
the profile's depth, at most :data:`MAX_STAGES`) from the thalweg to two break rises
past the lower end of the profile; :func:`stage_grid` lays the stages of a block of
profiles out as one (rows, K) array, each row with its own step, valid up to its own
count.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from reachgauge.hydraulics.bankfull import rows as R
from reachgauge.kernel import bed
from reachgauge.kernel.sections import Profiles

BREAK_RISE_FLOOR = 0.05    # m: smallest rise of stage over which a break must show
NOISE_MULTIPLE = 3.0       # break rise = max(floor, 3 σ)
MIN_DEPTH_MULTIPLE = 2.0   # breaks sought at depths >= 2 × break rise
MIN_RUN_SAMPLES = 3        # a floodplain edge runs at least 3 sample steps (one is a noise dip)
MAX_STAGES = 4000          # trial stages per profile at most


def noise(p: Profiles) -> np.ndarray:
    """Robust elevation scatter σ (m) of each profile (t,):
    :func:`reachgauge.kernel.bed.noise`."""
    return bed.noise(p)


def profile_noise(section) -> float:
    """σ (m) of one :class:`~reachgauge.kernel.crosssection.CrossSection`: the
    one-row view of :func:`noise`."""
    return float(noise(section.profiles)[0])


@dataclass(frozen=True)
class Scales:
    """Scales and trial-stage layout of t profiles (arrays (t,)).

    noise σ, rise δ (m); lo, top (m): thalweg and lower end of the profile;
    step (m) between trial stages, count of them; lag: δ in steps; first: first
    stage index searched (depth ≥ 2δ); min_run (m): shortest run of a water edge
    that can be a floodplain (3 median sample steps); searched: the profile is
    deep enough (relief > 2δ) to hold a break at all.
    """

    noise: np.ndarray
    rise: np.ndarray
    lo: np.ndarray
    top: np.ndarray
    step: np.ndarray
    count: np.ndarray
    lag: np.ndarray
    first: np.ndarray
    min_run: np.ndarray
    searched: np.ndarray


def scales(p: Profiles, sigma=None, floor=None) -> Scales:
    """The :class:`Scales` of every profile of ``p`` (invalid ones are not searched).

    ``sigma`` (t,): the noise to use instead of the profile's own (a profile whose
    bed was replaced by a smooth synthetic one keeps the noise of its terrain);
    ``floor`` (t,): the lowest stage searched, if higher than thalweg + 2δ (the old
    water surface of a corrected profile + 2δ)."""
    sigma = noise(p) if sigma is None else np.asarray(sigma, dtype=float)
    rise = np.maximum(BREAK_RISE_FLOOR, NOISE_MULTIPLE * sigma)
    lo, top = p.thalweg, p.top
    relief = top - lo
    searched = p.valid & (relief > MIN_DEPTH_MULTIPLE * rise)
    # rows not searched get a harmless layout (one step, no stages)
    relief = np.where(searched, relief, 1.0)
    step = np.minimum(rise / 5.0, relief / 200.0)
    step = np.maximum(step, (relief + 2 * rise) / MAX_STAGES)
    count = np.where(searched, np.ceil((relief + 2 * rise) / step).astype(np.int64) + 1, 0)
    lag = np.maximum(1, np.rint(rise / step).astype(np.int64))
    start = MIN_DEPTH_MULTIPLE * rise
    if floor is not None:
        start = np.maximum(start, np.nan_to_num(np.asarray(floor, dtype=float) - lo, nan=0.0))
    first = np.ceil(start / step).astype(np.int64)
    dx = np.diff(p.x, axis=1)
    ok = np.arange(dx.shape[1])[None, :] < (p.size - 1)[:, None]
    min_run = MIN_RUN_SAMPLES * R.median(dx, ok)
    return Scales(sigma, rise, lo, top, step, count, lag, first, min_run, searched)


def blocks(count, rows, cells: int | None = None):
    """Split ``rows`` into blocks of rows whose (rows × largest count) stays within
    ``cells`` (default :data:`~reachgauge.hydraulics.bankfull.rows.CHUNK_CELLS`),
    rows of similar count together (sorted by count, so a block wastes little on
    padding). Yields arrays of row indices."""
    cells = R.CHUNK_CELLS if cells is None else cells
    rows = np.asarray(rows)
    order = rows[np.argsort(count[rows], kind="stable")]
    c = count[order]
    i = 0
    while i < order.size:
        # sorted ascending: a block's largest count is its last
        ahead = c[i:i + cells]                  # a block holds at most `cells` rows
        size = np.arange(1, ahead.size + 1) * np.maximum(ahead, 1)
        j = i + max(1, int(np.searchsorted(size, cells, side="right")))
        yield order[i:j]
        i = j


def stage_grid(sc: Scales, rows) -> np.ndarray:
    """Trial stages of ``rows`` as one (rows, K) array, K their largest count:
    stage k of row i is lo_i + step_i · k (valid for k < count_i; the stages past a
    row's count continue the same steps and are not searched)."""
    k = np.arange(int(sc.count[rows].max(initial=1)))
    return sc.lo[rows, None] + sc.step[rows, None] * k[None, :]
