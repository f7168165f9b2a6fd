"""Bankfull stage picked from one cross-section, how sure the pick is, and the
baseflow correction for the channel that lidar cannot see.

A DEM section has no surveyor to point at the banks, so every automatic method reads
the section's shape from its geometry at one array of trial stages (thalweg up to
the lower end of the profile, plus a little beyond), all evaluated in one vectorised
call of :meth:`CrossSection.geometry`:

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

All lengths are metres, elevations metres, areas m² (drainage areas km²).

Scales of the shape tests (each from the profile, so noisy and clean DEMs are read
alike): the *noise* σ is a robust estimate of the elevation scatter about the local
ground line; the *break rise* δ = max(5 cm, 3σ) is the rise of stage over which a
break must show (below 3σ a noise spike on a bank can hold the water edge back);
breaks are sought only at depths of at least 2δ, because within a few σ of the
thalweg the water spreads over the (noisy or flat) bed itself, which every shape
criterion would otherwise take for a floodplain.

Confidence compares the automatic methods (see :func:`pick_bankfull`). Lidar does not
see through water (Smart, Bind & Duncan, 2009, MODSIM): :func:`baseflow_correct` adds
the unseen channel back under a flat water surface, and the pick flags a suspiciously
flat thalweg.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
from scipy.signal import find_peaks
from scipy.stats import median_abs_deviation

from reachgauge.config import BANKFULL_METHODS
from reachgauge.errors import InputError
from reachgauge.manning import FOOT
from reachgauge.kernel.crosssection import CrossSection

AUTOMATIC_METHODS = ("bank-top", "min-width-depth", "bench", "max-hydraulic-depth")
USER_METHODS = ("fixed-depth", "regional")
# Chosen by benchmarks/bankfull_methods.py (lowest error and no false breaks over the
# family of synthetic sections; the numbers are in that script's output).
DEFAULT_METHOD = "bank-top"

SQ_MILE_KM2 = (1609.344 / 1000.0) ** 2   # 1 mi = 1609.344 m exactly (international mile)

# --- scales of the shape tests (see the module docstring) ---------------------------
BREAK_RISE_FLOOR = 0.05    # m: smallest rise of stage over which a break must show
NOISE_MULTIPLE = 3.0       # break rise = max(floor, 3 σ)
MIN_DEPTH_MULTIPLE = 2.0   # breaks sought at depths >= 2 × break rise
# bank-top: within one break rise, the water's edges must run out by at least this fraction
# of the section's top width (a floodplain, not a narrow inset bench or a noise spike)
SPREAD_FRACTION = 0.5
MIN_RUN_SAMPLES = 3        # ... and by at least 3 sample steps (one step is one noise dip)
# bench: a peak of dW/dh is marked when it is this many times the channel's own median
# rate below it (a V's rate is constant, a floodplain's is many times the bank's)
BENCH_RATIO = 3.0
# min-width-depth / max-hydraulic-depth: a local extremum is marked when the curve
# moves away from it by at least this fraction of its value (peak prominence)
WIDTH_DEPTH_PROMINENCE = 0.25
HYDRAULIC_DEPTH_PROMINENCE = 0.10
# ... and its stage is the end of the plateau within this fraction of the extreme value
PLATEAU_FRACTION = 0.02
# agreement tolerance when none is given: max(0.1 m, 10 % of depth)
TOLERANCE_FLOOR = 0.1
TOLERANCE_FRACTION = 0.1
# trial stages: steps of a fifth of the break rise or finer (at least 200 over the
# profile's depth), but no more than this many stages
MAX_STAGES = 4000


@dataclass(frozen=True)
class BankfullPick:
    """The bankfull stage of one section and how sure the pick is.

    stage, depth (m): water-surface elevation and depth above the thalweg.
    method: the method asked for. left_bank, right_bank: offsets (m) of the water's
    edges at ``stage`` (for an automatic method, half a break rise below it, so that a
    stage in the middle of the spread onto a floodplain still gives the bank tops).
    confidence: "high" | "medium" | "low". flags: codes from
    :data:`reachgauge.flags.FLAGS`. candidates: stage (m, NaN where it found no break)
    of every automatic method. tolerance (m): the agreement tolerance used.
    fallback: "" when ``method`` gave the stage, "methods-median" when it found no
    break and the median of the other automatic methods was used, "profile-end" when
    no method found one and the lower end of the profile was used.
    noise, break_rise (m): the scales of the shape tests (module docstring).
    """

    stage: float
    depth: float
    method: str
    left_bank: float
    right_bank: float
    confidence: str
    flags: tuple
    candidates: dict = field(default_factory=dict)
    tolerance: float = float("nan")
    fallback: str = ""
    noise: float = float("nan")
    break_rise: float = float("nan")


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


# ---------------------------------------------------------------------- scales
def profile_noise(section: CrossSection) -> float:
    """Robust elevation scatter σ (m) of a profile about its local ground line.

    Each interior point is compared with the straight line through its two
    neighbours; for independent errors of standard deviation σ that residual has
    variance σ²(1 + w² + (1−w)²), w the point's fractional position between its
    neighbours. σ is the normal-scaled median absolute deviation of the normalised
    residuals (scipy.stats.median_abs_deviation), which ignores the few vertices where
    the true ground bends. 0 for a clean or hydro-flattened profile.
    """
    x, z = section.offset, section.elevation
    if x.size < 3:
        return 0.0
    w = (x[1:-1] - x[:-2]) / (x[2:] - x[:-2])
    r = z[1:-1] - (z[:-2] + w * (z[2:] - z[:-2]))
    r = r / np.sqrt(1.0 + w * w + (1.0 - w) ** 2)
    return float(median_abs_deviation(r, scale="normal"))


@dataclass(frozen=True)
class _Curves:
    stage: np.ndarray        # uniform trial stages, thalweg .. top + 2 break rises
    step: float
    lag: int                 # break rise in grid steps
    first: int               # first index searched (depth >= 2 δ)
    last: int                # last index searched (stage <= top + break rise)
    geo: object              # section.geometry(stage)
    noise: float
    rise: float
    min_run: float           # shortest run of a bank edge that can be a floodplain (m)


def _curves(section: CrossSection) -> _Curves | None:
    noise = profile_noise(section)
    rise = max(BREAK_RISE_FLOOR, NOISE_MULTIPLE * noise)
    lo, hi = section.thalweg, section.top
    relief = hi - lo
    if not relief > MIN_DEPTH_MULTIPLE * rise:
        return None
    step = min(rise / 5.0, relief / 200.0)
    step = max(step, (relief + 2 * rise) / MAX_STAGES)
    # Trial stages run one break rise past the lower profile end and are searched
    # up to it: a transect often ends on the floodplain itself, so the break (water
    # spreading over the plain) and the spill past the end coincide, and a method
    # must see the curve turn just beyond the end to find it.
    n = int(math.ceil((relief + 2 * rise) / step)) + 1
    stage = lo + step * np.arange(n)
    lag = max(1, int(round(rise / step)))
    first = int(math.ceil(MIN_DEPTH_MULTIPLE * rise / step))
    last = min(int(np.searchsorted(stage, hi + rise, side="right")) - 1, n - 1 - lag)
    if first > last:
        return None
    min_run = MIN_RUN_SAMPLES * float(np.median(np.diff(section.offset)))
    return _Curves(stage, step, lag, first, last, section.geometry(stage), noise, rise, min_run)


# -------------------------------------------------------------------- methods
def _bank_top(section: CrossSection, c: _Curves) -> float:
    """Lower of the two bank tops (see the module docstring), NaN if neither breaks.

    The water's edges are the running maxima of the ground walking out from the
    thalweg (section.py), so within one break rise δ an edge runs far only where its
    bank has flattened. A bank top is the first stage at which the edges, over the
    next δ, run out by at least SPREAD_FRACTION of the top width (and by at least
    MIN_RUN_SAMPLES sample steps): the first bank, of either side, to flatten into a
    surface wide on the channel's scale is the lower bank top. Within that window the
    break is the stage where the run is half done.
    """
    g = c.geo
    span = np.nan_to_num(g.right_edge - g.left_edge, nan=0.0)
    i = np.arange(c.first, c.last + 1)
    run = span[i + c.lag] - span[i]
    hit = np.nonzero(run >= np.maximum(SPREAD_FRACTION * g.top_width[i], c.min_run))[0]
    if hit.size == 0:
        return float("nan")
    j = int(i[hit[0]])
    win = span[j:j + c.lag + 1]
    m = j + int(np.argmax(win >= win[0] + 0.5 * (win[-1] - win[0])))
    # the run may end beyond the profile's lower end (the water spills there)
    return float(min(0.5 * (c.stage[max(m - 1, 0)] + c.stage[m]), section.top))


def _first_marked(values, first, last, min_prominence, maximum=True):
    """Index of the first marked local extremum of values[first:last+1], or None.

    Marked: its peak prominence (scipy.signal.find_peaks) is at least
    ``min_prominence`` × its own magnitude. Near such an extremum the curve can be
    nearly flat, where DEM noise alone decides which stage holds the extreme value;
    so the index returned is the last one, before the curve leaves it for good, whose
    value is within PLATEAU_FRACTION of the extreme: the end of the plateau, where
    the curve turns at the break.
    """
    seg = values[first:last + 1]
    if seg.size < 3:
        return None
    sign = 1.0 if maximum else -1.0
    peaks, props = find_peaks(sign * seg, prominence=0.0)
    if peaks.size == 0:
        return None
    mag = np.abs(seg[peaks])
    ok = props["prominences"] >= min_prominence * np.where(mag > 0, mag, np.inf)
    if not ok.any():
        return None
    k = int(peaks[ok][0])
    # "leaves for good": the prominence's far side, the first value past the
    # plateau margin; the plateau ends just before it
    margin = sign * seg[k] - PLATEAU_FRACTION * mag[ok][0]
    away = np.nonzero(sign * seg[k:] < margin)[0]
    end = k + (int(away[0]) - 1 if away.size else seg.size - 1 - k)
    return first + end


def _min_width_depth(c: _Curves) -> float:
    g = c.geo
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = np.where(g.area > 0, g.top_width ** 2 / g.area, np.inf)   # W / (A/W)
    k = _first_marked(ratio, c.first, c.last, WIDTH_DEPTH_PROMINENCE, maximum=False)
    return float(c.stage[k]) if k is not None else float("nan")


def _bench(c: _Curves) -> float:
    """First marked peak of Riley's bench index dW/dh, centred differences over one
    break rise, NaN if none."""
    g = c.geo
    half = max(1, c.lag // 2)
    n = c.stage.size
    index = np.zeros(n)
    index[half:n - half] = (g.top_width[2 * half:] - g.top_width[:n - 2 * half]) / (2 * half * c.step)
    first, last = max(c.first, half), min(c.last, n - half - 1)
    seg = index[first:last + 1]
    if seg.size < 3:
        return float("nan")
    peaks, _ = find_peaks(seg)
    if peaks.size == 0:
        return float("nan")
    # the channel's own rate: median of the index from the search start to one break
    # rise below each peak (one masked row per candidate peak)
    ends = np.maximum(peaks - c.lag, 1)
    below = np.arange(seg.size)[None, :] < ends[:, None]
    ref = np.nanmedian(np.where(below, seg[None, :], np.nan), axis=1)
    # and the width gained across the window must be a few samples, not one noise dip
    ok = (seg[peaks] >= BENCH_RATIO * np.maximum(ref, 1e-12)) & \
        (seg[peaks] * 2 * half * c.step >= c.min_run)
    return float(c.stage[first + peaks[ok][0]]) if ok.any() else float("nan")


def _max_hydraulic_depth(c: _Curves) -> float:
    k = _first_marked(c.geo.hydraulic_depth, c.first, c.last, HYDRAULIC_DEPTH_PROMINENCE)
    return float(c.stage[k]) if k is not None else float("nan")


def candidate_stages(section: CrossSection) -> dict:
    """Stage (m) picked by each automatic method, NaN where it found no clear break."""
    return _candidates(section, _curves(section))


def _candidates(section: CrossSection, c: _Curves | None) -> dict:
    if c is None:
        return {m: float("nan") for m in AUTOMATIC_METHODS}
    found = {
        "bank-top": _bank_top(section, c),
        "min-width-depth": _min_width_depth(c),
        "bench": _bench(c),
        "max-hydraulic-depth": _max_hydraulic_depth(c),
    }
    # a break seen just past the profile's lower end is the floodplain at that end
    return {k: (min(v, section.top) if np.isfinite(v) else v) for k, v in found.items()}


# ------------------------------------------------------------------ user methods
def regional_depth(drainage_area_km2, coef, exp):
    """Bankfull depth from a regional curve, depth = coef × DA^exp (vectorised).

    ``drainage_area_km2``: scalar or array of drainage areas (km², > 0); ``coef`` (m per
    km²^exp, > 0) and ``exp`` are the curve's coefficients, in metres and km² (convert
    a curve fitted in ft and mi² with :func:`regional_coef_to_si`). Power-law regional
    curves: Bieger et al., 2015, JAWRA; Bent & Waite, 2013, USGS SIR 2013-5155.
    """
    da = np.asarray(drainage_area_km2, dtype=float)
    coef = _finite(coef, "regional coefficient")
    exp = _finite(exp, "regional exponent")
    if coef <= 0:
        raise InputError(f"the regional coefficient must be greater than 0, got {coef:g}",
                         "give the curve's coefficient a in depth = a × area^b (m, km²)")
    if not np.all(np.isfinite(da)) or np.any(da <= 0):
        raise InputError("drainage area must be a finite number greater than 0 (km²)",
                         "fill the drainage-area field with each reach's area in km²")
    out = coef * da ** exp
    return float(out) if out.ndim == 0 else out


def regional_coef_to_si(coef, exp):
    """Coefficient of a regional depth curve fitted in ft and mi², converted to m and
    km² (the exponent is unchanged): a_si = a_us × 0.3048 / 2.589988110336^exp."""
    exp = _finite(exp, "regional exponent")
    return _finite(coef, "regional coefficient") * FOOT / SQ_MILE_KM2 ** exp


def _finite(v, what):
    try:
        f = float(v)
    except (TypeError, ValueError):
        raise InputError(f"{what} must be a number, got {v!r}", f"give the {what} as a number") from None
    if not math.isfinite(f):
        raise InputError(f"{what} must be finite, got {v!r}", f"give the {what} as a finite number")
    return f


# ------------------------------------------------------------------------ pick
def _check_args(section, method, fixed_depth, drainage_area_km2, regional_coef, regional_exp,
                tolerance):
    if not isinstance(section, CrossSection):
        raise InputError(f"pick_bankfull needs a CrossSection, got {type(section).__name__}",
                         "build the section with reachgauge.CrossSection(offset, elevation)")
    if method not in BANKFULL_METHODS:
        raise InputError(f"unknown bankfull method {method!r}",
                         f"use one of: {', '.join(BANKFULL_METHODS)}")
    if method == "fixed-depth":
        if fixed_depth is None:
            raise InputError("bankfull method fixed-depth needs a depth",
                             "give fixed_depth (m above the thalweg)")
        d = _finite(fixed_depth, "fixed bankfull depth")
        if d <= 0:
            raise InputError(f"the fixed bankfull depth must be greater than 0, got {d:g} m",
                             "give a positive depth above the thalweg")
    if method == "regional":
        missing = [n for n, v in (("drainage_area_km2", drainage_area_km2),
                                  ("regional_coef", regional_coef),
                                  ("regional_exp", regional_exp)) if v is None]
        if missing:
            raise InputError(f"bankfull method regional needs {', '.join(missing)}",
                             "give the drainage area (km²) and the curve's coefficient and "
                             "exponent, or pick another method")
        _finite(drainage_area_km2, "drainage area (km²) of the section's reach")
    if tolerance is not None:
        t = _finite(tolerance, "agreement tolerance")
        if t <= 0:
            raise InputError(f"the agreement tolerance must be greater than 0, got {t:g} m",
                             "give a tolerance in metres, or leave it out for the default")


def pick_bankfull(section: CrossSection, method: str = DEFAULT_METHOD, *, fixed_depth=None,
                  drainage_area_km2=None, regional_coef=None, regional_exp=None,
                  tolerance=None) -> BankfullPick:
    """Pick the bankfull stage of ``section`` by ``method`` (one of
    :data:`reachgauge.config.BANKFULL_METHODS`; the methods and their sources are in
    the module docstring) and say how sure the pick is.

    fixed_depth (m) for "fixed-depth"; drainage_area_km2, regional_coef, regional_exp
    (depth = coef × area^exp, m and km²) for "regional". tolerance (m): how close two
    methods' stages must be to agree; default max(0.1 m, 10 % of the depth) — 0.1 m is
    about the vertical accuracy of a lidar DEM and 10 % of depth about the scatter of
    repeated field picks of bankfull (common practice, [memory]).

    Confidence: "high" when at least three automatic methods found a break and all
    found breaks agree with the stage within the tolerance; "medium" when the chosen
    stage rests on a clear break but some method disagrees ("methods-disagree") or
    too few found one; "low" when the chosen automatic method, or half or more of the
    automatic methods, found no clear break ("no-clear-break"), or the section spills
    over an end of the profile first ("spills-first").

    Never raises for a section that merely has no clear answer: an automatic method
    that finds no break falls back to the median of the other methods' breaks, else
    to the lower end of the profile (``fallback`` says which). Raises
    :class:`InputError` for bad arguments.
    """
    _check_args(section, method, fixed_depth, drainage_area_km2, regional_coef, regional_exp,
                tolerance)
    c = _curves(section)
    cand = _candidates(section, c)
    found = np.array([v for v in cand.values() if np.isfinite(v)])
    flags: list[str] = []
    fallback = ""
    thalweg, top = section.thalweg, section.top

    if method == "fixed-depth":
        stage = thalweg + float(fixed_depth)
    elif method == "regional":
        stage = thalweg + regional_depth(drainage_area_km2, regional_coef, regional_exp)
    else:
        stage = cand[method]
        if not np.isfinite(stage):
            flags.append("no-clear-break")
            if found.size:
                stage, fallback = float(np.median(found)), "methods-median"
            else:
                stage, fallback = top, "profile-end"
    if stage >= top and (method in USER_METHODS or fallback == "profile-end"):
        flags.append("spills-first")

    depth = max(stage - thalweg, 0.0)
    tol = float(tolerance) if tolerance is not None else max(TOLERANCE_FLOOR,
                                                             TOLERANCE_FRACTION * depth)
    agree = np.abs(found - stage) <= tol
    if found.size and not agree.all():
        flags.append("methods-disagree")
    if 2 * found.size <= len(AUTOMATIC_METHODS) and "no-clear-break" not in flags:
        flags.append("no-clear-break")
    if "no-clear-break" in flags or "spills-first" in flags:
        confidence = "low"
    elif found.size >= 3 and agree.all():
        confidence = "high"
    else:
        confidence = "medium"

    noise = c.noise if c is not None else profile_noise(section)
    rise = max(BREAK_RISE_FLOOR, NOISE_MULTIPLE * noise)
    # An automatic pick sits where the water spreads; its banks are the edges half a
    # break rise lower, on the banks themselves rather than out on the floodplain.
    at = stage if method in USER_METHODS else max(thalweg, stage - 0.5 * rise)
    g = section.geometry(np.array([stage, at]))
    width = float(g.top_width[1])
    if is_flat_thalweg(section, channel_width=width if width > 0 else None):
        flags.append("flat-thalweg")
    return BankfullPick(
        stage=float(stage), depth=float(depth), method=method,
        left_bank=float(g.left_edge[1]), right_bank=float(g.right_edge[1]),
        confidence=confidence, flags=tuple(flags), candidates=cand, tolerance=tol,
        fallback=fallback, noise=noise, break_rise=rise)


# ----------------------------------------------------------------------- reach
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
    spread = float(median_abs_deviation(v, scale="normal"))
    q1, q3 = np.percentile(v, [25, 75])
    outliers = np.zeros(d.shape, dtype=bool)
    outliers[ok] = np.abs(v - med) > threshold * max(spread, min_spread)
    return ReachBankfull(med, spread, float(q3 - q1), int(v.size), outliers, median_stage,
                         threshold)


# ------------------------------------------------------------ flat bottom, baseflow
def _flat_run(section: CrossSection, tolerance: float) -> tuple[int, int]:
    """First and last vertex index of the run of vertices within ``tolerance`` of the
    thalweg elevation that contains the thalweg."""
    z = section.elevation
    i0 = int(np.argmin(z))
    limit = z[i0] + tolerance
    left = np.maximum.accumulate(z[:i0 + 1][::-1]) <= limit
    right = np.maximum.accumulate(z[i0:]) <= limit
    return i0 - (int(left.sum()) - 1), i0 + int(right.sum()) - 1


def _check_tolerance(tolerance):
    t = _finite(tolerance, "flat tolerance")
    if t < 0:
        raise InputError(f"the flat tolerance must be 0 or more, got {t:g} m",
                         "give how far above the thalweg (m) a point still counts as flat")
    return t


# A hydro-flattened surface (or lidar returns off water) is flat to the millimetre,
# while lidar ground has centimetres of scatter (REFERENCES: about 0.17-0.26 m RMSE in
# one study; 3-5 cm on open ground is common practice): a run of points within 5 mm
# of the thalweg is water, not bed.
FLAT_TOLERANCE = 0.005


def flat_thalweg_width(section: CrossSection, tolerance: float = FLAT_TOLERANCE) -> float:
    """Width (m) of the bottom that lies within ``tolerance`` (m) of the thalweg
    elevation and is connected to the thalweg: the span of the run of profile points,
    containing the lowest, that all stand no more than ``tolerance`` above it.

    A hydro-flattened DEM, or lidar returns off a water surface, show up as a
    perfectly flat bottom; a sampled natural bed rarely keeps several points within
    5 mm of each other (see :data:`FLAT_TOLERANCE`).
    """
    a, b = _flat_run(section, _check_tolerance(tolerance))
    return float(section.offset[b] - section.offset[a])


def is_flat_thalweg(section: CrossSection, tolerance: float = FLAT_TOLERANCE, *, channel_width=None,
                    min_fraction: float = 0.2, min_points: int = 3) -> bool:
    """True when the flat bottom (:func:`flat_thalweg_width`) looks like a water surface.

    The bottom is suspiciously flat when at least ``min_points`` consecutive points lie
    within ``tolerance`` (m) of the thalweg AND their span is at least ``min_fraction``
    of the channel width. ``channel_width`` (m) defaults to the top width at the
    bank-top stage (at the profile's lower end when there is none); pick_bankfull
    passes the width at its pick. A channel's water surface at low flow covers much
    of its bed, while chance flatness of a noisy bed covers two or three points at
    most (common practice).
    """
    t = _check_tolerance(tolerance)
    a, b = _flat_run(section, t)
    if b - a + 1 < min_points:
        return False
    if channel_width is None:
        at = candidate_stages(section)["bank-top"]
        channel_width = float(section.geometry(at if np.isfinite(at) else section.top).top_width)
    width = float(section.offset[b] - section.offset[a])
    return width >= min_fraction * float(channel_width)


# sample points laid across the corrected bed: with N equal steps the piecewise-linear
# parabola holds (2/3)·W·D·(1 − 1/N²) (trapezoid rule on a parabola), 0.01 % short at N = 100
_BED_STEPS = 100


def baseflow_correct(section: CrossSection, depth=None, area=None,
                     tolerance: float = FLAT_TOLERANCE
                     ) -> CrossSection:
    """Lower the flat water-surface bottom of ``section`` by a parabolic bed.

    Lidar sees the water surface, not the bed (Smart, Bind & Duncan, 2009, MODSIM).
    Across the flat bottom (:func:`flat_thalweg_width`, span W between x_a and x_b),
    the ground is lowered by D·(1 − ((x − x_c)/(W/2))²), x_c the span's centre: a
    parabolic bed of maximum depth D whose added area is (2/3)·W·D (Archimedes'
    quadrature of the parabola). Give exactly one of ``depth`` (D, m) or ``area``
    (m²); for an area, D is solved so that the added area, as the section computes
    it, equals ``area`` exactly.

    If the bottom is not flat (fewer than two points within ``tolerance``), the lidar
    saw no water surface wider than one sample: the parabola spans the two segments
    either side of the thalweg, the narrowest bed the profile can represent, so the
    correction adds the submerged area where the thalweg is without widening it.

    The new section has ``_BED_STEPS`` equal steps across the span plus the old points
    inside it (so the old ground between them is kept exactly); banks carry over.
    """
    if (depth is None) == (area is None):
        raise InputError("give exactly one of depth or area for the baseflow correction",
                         "give the depth (m) or the area (m²) of water under the surface")
    value = _finite(depth if depth is not None else area,
                    "baseflow depth" if depth is not None else "baseflow area")
    if value < 0:
        raise InputError(f"the baseflow {'depth' if depth is not None else 'area'} must be 0 "
                         f"or more, got {value:g}", "give the water under the surface to add")
    x, z = section.offset, section.elevation
    a, b = _flat_run(section, _check_tolerance(tolerance))
    if b == a:  # a single point: take the neighbouring segments
        a, b = max(a - 1, 0), min(b + 1, x.size - 1)
    xa, xb = x[a], x[b]
    xn = np.union1d(np.linspace(xa, xb, _BED_STEPS + 1), x[a:b + 1])
    half = 0.5 * (xb - xa)
    shape = 1.0 - ((xn - 0.5 * (xa + xb)) / half) ** 2
    shape[[0, -1]] = 0.0
    if area is not None:
        unit = float(np.sum(0.5 * (shape[1:] + shape[:-1]) * np.diff(xn)))
        d = value / unit
    else:
        d = value
    zn = np.interp(xn, x, z) - d * shape
    xo = np.concatenate([x[:a], xn, x[b + 1:]])
    zo = np.concatenate([z[:a], zn, z[b + 1:]])
    return CrossSection(xo, zo, banks=section.banks)


# ------------------------------------------------------------ every transect at once
@dataclass(frozen=True)
class BankfullParams:
    """What the bankfull step needs (lengths m, areas km²).

    method: one of :data:`reachgauge.config.BANKFULL_METHODS`; fixed_depth for
    "fixed-depth"; regional_coef, regional_exp for "regional" (depth = coef × DA^exp);
    baseflow_depth: water under the terrain's water surface to add back (0: none).
    """

    method: str = DEFAULT_METHOD
    fixed_depth: float | None = None
    regional_coef: float | None = None
    regional_exp: float | None = None
    baseflow_depth: float = 0.0


@dataclass(frozen=True)
class Picks:
    """Bankfull picks of t transects, as arrays (see :class:`BankfullPick`).

    stage, depth, left_bank, right_bank, tolerance, noise, break_rise (t,) m, NaN
    where the profile is invalid; confidence, fallback (t,) str ("" where invalid);
    flags: t tuples of codes; candidates (t, 4) stages of :data:`AUTOMATIC_METHODS`;
    method: the method asked for; profiles: the profiles the picks were made on
    (after any baseflow correction), which every later step uses.
    """

    stage: np.ndarray
    depth: np.ndarray
    left_bank: np.ndarray
    right_bank: np.ndarray
    confidence: np.ndarray
    flags: list
    candidates: np.ndarray
    fallback: np.ndarray
    tolerance: np.ndarray
    noise: np.ndarray
    break_rise: np.ndarray
    method: str
    profiles: object


def pick_all(p, params: BankfullParams, drainage_area_km2=None) -> Picks:
    """Bankfull pick of every valid profile of ``p``
    (:class:`~reachgauge.kernel.sections.Profiles`) by ``params.method``, after the
    optional baseflow correction; see :func:`pick_bankfull` for methods and
    confidence."""
    from reachgauge.kernel import sections as K

    t = p.count
    xs, zs = [], []
    picks = [None] * t
    for i in range(t):
        n = int(p.size[i])
        x, z = p.x[i, :n], p.z[i, :n]
        if n >= 3:
            cs = CrossSection._trusted(x, z)
            if params.baseflow_depth > 0:
                cs = baseflow_correct(cs, depth=params.baseflow_depth)
            x, z = cs.offset, cs.elevation
            picks[i] = pick_bankfull(cs, params.method, fixed_depth=params.fixed_depth,
                                     drainage_area_km2=drainage_area_km2,
                                     regional_coef=params.regional_coef,
                                     regional_exp=params.regional_exp)
        xs.append(x)
        zs.append(z)
    m = max([len(x) for x in xs] + [1])
    xa = np.full((t, m), np.nan)
    za = np.full((t, m), np.nan)
    for i, (x, z) in enumerate(zip(xs, zs)):
        xa[i, :len(x)], za[i, :len(z)] = x, z
    prof = K.profiles(xa, za)

    def arr(attr, fill=np.nan):
        return np.array([getattr(q, attr) if q else fill for q in picks], dtype=float)

    return Picks(
        stage=arr("stage"), depth=arr("depth"), left_bank=arr("left_bank"),
        right_bank=arr("right_bank"),
        confidence=np.array([q.confidence if q else "" for q in picks], dtype=object),
        flags=[q.flags if q else () for q in picks],
        candidates=np.array([[q.candidates[k] for k in AUTOMATIC_METHODS] if q
                             else [np.nan] * len(AUTOMATIC_METHODS) for q in picks]).reshape(t, -1),
        fallback=np.array([q.fallback if q else "" for q in picks], dtype=object),
        tolerance=arr("tolerance"), noise=arr("noise"), break_rise=arr("break_rise"),
        method=params.method, profiles=prof)
