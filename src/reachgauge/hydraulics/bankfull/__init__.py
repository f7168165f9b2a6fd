"""Bankfull stage picked from the cross-sections of a reach, how sure each pick is,
and the baseflow correction for the channel that lidar cannot see.

A DEM section has no surveyor to point at the banks, so every automatic method reads
the section's shape from its geometry at an array of trial stages (thalweg up to the
lower end of the profile, plus a little beyond). The trial curves of all transects
of a reach come from one call of the section kernel (per block of transects of
bounded size), and every method is an array operation over (transects, stages):

``bank-top``
    The lower of the two bank tops. Walking out from the thalweg, a bank top is the
    break of slope where the ground stops rising steeply and flattens into a
    floodplain: the stage at which the water's edges, within a small rise of stage,
    suddenly run out across ground wider than half the channel (the edges are the
    running maxima of the ground outward from the thalweg, so they run far only where
    a bank has flattened). The first such stage, on either bank, is the lower bank
    top: the stage at which the section first spills onto a floodplain. Bankfull as
    the stage of the active floodplain is common practice; the review of field and
    section criteria is Williams, G. P., 1978, "Bank-full discharge of rivers", Water
    Resources Research 14(6) [memory]. The rule itself is ours, chosen by
    benchmarks/bankfull_methods.py.
``min-width-depth``
    The stage of the first marked minimum of the width-to-depth ratio W/D, W the top
    width and D the mean depth A/W (Wolman, M. G., 1955, "The natural channel of
    Brandywine Creek, Pennsylvania", USGS Professional Paper 271 [memory]).
``bench``
    The first marked peak of the bench index, the rate of top-width increase with
    stage, dW/dh over a fixed stage step (Riley, S. J., 1972, "A comparison of
    morphometric measures of bankfull", Journal of Hydrology 17 [memory]).
``max-hydraulic-depth``
    The stage of the first marked maximum of hydraulic depth A/W against stage
    (Garber et al., 2024–25, "Artificial intelligence and objective-function methods
    can identify bankfull river channel extents", AGU journal; local maxima of
    hydraulic depth against flow height: De Rosa, P., Fredduzzi, A. & Cencetti, C.,
    2019, ISPRS International Journal of Geo-Information 8:480).
``fixed-depth``
    A depth above the thalweg given by the user.
``regional``
    A depth from a regional power-law curve of drainage area, depth = a·DA^b, with
    the user's coefficients (e.g. Bieger, K. et al., 2015, JAWRA; Bent, G. C. &
    Waite, A. M., 2013, USGS SIR 2013-5155).

All lengths are metres, elevations metres, areas m² (drainage areas km²). The scales
of the shape tests (noise σ, break rise δ) are in :mod:`.scales`; confidence compares
the automatic methods (:func:`pick_bankfull`), and is "none" where the chosen method
finds no break: its fallback stage is no bankfull figure (the reach-scale tests of the
picks are in :mod:`reachgauge.hydraulics.trust`). Lidar does not see through water
(Smart, Bind & Duncan, 2009, MODSIM): :func:`baseflow_correct` adds the unseen
channel back under a flat water surface, and the pick flags a suspiciously flat
thalweg.

Modules: :mod:`.scales` (noise, break rise, trial stages), :mod:`.peaks` (row-wise
local maxima and prominence), :mod:`.methods` (the four automatic methods),
:mod:`.banks` (bank tops at the picked stage, to a fraction of a sample step),
:mod:`.pick` (picks, fallbacks, confidence, flags), :mod:`.baseflow` (flat thalweg,
baseflow correction), :mod:`.regional` (regional curves), :mod:`.summary` (reach
summary), :mod:`.rows` (row-wise medians and interpolation).
"""

from reachgauge.hydraulics.bankfull.baseflow import (FLAT_TOLERANCE, baseflow_correct,
                                                     correct_profiles, flat_thalweg_width,
                                                     is_flat_thalweg)
from reachgauge.hydraulics.bankfull.methods import (AUTOMATIC_METHODS, BENCH_RATIO,
                                                    HYDRAULIC_DEPTH_PROMINENCE, SPREAD_FRACTION,
                                                    WIDTH_DEPTH_PROMINENCE, candidate_stages,
                                                    candidates)
from reachgauge.hydraulics.bankfull.peaks import PLATEAU_FRACTION
from reachgauge.hydraulics.bankfull.pick import (DEFAULT_METHOD, TOLERANCE_FLOOR,
                                                 TOLERANCE_FRACTION, TRUSTED_CONFIDENCE,
                                                 USER_METHODS, BankfullParams, BankfullPick, Picks,
                                                 pick_all, pick_bankfull)
from reachgauge.hydraulics.bankfull.regional import (SQ_MILE_KM2, regional_coef_to_si,
                                                     regional_depth)
from reachgauge.hydraulics.bankfull.scales import (BREAK_RISE_FLOOR, MAX_STAGES,
                                                   MIN_DEPTH_MULTIPLE, MIN_RUN_SAMPLES,
                                                   NOISE_MULTIPLE, profile_noise)
from reachgauge.hydraulics.bankfull.summary import ReachBankfull, summarise_reach

__all__ = [
    "AUTOMATIC_METHODS", "BENCH_RATIO", "BREAK_RISE_FLOOR", "DEFAULT_METHOD", "FLAT_TOLERANCE",
    "HYDRAULIC_DEPTH_PROMINENCE", "MAX_STAGES", "MIN_DEPTH_MULTIPLE", "MIN_RUN_SAMPLES",
    "NOISE_MULTIPLE", "PLATEAU_FRACTION", "SPREAD_FRACTION", "SQ_MILE_KM2", "TOLERANCE_FLOOR",
    "TOLERANCE_FRACTION", "TRUSTED_CONFIDENCE", "USER_METHODS", "WIDTH_DEPTH_PROMINENCE",
    "BankfullParams", "BankfullPick", "Picks", "ReachBankfull", "baseflow_correct", "candidate_stages",
    "candidates", "correct_profiles", "flat_thalweg_width", "is_flat_thalweg", "pick_all",
    "pick_bankfull", "profile_noise", "regional_coef_to_si", "regional_depth", "summarise_reach",
]
