"""The bankfull pick of every transect of a reach at once: the stage by the chosen
method, the fallbacks where it finds no break, the confidence and the flags.

A stage is *published* only where the chosen method gave it (or the user did, by
a fixed depth or a regional curve). Where the chosen automatic method finds no
floodplain break the section shows no channel the method can read: a fallback stage
is still computed (``source`` says which: the median of the other methods' breaks,
else the lower end of the profile) for callers who want one, but its confidence is
"none" and it carries ``no-clear-break``, whose severity is "do not use"
(:mod:`reachgauge.flags`): the run withholds its figures and leaves it out of every
reach figure.

:func:`pick_all` works on :class:`~reachgauge.kernel.sections.Profiles` (all the
transects of a reach); :func:`pick_bankfull` is its one-row view for one
:class:`~reachgauge.kernel.crosssection.CrossSection`. Both run the same array code.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from reachgauge.config import BANKFULL_METHODS
from reachgauge.errors import InputError
from reachgauge.hydraulics.bankfull import banks, baseflow, methods
from reachgauge.hydraulics.bankfull import rows as R
from reachgauge.hydraulics.bankfull.methods import AUTOMATIC_METHODS
from reachgauge.hydraulics.bankfull.regional import finite, regional_depth
from reachgauge.hydraulics.bankfull.scales import MIN_DEPTH_MULTIPLE, scales
from reachgauge.kernel import sections as K
from reachgauge.kernel.crosssection import CrossSection

USER_METHODS = ("fixed-depth", "regional")
# Chosen by benchmarks/bankfull_methods.py (lowest error and no false breaks over the
# family of synthetic sections; the numbers are in that script's output).
DEFAULT_METHOD = "bank-top"
# agreement tolerance when none is given: max(0.1 m, 10 % of depth)
TOLERANCE_FLOOR = 0.1
TOLERANCE_FRACTION = 0.1
# flag codes by bit, in the order a pick lists them
_FLAG_BITS = ("no-clear-break", "spills-first", "methods-disagree", "break-unconfirmed",
              "flat-thalweg", "baseflow-added", "break-at-end")
_FLAG_SETS = np.empty(1 << len(_FLAG_BITS), dtype=object)
_FLAG_SETS[:] = [tuple(f for i, f in enumerate(_FLAG_BITS) if code >> i & 1)
                 for code in range(_FLAG_SETS.size)]
_FLAG_TEXT = np.array([";".join(f) for f in _FLAG_SETS], dtype=object)
# confidence by level: 0 invalid profile, 1 no pick of the method's own (a fallback)
_CONFIDENCE = np.array(["", "none", "low", "medium", "high"], dtype=object)
# the confidences whose picks the reach's figures use
TRUSTED_CONFIDENCE = ("medium", "high")


@dataclass(frozen=True)
class BankfullPick:
    """The bankfull stage of one section and how sure the pick is.

    stage, depth (m): water-surface elevation and depth above the thalweg.
    method: the method asked for; source: the one that gave ``stage`` (``method``
    itself, or the fallback: "methods-median" | "profile-end"; a fallback stage has
    confidence "none" and is not a bankfull figure). left_bank, right_bank: offsets
    (m) of the banks: for a user's stage the water's edges there; for an automatic
    method the bank tops, where the least-squares lines of the bank faces reach the
    stage (:mod:`~reachgauge.hydraulics.bankfull.banks`).
    confidence: "high" | "medium" | "low" | "none". flags: codes from
    :data:`reachgauge.flags.FLAGS`. candidates: stage (m, NaN where it found no break)
    of every automatic method. tolerance (m): the agreement tolerance used.
    fallback: "" when ``method`` gave the stage, "methods-median" when it found no
    break and the median of the other automatic methods was used, "profile-end" when
    no method found one and the lower end of the profile was used.
    noise, break_rise (m): the scales of the shape tests (package docstring).
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
    source: str = ""


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
    (after any baseflow correction), which every later step uses. source (t,) str:
    the method that gave each stage (``method``, "methods-median", "profile-end";
    "" where invalid); published (t,) bool: a valid profile whose stage the chosen
    method (or the user) gave, not a fallback.
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
    codes: np.ndarray = None   # (t,) the flags ';'-joined
    bits: np.ndarray = None    # (t,) the flags as bits of _FLAG_BITS
    source: np.ndarray = None
    published: np.ndarray = None


def check_args(method, fixed_depth=None, drainage_area_km2=None, regional_coef=None,
               regional_exp=None, tolerance=None):
    """:class:`InputError` for a method or method argument that cannot be used."""
    if method not in BANKFULL_METHODS:
        raise InputError(f"unknown bankfull method {method!r}",
                         f"use one of: {', '.join(BANKFULL_METHODS)}")
    if method == "fixed-depth":
        if fixed_depth is None:
            raise InputError("bankfull method fixed-depth needs a depth",
                             "give fixed_depth (m above the thalweg)")
        d = finite(fixed_depth, "fixed bankfull depth")
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
        finite(drainage_area_km2, "drainage area (km²) of the section's reach")
    if tolerance is not None:
        t = finite(tolerance, "agreement tolerance")
        if t <= 0:
            raise InputError(f"the agreement tolerance must be greater than 0, got {t:g} m",
                             "give a tolerance in metres, or leave it out for the default")


def _found_median(cand):
    """Median of each row's finite candidates (np.median of them), NaN if none."""
    return R.median(cand, np.isfinite(cand))


def _stage(p, cand, method, user_depth):
    """Stage (t,) by ``method``; whether the method itself found no break; the
    fallback used ("" | "methods-median" | "profile-end"); and the source of each
    stage: ``method`` where it gave the stage, else the fallback's name.

    A fallback stage is no bankfull figure (the chosen method saw no floodplain
    break): it is kept for the banks of a caller who wants one and is marked by
    confidence "none" and ``no-clear-break`` (see :func:`_pick`)."""
    t = p.count
    if method in USER_METHODS:
        return (p.thalweg + user_depth, np.zeros(t, bool), np.full(t, "", dtype=object),
                np.full(t, method, dtype=object))
    own = cand[:, AUTOMATIC_METHODS.index(method)]
    missed = ~np.isfinite(own)
    median = _found_median(cand)
    by_median = missed & np.isfinite(median)
    stage = np.where(missed, np.where(by_median, median, p.top), own)
    fallback = np.where(missed, np.where(by_median, "methods-median", "profile-end"), "")
    source = np.where(missed, fallback, method)
    return stage, missed, fallback.astype(object), source.astype(object)


def _banks_and_flat(p, cand, stage, rise, user, blur=None):
    """Bank offsets at the pick and the flat-thalweg test, from the section kernel.

    A user's stage is a water level: its banks are the water's edges there. An
    automatic pick sits where the water spreads onto the plain; its banks are the
    bank tops of :func:`~reachgauge.hydraulics.bankfull.banks.bank_tops` (a
    least-squares fit of each bank face, extrapolated to the stage, corrected for
    the sampling ``blur``), no further out than the water's edges half a break rise
    below the stage, where the water has not yet run out over the plain.

    Returns the left and right banks, the flat-thalweg test and the water's edges
    (t, 2) at ``at`` (the stage, or half a break rise below an automatic one): the
    edges :func:`_at_end` tests, since a fitted bank top lies inside them and can
    sit well away from a transect end the water itself has reached."""
    at = stage if user else np.maximum(p.thalweg, stage - 0.5 * rise)
    bank_top = cand[:, 0]
    alt = np.where(np.isfinite(bank_top), bank_top, p.top)
    ok = p.valid
    w = K.wet(p, np.column_stack([np.where(ok, at, p.thalweg), np.where(ok, alt, p.thalweg)]))
    width = w.top_width[:, 0]
    # the width at the pick, or where there is none the width at the bank top
    channel = np.where(width > 0, width, w.top_width[:, 1])
    water = np.column_stack([w.left_edge[:, 0], w.right_edge[:, 0]])
    edges = water
    if not user:
        edges = banks.bank_tops(p, np.where(ok, stage, p.thalweg), water, blur)
    return edges[:, 0], edges[:, 1], baseflow.flat_rows(p, channel), water


def _pick(p: K.Profiles, method, user_depth=None, tolerance=None, sigma=None, floor=None,
          added=None, blur=None) -> Picks:
    """Picks of every profile of ``p`` (arguments already checked). ``sigma``,
    ``floor``: see :func:`~reachgauge.hydraulics.bankfull.scales.scales`; ``added``
    (t,) bool: rows whose unseen channel was added back (flagged); ``blur``: see
    :func:`pick_all`."""
    ok = p.valid
    sc = scales(p, sigma, floor)
    cand = methods.candidates(p, sc)
    stage, missed, fallback, source = _stage(p, cand, method, user_depth)
    user = method in USER_METHODS
    spills = (stage >= p.top) & (user | (fallback == "profile-end"))
    depth = np.maximum(stage - p.thalweg, 0.0)
    tol = (np.full(p.count, float(tolerance)) if tolerance is not None
           else np.maximum(TOLERANCE_FLOOR, TOLERANCE_FRACTION * depth))
    found = np.isfinite(cand)
    n_found = found.sum(axis=1)
    with np.errstate(invalid="ignore"):
        agree = np.all(~found | (np.abs(cand - stage[:, None]) <= tol[:, None]), axis=1)
    disagree = (n_found > 0) & ~agree
    few = (2 * n_found <= len(AUTOMATIC_METHODS)) & ~missed
    left, right, flat, water = _banks_and_flat(p, cand, stage, sc.rise, user, blur)
    added = np.zeros(p.count, bool) if added is None else np.asarray(added, dtype=bool)
    at_end = _at_end(p, water[:, 0], water[:, 1], sc.min_run) & ~missed & ~user
    bits = (missed * 1 + spills * 2 + disagree * 4 + few * 8 + flat * 16 + added * 32
            + at_end * 64)
    # none: a fallback, no pick of the method's own; low: a pick that stands alone, sits
    # at a transect end or spills first; high: three or more methods agree with it
    level = np.where(missed, 1, np.where(spills | few | at_end, 2,
                                         np.where((n_found >= 3) & agree, 4, 3)))

    def valid(a):
        return np.where(ok, a, np.nan)

    return Picks(
        stage=valid(stage), depth=valid(depth), left_bank=valid(left), right_bank=valid(right),
        confidence=_CONFIDENCE[np.where(ok, level, 0)], flags=_FLAG_SETS[np.where(ok, bits, 0)].tolist(),
        candidates=valid(cand.T).T, fallback=np.where(ok, fallback, "").astype(object),
        tolerance=valid(tol), noise=valid(sc.noise), break_rise=valid(sc.rise),
        method=method, profiles=p, codes=_FLAG_TEXT[np.where(ok, bits, 0)],
        bits=np.where(ok, bits, 0), source=np.where(ok, source, "").astype(object),
        published=ok & ~missed)


def _at_end(p, left, right, min_run):
    """A water's edge of the pick (``left``, ``right``: offsets m, for an automatic
    pick half a break rise below its stage, not the fitted bank tops) within
    ``min_run`` (m, three sample steps) of an end of the profile: the water's edge
    the pick rests on may lie beyond the transect, so the break may be the water
    leaving the transect rather than a floodplain."""
    with np.errstate(invalid="ignore"):
        return ((left - p.first_offset) <= min_run) | ((p.last_offset - right) <= min_run)


def pick_all(p, params: BankfullParams, drainage_area_km2=None, blur=None) -> Picks:
    """Bankfull pick of every valid profile of ``p``
    (:class:`~reachgauge.kernel.sections.Profiles`) by ``params.method``, after the
    optional baseflow correction (of every valid profile); see
    :func:`pick_bankfull` for methods and confidence. ``blur`` (m, scalar or (t,)):
    the standard deviation of the blur through which the profiles see the ground
    (:func:`~reachgauge.hydraulics.bankfull.banks.sampling_blur` of the sample step
    for sections sampled from a raster; None for exact profiles), which the bank
    tops are corrected for. All transects at once: no loop
    over transects or stages (the trial stages go through the kernel in row blocks of
    bounded size)."""
    check_args(params.method, params.fixed_depth, drainage_area_km2, params.regional_coef,
               params.regional_exp)
    user = _user_depth(params.method, params.fixed_depth, drainage_area_km2,
                       params.regional_coef, params.regional_exp)
    first = _pick(p, params.method, user, blur=blur)
    if not params.baseflow_depth > 0:
        return first
    # Only sections whose bottom is flat water are corrected (Smart, Bind & Duncan 2009:
    # lidar sees the water surface, not the bed); their picks keep the noise of the
    # terrain (the synthetic bed is smooth) and search from the old water surface up.
    flat = (first.bits & (1 << _FLAG_BITS.index("flat-thalweg"))) > 0
    if not flat.any():
        return first
    sc = scales(p)
    corrected = baseflow.correct_profiles(p, depth=finite(params.baseflow_depth, "baseflow depth"),
                                          where=flat)
    floor = np.where(flat, p.thalweg + MIN_DEPTH_MULTIPLE * sc.rise, np.nan)
    return _pick(corrected, params.method, user, sigma=sc.noise, floor=floor, added=flat,
                 blur=blur)


def _user_depth(method, fixed_depth, drainage_area_km2, coef, exp):
    if method == "fixed-depth":
        return float(fixed_depth)
    if method == "regional":
        return regional_depth(drainage_area_km2, coef, exp)
    return None


def pick_bankfull(section: CrossSection, method: str = DEFAULT_METHOD, *, fixed_depth=None,
                  drainage_area_km2=None, regional_coef=None, regional_exp=None,
                  tolerance=None) -> BankfullPick:
    """Pick the bankfull stage of ``section`` by ``method`` (one of
    :data:`reachgauge.config.BANKFULL_METHODS`; the methods and their sources are in
    the package docstring) and say how sure the pick is: the one-row view of
    :func:`pick_all`.

    fixed_depth (m) for "fixed-depth"; drainage_area_km2, regional_coef, regional_exp
    (depth = coef × area^exp, m and km²) for "regional". tolerance (m): how close two
    methods' stages must be to agree; default max(0.1 m, 10 % of the depth) — 0.1 m is
    about the vertical accuracy of a lidar DEM and 10 % of depth about the scatter of
    repeated field picks of bankfull (common practice, [memory]).

    Confidence: "high" when at least three automatic methods found a break and all
    found breaks agree with the stage within the tolerance; "medium" when the chosen
    stage rests on a clear break but some method disagrees ("methods-disagree");
    "low" when half or more of the automatic methods found no break though the chosen
    one did ("break-unconfirmed"), a water's edge of the pick (half a break rise
    below the stage) lies within three sample steps of an end of the transect
    ("break-at-end"), or the section spills over an end of the profile first
    ("spills-first"); "none" when the chosen automatic method found no floodplain
    break ("no-clear-break"): the stage is then a fallback, not a bankfull figure.

    Never raises for a section that merely has no clear answer: an automatic method
    that finds no break falls back to the median of the other methods' breaks, else
    to the lower end of the profile (``fallback`` and ``source`` say which), with
    confidence "none". Raises :class:`InputError` for bad arguments.
    """
    if not isinstance(section, CrossSection):
        raise InputError(f"pick_bankfull needs a CrossSection, got {type(section).__name__}",
                         "build the section with reachgauge.CrossSection(offset, elevation)")
    check_args(method, fixed_depth, drainage_area_km2, regional_coef, regional_exp, tolerance)
    q = _pick(section.profiles, method, _user_depth(method, fixed_depth, drainage_area_km2,
                                                    regional_coef, regional_exp), tolerance)
    return BankfullPick(
        stage=float(q.stage[0]), depth=float(q.depth[0]), method=method,
        left_bank=float(q.left_bank[0]), right_bank=float(q.right_bank[0]),
        confidence=q.confidence[0], flags=q.flags[0],
        candidates={m: float(v) for m, v in zip(AUTOMATIC_METHODS, q.candidates[0])},
        tolerance=float(q.tolerance[0]), fallback=q.fallback[0], noise=float(q.noise[0]),
        break_rise=float(q.break_rise[0]), source=q.source[0])
