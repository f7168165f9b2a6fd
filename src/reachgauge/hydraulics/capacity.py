"""Design flows against channel capacity.

For each design discharge and every transect of a reach: the normal-depth
stage (Manning, uniform flow; Chow 1959, §6-2), its depth, the freeboard to
the bankfull stage (bankfull stage minus design stage: negative when the flow
is out of bank), the ratio of design to bankfull discharge, and a flag where
the flow leaves the channel. All transects of a reach are solved at once
(:meth:`reachgauge.profiles.ProfileSet.stage_for_discharge`).

Per reach, a flow "leaves the channel" when it exceeds the reach's median
bankfull discharge (ratio > 1); the share of transects out of bank is given
beside it so a reader sees whether that is local or general.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from reachgauge.kernel.profiles import ProfileSet


def check_flows(ps: ProfileSet, flows: dict[str, float], slope, n, banks,
                bankfull_stage, bankfull_q) -> pd.DataFrame:
    """One row per (flow, transect): ``flow``, ``discharge`` (m³/s), ``stage``,
    ``depth``, ``freeboard`` (m), ``q_ratio``, ``out_of_bank`` (bool),
    ``over_profile`` (bool: the water overtops an end of the transect; its
    stage counts only the water inside the transect, an upper bound where the
    plain continues, and NaN if even three times the profile's depth cannot
    carry the flow)."""
    rows = []
    bf_stage = np.asarray(bankfull_stage, dtype=float)
    bf_q = np.asarray(bankfull_q, dtype=float)
    grid = ps.discharge_grid(slope, n, banks) if flows else None
    for name, q in flows.items():
        stage, reached = ps.stage_for_discharge(q, slope, n, banks, grid=grid)
        with np.errstate(divide="ignore", invalid="ignore"):
            ratio = np.where(bf_q > 0, q / np.where(bf_q > 0, bf_q, 1.0), np.nan)
        freeboard = bf_stage - stage
        rows.append(pd.DataFrame({
            "flow": name,
            "discharge": float(q),
            "stage": stage,
            "depth": stage - ps.thalweg,
            "freeboard": freeboard,
            "q_ratio": ratio,
            # a stage a hair above bankfull from round-off is not out of bank
            "out_of_bank": (~reached) | (freeboard < -1e-6),
            # over the transect's ends: the stage counts only the water inside the
            # transect, an upper bound if the plain goes on (or unknown if not reached)
            "over_profile": (~reached) | (stage > ps.top + 1e-9),
            "index": np.arange(ps.count),
        }))
    if not rows:
        return pd.DataFrame(columns=["flow", "discharge", "stage", "depth", "freeboard", "q_ratio",
                                     "out_of_bank", "over_profile", "index"])
    return pd.concat(rows, ignore_index=True)


def summarise_flows(checks: pd.DataFrame, bankfull_q_median: float, ok: np.ndarray) -> pd.DataFrame:
    """Per reach and flow: ``q_ratio`` to the median bankfull discharge,
    ``share_out`` (fraction of valid transects out of bank), ``out_of_bank``."""
    out = []
    for name, grp in checks.groupby("flow", sort=False):
        valid = grp[ok[grp["index"].to_numpy()]]
        q = float(grp["discharge"].iloc[0])
        ratio = q / bankfull_q_median if bankfull_q_median > 0 else np.nan
        share = float(valid["out_of_bank"].mean()) if len(valid) else np.nan
        out.append({"flow": name, "discharge": q, "q_ratio": ratio, "share_out": share,
                    "out_of_bank": bool(np.isfinite(ratio) and ratio > 1.0)})
    return pd.DataFrame(out, columns=["flow", "discharge", "q_ratio", "share_out", "out_of_bank"])
