"""Design flows against channel capacity.

For each design discharge and every transect of a reach: the normal-depth stage
(Manning, steady uniform flow; Chow 1959, §6-2), its depth, the freeboard to the
bankfull stage (bankfull stage minus design stage: negative when the flow is out of
bank), the ratio of design to bankfull discharge, and a flag where the flow leaves
the channel. All transects and all flows of a reach are solved in one call of
:func:`reachgauge.kernel.solver.normal_stage` with the ``"walled"`` policy: a flow
that overtops a transect's end gets a stage counting only the water inside the
transect, an upper bound where the plain goes on, marked ``over_profile``.

Per reach, a flow "leaves the channel" when it exceeds the reach's median bankfull
discharge (ratio > 1); the share of transects out of bank is given beside it so a
reader sees whether that is local or general.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from reachgauge.kernel import sections as K
from reachgauge.kernel.solver import normal_stage

CHECK_COLUMNS = ["flow", "discharge", "stage", "depth", "freeboard", "q_ratio", "out_of_bank",
                 "over_profile", "stage_at_jump", "index"]


def check_flows(p: K.Profiles, flows: dict[str, float], slope, n, banks,
                bankfull_stage, bankfull_q) -> pd.DataFrame:
    """One row per (flow, transect): ``flow``, ``discharge`` (m³/s), ``stage``,
    ``depth``, ``freeboard`` (m), ``q_ratio``, ``out_of_bank`` (bool),
    ``over_profile`` (bool: the water overtops an end of the transect; its stage
    counts only the water inside the transect, an upper bound where the plain
    continues, and NaN if even three times the profile's depth cannot carry the
    flow), ``stage_at_jump`` (bool: the flow is carried only once water tops a bank
    into lower ground behind it; the stage is that bank's elevation, where the
    section's discharge jumps past the flow), ``index`` (transect)."""
    if not flows:
        return pd.DataFrame(columns=CHECK_COLUMNS)
    names = list(flows)
    q = np.array([float(flows[k]) for k in names])
    t = p.count
    sol = normal_stage(p, np.broadcast_to(q, (t, q.size)), slope, n, banks, above="walled")
    bf_stage = np.asarray(bankfull_stage, dtype=float)[:, None]
    bf_q = np.asarray(bankfull_q, dtype=float)[:, None]
    freeboard = bf_stage - sol.stage
    ratio = np.where(bf_q > 0, q[None, :] / np.where(bf_q > 0, bf_q, 1.0), np.nan)
    # a stage a hair above bankfull from round-off is not out of bank
    out = (~sol.reached) | (freeboard < -1e-6)
    over = (~sol.reached) | sol.over_profile
    f = q.size
    return pd.DataFrame({
        "flow": np.repeat(np.array(names, dtype=object), t),
        "discharge": np.repeat(q, t),
        "stage": sol.stage.T.ravel(),
        "depth": (sol.stage - p.thalweg[:, None]).T.ravel(),
        "freeboard": freeboard.T.ravel(),
        "q_ratio": np.broadcast_to(ratio, (t, f)).T.ravel(),
        "out_of_bank": out.T.ravel(),
        "over_profile": over.T.ravel(),
        "stage_at_jump": sol.at_jump.T.ravel(),
        "index": np.tile(np.arange(t), f),
    })


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


def least_freeboard(checks: pd.DataFrame, t: int) -> np.ndarray:
    """Least freeboard over the flows at each of ``t`` transects (m); NaN where a
    flow has no stage (not carried even far above the transect) or there is no flow."""
    idx = checks["index"].to_numpy(int)
    fb = checks["freeboard"].to_numpy(float)
    least = np.full(t, np.inf)
    np.minimum.at(least, idx, np.where(np.isfinite(fb), fb, -np.inf))
    return np.where(np.isfinite(least), least, np.nan)
