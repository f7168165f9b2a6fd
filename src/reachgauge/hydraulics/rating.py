"""Rating curves and figures at the stages a user asks for, for every transect of a
reach in one kernel call each (whole-section basis: area, perimeter and width of
all the connected water; discharge by the divided-channel method, Chow 1959, §6-9;
see :mod:`reachgauge.hydraulics.figures`)."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from reachgauge.hydraulics.figures import FIGURES, whole_section
from reachgauge.kernel import sections as K
from reachgauge.results import schema


@dataclass(frozen=True)
class RatingParams:
    """Depth step and top of the rating curves, and the user's stages (m).

    max_depth None: twice the reach's median bankfull depth. depths: depths above
    each transect's thalweg; elevations: water-surface elevations.
    """

    step: float = 0.1
    max_depth: float | None = None
    depths: tuple = ()
    elevations: tuple = ()


def rating_depths(params: RatingParams, median_bankfull_depth: float) -> np.ndarray:
    """Depths (m) of the rating curves: 0, step, ... up to the top depth."""
    med = median_bankfull_depth if np.isfinite(median_bankfull_depth) else 1.0
    top = params.max_depth or max(2.0 * med, params.step)
    return np.arange(0.0, top + 0.5 * params.step, params.step)


def figure_table(p: K.Profiles, rid: str, chainage, stages, slope, n, banks, ok,
                 columns=FIGURES) -> pd.DataFrame:
    """One row per (valid transect, stage) of ``stages`` (t, k): ``columns`` of the
    whole-section figures, with reach_id, station and chainage first."""
    rows = np.nonzero(ok)[0]
    if rows.size == 0:
        return pd.DataFrame(columns=["reach_id", "station", "chainage", *columns])
    sub = p.take(rows)
    got = whole_section(sub, stages[rows], slope[rows], n[rows], banks[rows])
    k = stages.shape[1]
    table = {"reach_id": rid, "station": np.repeat(rows, k),
             "chainage": np.repeat(np.asarray(chainage, float)[rows], k)}
    table.update({c: got[c].ravel() for c in columns})
    return pd.DataFrame(table)


def rating_table(p: K.Profiles, rid: str, chainage, depths, slope, n, banks, ok) -> pd.DataFrame:
    """Rating curves of every valid transect at ``depths`` above its thalweg, plus
    the reach's median curve (station -1: the median of each figure over the
    transects at each depth, staged on the median thalweg)."""
    cols = [c for c in schema.RATING_FIELDS if c not in ("reach_id", "station", "chainage",
                                                         "discharge_p10", "discharge_p90")]
    stages = p.thalweg[:, None] + np.asarray(depths)[None, :]
    table = figure_table(p, rid, chainage, stages, slope, n, banks, ok, cols)
    if not ok.any():
        return table
    med = table.groupby("depth", sort=True).median(numeric_only=True).reset_index()
    med["reach_id"], med["station"], med["chainage"] = rid, -1, np.nan
    med["stage"] = float(np.median(p.thalweg[ok])) + med["depth"]
    med["spills"] = False
    return pd.concat([table, med[table.columns]], ignore_index=True)


def stage_table(p: K.Profiles, rid: str, chainage, params: RatingParams, slope, n, banks, ok
                ) -> pd.DataFrame:
    """Figures at the user's depths and elevations, one row per (transect, request)."""
    requests = [(f"depth {d:g}", p.thalweg + d) for d in params.depths]
    requests += [(f"elevation {e:g}", np.full(p.count, float(e))) for e in params.elevations]
    cols = [c for c in schema.STAGE_FIELDS if c not in ("reach_id", "station", "chainage",
                                                        "request")]
    if not requests:
        return pd.DataFrame(columns=list(schema.STAGE_FIELDS))
    st = np.stack([r[1] for r in requests], axis=1)
    table = figure_table(p, rid, chainage, st, slope, n, banks, ok, cols)
    table.insert(3, "request", np.tile([r[0] for r in requests], int(ok.sum())))
    return table
