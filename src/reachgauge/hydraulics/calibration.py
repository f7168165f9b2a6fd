"""Back-calculating Manning's n where a discharge was measured.

An observation (reach, chainage or point, stage or depth, discharge) is matched
to the nearest transect of its reach. With the overbank n held at its value,
the channel n that makes the divided-channel Manning discharge equal the
measured one has a closed form (Manning's equation solved for n, Chow 1959,
Eq. 5-6, applied to the channel subsection of the divided-channel method,
Chow 1959, §6-9)::

    n_ch = A_ch R_ch^(2/3) S^(1/2) / (Q - S^(1/2) (K_left + K_right))

For an in-bank flow the overbank conveyances are zero and this is the plain
inverse of Manning's equation. The calibrated n of a reach is the median of its
observations' n.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from reachgauge import manning
from reachgauge.kernel import sections as K


def match_transects(obs: pd.DataFrame, chainage: np.ndarray, lines=None) -> np.ndarray:
    """Index of the transect nearest each observation: by chainage where given,
    else by distance from the point (x, y) to the transect ``lines``."""
    idx = np.full(len(obs), -1)
    ch = obs["chainage"].to_numpy(float)
    has = np.isfinite(ch)
    if has.any() and len(chainage):
        idx[has] = np.abs(chainage[None, :] - ch[has, None]).argmin(axis=1)
    if (~has).any() and lines is not None and len(lines):
        import shapely

        pts = shapely.points(obs.loc[~has, "x"].to_numpy(float), obs.loc[~has, "y"].to_numpy(float))
        d = shapely.distance(pts[:, None], np.asarray(lines, dtype=object)[None, :])
        idx[~has] = d.argmin(axis=1)
    return idx


def back_calculate(p: K.Profiles, index: np.ndarray, stage: np.ndarray, discharge: np.ndarray,
                   slope: np.ndarray, n_overbank: np.ndarray, banks: np.ndarray) -> np.ndarray:
    """Channel n at each observation (NaN where the overbanks alone carry the
    measured discharge, the stage is dry, or no transect matched).

    ``index`` (k,) selects the transect of each observation, ``stage`` and
    ``discharge`` (k,) are the measurements (m, m³/s); ``slope`` (t,),
    ``n_overbank`` (t, 2: left, right) and ``banks`` (t, 2) are per transect.
    """
    index = np.asarray(index, dtype=int)
    out = np.full(index.size, np.nan)
    use = (index >= 0)
    use[use] &= p.valid[index[use]]
    if not use.any():
        return out
    rows = index[use]
    sub = p.take(rows)
    pt = K.parts(sub, K.wet(sub, np.asarray(stage, dtype=float)[use]), np.asarray(banks)[rows])
    area = pt.area[:, :, 0]
    r = pt.hydraulic_radius[:, :, 0]
    sq = np.sqrt(np.asarray(slope, dtype=float)[rows])
    nob = np.asarray(n_overbank, dtype=float)[rows]
    k_over = (manning.conveyance(area[0], r[0], nob[:, 0])
              + manning.conveyance(area[2], r[2], nob[:, 1]))
    rest = np.asarray(discharge, dtype=float)[use] - sq * k_over
    a_ch, r_ch = area[1], r[1]
    ok = (a_ch > 0) & (rest > 0)
    with np.errstate(divide="ignore", invalid="ignore"):
        n = np.where(ok, a_ch * np.power(r_ch, 2.0 / 3.0) * sq / np.where(ok, rest, 1.0), np.nan)
    out[use] = n
    return out
