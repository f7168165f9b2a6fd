"""Longitudinal profile and slope of a reach.

The profile is the thalweg elevation (or, for hydro-flattened terrain, the water
level) against chainage from the upstream end. Two steps:

*Carving.* Road embankments, culverts and bridges stand in a terrain profile
as humps the water in fact passes through. :func:`carve` makes the profile
monotone non-increasing downstream by *breaching* each hump: a running minimum
from upstream finds the points that stand above all upstream ground; each run
of such points is replaced by the straight grade between the last point before
it and the first point after it that is no higher than that level (the point
the water reaches again). Ground is only ever lowered, so real bed away from a
hump is untouched; a hump that runs to the end of the reach is held level.
(Breaching rather than filling is the usual preference for culvert crossings
in terrain conditioning, e.g. Lindsay, J. B., 2016, "Efficient hybrid
breaching-filling sink removal methods for flow path enforcement in digital
elevation models", Hydrological Processes 30(6) [memory].)

*Fitting.* Slope at each station is the Theil–Sen estimate (the median of the
slopes between all pairs of points; Theil, H., 1950, "A rank-invariant method
of linear and polynomial regression analysis", Proc. KNAW 53; Sen, P. K., 1968,
"Estimates of the regression coefficient based on Kendall's tau", JASA 63)
over the stations within ``window / 2`` of it; the reach slope is the Theil–Sen
estimate over the whole reach. A robust fit lets a few bad thalweg picks pass
without bending the line. Slopes are returned positive (a drop downstream),
dimensionless, and never below the floor ``min_slope``; stations whose fit fell
below it are flagged.

Chainage is measured along the digitised line, as the stations are; a jagged
line is a little longer than the channel it follows (a 1 m wobble every 10 m adds
about 1 %), which makes the slope that much lower.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass

import numpy as np
from scipy import stats

# A station counts as carved when carving lowered it by more than this (m):
# about the size of lidar noise on open ground, so noise alone is not flagged.
CARVE_TOLERANCE = 0.05

# Pairs evaluated at once by the windowed Theil–Sen fit (bounds memory).
_BLOCK_PAIRS = 1_000_000


def carve(chainage, z, tol=CARVE_TOLERANCE):
    """Breach humps out of a profile (see the module docstring).

    ``chainage`` (t,) m increasing downstream, ``z`` (t,) m (NaN allowed: such
    points are skipped and stay NaN). Returns ``(z_carved, carved)`` where
    ``carved`` marks points lowered by more than ``tol``.
    """
    c = np.asarray(chainage, dtype=float)
    z = np.asarray(z, dtype=float)
    out = z.copy()
    ok = np.isfinite(z)
    if ok.sum() >= 2:
        cv, zv = c[ok], z[ok]
        running = np.minimum.accumulate(zv)
        anchor = zv <= running  # points no higher than anything upstream
        # Between anchors the grade is straight; beyond the last anchor np.interp
        # holds its value (a hump running to the end is kept level).
        out[ok] = np.where(anchor, zv, np.interp(cv, cv[anchor], zv[anchor]))
    carved = ok & ((z - out) > tol)
    return out, carved


def theil_sen_windows(chainage, z, window):
    """Theil–Sen slope dz/dchainage at each point over the points within
    ``window / 2`` of it (signed: negative where z falls downstream).

    Vectorised over points: each point's window is a slice of the sorted
    chainage, all pairwise slopes of all windows are one 3-D array (in blocks).
    NaN where a window holds fewer than two valid points.
    """
    c = np.asarray(chainage, dtype=float)
    z = np.asarray(z, dtype=float)
    t = c.size
    out = np.full(t, np.nan)
    if t == 0:
        return out
    lo = np.searchsorted(c, c - window / 2, side="left")
    hi = np.searchsorted(c, c + window / 2, side="right")
    w = int((hi - lo).max())
    pair = np.triu(np.ones((w, w), dtype=bool), k=1)
    block = max(1, _BLOCK_PAIRS // max(1, w * w))
    for s in range(0, t, block):
        sl = slice(s, min(s + block, t))
        idx = lo[sl, None] + np.arange(w)[None, :]
        inwin = idx < hi[sl, None]
        idx = np.minimum(idx, t - 1)
        cc = c[idx]
        zz = np.where(inwin, z[idx], np.nan)
        dc = cc[:, None, :] - cc[:, :, None]
        dz = zz[:, None, :] - zz[:, :, None]
        good = pair[None] & (dc > 0) & np.isfinite(dz)
        with np.errstate(divide="ignore", invalid="ignore"):
            slopes = np.where(good, dz / np.where(dc > 0, dc, 1.0), np.nan)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)  # empty windows stay NaN
            out[sl] = np.nanmedian(slopes.reshape(slopes.shape[0], -1), axis=1)
    return out


def reach_fit(chainage, z) -> float:
    """Theil–Sen slope dz/dchainage over the whole reach
    (:func:`scipy.stats.theilslopes`); NaN with fewer than two valid points."""
    c = np.asarray(chainage, dtype=float)
    z = np.asarray(z, dtype=float)
    ok = np.isfinite(z) & np.isfinite(c)
    if ok.sum() < 2 or np.ptp(c[ok]) == 0:
        return float("nan")
    return float(stats.theilslopes(z[ok], c[ok]).slope)


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
