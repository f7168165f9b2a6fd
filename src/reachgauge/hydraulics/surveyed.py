"""One surveyed or gauged cross-section: its figures at a stage, Manning's n
back-calculated from a measured discharge, and a rating table.

The Python face of ``reachgauge section``: the command only reads the CSV, calls
:func:`analyse_section` / :func:`rating`, and prints. One conveyance model serves
both the figures and the back-calculated n: the divided-channel method when the
section has banks (Chow, V. T., 1959, *Open-Channel Hydraulics*, §6-9), the whole
section as one otherwise, so a back-calculated n reproduces the measured discharge.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from reachgauge import manning
from reachgauge.errors import InputError
from reachgauge.hydraulics import roughness
from reachgauge.hydraulics.figures import figures
from reachgauge.hydraulics.plausibility import section_doubts
from reachgauge.kernel.crosssection import CrossSection
from reachgauge.config import MAX_RATING_STAGES

PART_NAMES = ("left overbank", "channel", "right overbank")


@dataclass(frozen=True)
class SectionAnalysis:
    """Figures of one section at one stage.

    figures: one row of :data:`reachgauge.hydraulics.figures.FIGURES` (whole
    section); n: the n used (one value, or the (left, channel, right) triple);
    n_back: n back-calculated from ``discharge`` (NaN when n was given); parts:
    per subsection (name, area, wetted perimeter, n, discharge) when the section
    has banks; table_rows: rows of Chow's (1959) Table 5-6 whose range holds n_back;
    doubts: (names of figures, warning) for figures outside what natural channels
    show (:func:`reachgauge.hydraulics.plausibility.section_doubts`).
    """

    figures: pd.Series
    n: object
    n_back: float
    parts: list
    table_rows: list
    doubts: list


def analyse_section(cs: CrossSection, stage: float, slope: float, *, n=None, discharge=None,
                    units: str = "si") -> SectionAnalysis:
    """Figures of ``cs`` at ``stage`` with Manning's ``n`` (one, or three with
    banks), or, given a measured ``discharge`` instead, with the n that makes the
    section carry it: n = k A R^(2/3) S^(1/2) / Q summed over the subsections
    (Manning's equation solved for one n, Chow 1959, Eq. 5-6)."""
    manning.check_slope(slope)
    if (n is None) == (discharge is None):
        raise InputError("give either Manning's n or a measured discharge",
                         "use --n N, or --discharge Q to back-calculate n")
    if stage <= cs.thalweg:
        raise InputError(f"stage {stage:g} is not above the thalweg ({cs.thalweg:g})",
                         "give a water surface above the lowest point of the profile")
    n_back = float("nan")
    if discharge is not None:
        q = float(manning.check_discharge(discharge))
        if q == 0:
            raise InputError("a discharge of 0 gives no Manning's n",
                             "give the measured discharge, greater than 0")
        # conveyance with n = 1 is k Σ A_i R_i^(2/3): the same model as the figures
        n_back = float(cs.conveyance(stage, 1.0, units)) * np.sqrt(slope) / q
        n = n_back
    fig = figures(cs, stage, slope, n, units).iloc[0]
    parts = []
    if cs.banks is not None:
        fl = cs.flow(stage, slope, n, units)
        n3 = np.broadcast_to(np.asarray(n, dtype=float), (3,))
        for i, name in enumerate(PART_NAMES):
            parts.append((name, float(fl.parts.area[i].item()),
                          float(fl.parts.wetted_perimeter[i].item()), float(n3[i]),
                          float(fl.part_discharge[i].item())))
    rows = roughness.table_matches(n_back, kind="channel") if np.isfinite(n_back) else []
    n_list = list(np.atleast_1d(np.asarray(n, dtype=float)))
    doubts = section_doubts(slope, n_list if len(n_list) > 1 else n_list[0],
                            float(fig.velocity), float(fig.froude), units,
                            back_calculated=discharge is not None)
    return SectionAnalysis(fig, n, n_back, parts, rows, doubts)


def rating(cs: CrossSection, slope: float, n, *, units: str = "si", step=None,
           max_depth=None) -> pd.DataFrame:
    """Rating table of ``cs``: every figure at depths 0, step, ... max_depth above
    the thalweg (defaults: the depth of the profile's lower end, in 50 steps)."""
    top_depth = cs.top - cs.thalweg
    max_depth = top_depth if max_depth is None else max_depth
    step = top_depth / 50 if step is None else step
    if not (step > 0 and max_depth > 0):
        raise InputError("the rating step and deepest depth must be greater than 0",
                         "give positive depths")
    if max_depth / step > MAX_RATING_STAGES:
        raise InputError(f"--rating-step {step:g} up to depth {max_depth:g} makes "
                         f"{max_depth / step:.0f} rows, more than {MAX_RATING_STAGES}",
                         f"give --rating-step {max_depth / MAX_RATING_STAGES:.3g} or more")
    depths = np.arange(0.0, max_depth + step * 1e-9, step)
    return figures(cs, cs.thalweg + depths, slope, n, units)
