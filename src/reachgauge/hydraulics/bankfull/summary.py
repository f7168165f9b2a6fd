"""Robust summary of a reach's bankfull depths, with outliers flagged."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from reachgauge.errors import InputError
from reachgauge.hydraulics.bankfull import rows as R


@dataclass(frozen=True)
class ReachBankfull:
    """Robust summary of a reach's transect bankfull depths (m).

    median_depth; spread: the normal-scaled median absolute deviation, 1.4826 × MAD
    (a robust standard deviation); iqr: the interquartile range; count: number of
    finite depths; outliers: bool mask over the input, True where a depth lies more
    than ``threshold`` spreads from the median; median_stage: median of the stages
    if given, else NaN.
    """

    median_depth: float
    spread: float
    iqr: float
    count: int
    outliers: np.ndarray
    median_stage: float
    threshold: float


def summarise_reach(depths, stages=None, *, threshold=3.0, min_spread=0.01) -> ReachBankfull:
    """Median and spread of a reach's bankfull depths (m), with outliers flagged.

    ``depths``: 1-D array, one per transect; NaN (no pick) is left out of every figure
    and is never an outlier. ``stages``: optional array of the same length, summarised
    by its median. Spread is the normal-scaled MAD (1.4826 × median |d − median|); a
    depth is an outlier when |d − median| > threshold × max(spread, min_spread). The
    3-MAD rule is the "very conservative" threshold of Leys, C. et al., 2013,
    "Detecting outliers: do not use standard deviation around the mean, use absolute
    deviation around the median", J. Exp. Social Psychology 49 [memory]; min_spread
    (m) keeps a reach of near-identical transects from flagging a centimetre.
    """
    d = np.asarray(depths, dtype=float)
    if d.ndim != 1:
        raise InputError(f"depths must be a 1-D array, got {d.ndim} dimensions",
                         "give one bankfull depth per transect")
    if not (threshold > 0) or not (min_spread >= 0):
        raise InputError("threshold must be > 0 and min_spread >= 0",
                         "give the outlier threshold in spreads (e.g. 3)")
    ok = np.isfinite(d)
    median_stage = float("nan")
    if stages is not None:
        s = np.asarray(stages, dtype=float)
        if s.shape != d.shape:
            raise InputError(f"stages ({s.shape}) and depths ({d.shape}) differ in shape",
                             "give one stage per depth")
        if np.isfinite(s).any():
            median_stage = float(np.nanmedian(s))
    if not ok.any():
        return ReachBankfull(float("nan"), float("nan"), float("nan"), 0,
                             np.zeros(d.shape, dtype=bool), median_stage, threshold)
    v = d[ok]
    med = float(np.median(v))
    spread = float(R.mad(v[None, :], np.ones((1, v.size), bool))[0])
    q1, q3 = np.percentile(v, [25, 75])
    outliers = np.zeros(d.shape, dtype=bool)
    outliers[ok] = np.abs(v - med) > threshold * max(spread, min_spread)
    return ReachBankfull(med, spread, float(q3 - q1), int(v.size), outliers, median_stage,
                         threshold)
