"""The vocabulary of statuses and flags: one place, used by every step, the
writer and the report.

A transect or reach carries a ``status`` (``ok`` or the first reason it could not
be computed) and ``flags``: zero or more codes, joined by ``;`` in outputs, for
results that were computed but deserve a look. Codes are our own.

Every flag has a severity (:data:`SEVERITY`, one of :data:`SEVERITIES`):
``information`` (the figures stand; the flag says how they were made), ``check``
(the figures are published; look at the section before relying on them) and
``do not use`` (the terrain cannot support a bankfull figure here: the bankfull
figures are withheld, NaN, and the reach's summary leaves the transect out).
"""

from __future__ import annotations

import numpy as np

# status codes: the item produced no figures
REACH_STATUS = {
    "ok": "processed",
    "empty-geometry": "the feature has no geometry",
    "not-a-line": "the feature is not a LineString or MultiLineString",
    "too-short": "the line is shorter than one transect spacing",
    "outside-raster": "the line lies outside the terrain raster",
    "failed": "an unexpected error; see the run log",
    # appended by the GIS issue
    "zero-length": "the line has zero length (all its vertices coincide)",
    "no-sections": "no transect of the reach gives a section: too little terrain data, or no "
                   "ground above the thalweg on one side (no channel)",
    "bad-input": "this reach's own data is unusable (see the message)",
    # appended by the no-channel change (issue 9)
    "bankfull-unsupported": "no more than half of the reach's transects have a trusted bankfull "
                            "pick (a channel with a floodplain break): the reach's bankfull "
                            "figures are withheld; the message counts the reasons",
}
TRANSECT_STATUS = {
    "ok": "processed",
    "no-data": "too few valid terrain samples on the transect",
    "no-depth": "the profile has no ground above the thalweg on one side",
    "no-slope": "too few stations of the reach have ground to fit a slope here",
    "failed": "an unexpected error; see the run log",
}

# flag codes: computed, but look before trusting
FLAGS = {
    # sampling and geometry (transects issue)
    "partial-nodata": "some samples fell on nodata and were dropped",
    "off-raster": "part of the transect lies outside the raster",
    "shortened": "transect shortened to avoid crossing a neighbour or another stream",
    "crosses-neighbour": "transect crosses a neighbouring transect or another stream",
    "snap-far": "thalweg found far from the digitised centreline (near the snap limit)",
    "flat-reach": "slope below the floor; the floor was used",
    "carved": "thalweg elevation moved by conditioning the profile (a hump breached or a pit filled)",
    # bankfull (bankfull issue)
    "methods-disagree": "bankfull methods disagree by more than the tolerance",
    "no-clear-break": "the chosen bankfull method found no floodplain break in the section: "
                      "no bankfull figure",
    "spills-first": "the section spills over an end of the profile before a bank break",
    "flat-thalweg": "flat thalweg: likely the water surface at the flight, not the bed",
    "baseflow-added": "the unseen channel under the flat water surface was added back "
                      "(baseflow depth); its figures include it",
    "bankfull-outlier": "bankfull depth far from the reach median",
    # capacity and roughness (bankfull issue)
    "out-of-bank": "a design flow leaves the channel",
    "over-profile": "a flow overtops an end of the transect (its stage is an upper bound)",
    "stage-at-jump": "a design flow is carried only once water tops a bank into lower ground "
                     "behind it (its stage is that bank's elevation)",
    "n-unusual": "Manning's n outside the usual range of the published tables",
    "n-unknown-class": "a land-cover class under the transect has no n in the table",
    # appended by the GIS issue
    "water-surface": "slope fitted to the water surface of hydro-flattened terrain, not to the bed",
    # appended by the profile-conditioning change (issue 9)
    "reshaped-profile": "conditioning moved a large share of the reach's stations far (humps "
                        "breached, pits filled): the slope describes a reshaped profile, "
                        "perhaps ground with no continuous channel",
    # appended by the no-channel change (issue 9)
    "break-unconfirmed": "the chosen method found a break but fewer than half of the automatic "
                         "methods found one: low confidence, left out of the reach's medians",
    "break-at-end": "the water edge of the pick lies at an end of the transect: the bank may "
                    "lie beyond it (widen with --half-width); low confidence, left out of the "
                    "reach's medians",
    "supercritical": "Froude number above 1 at bankfull, rare in natural channels over a reach: "
                     "check the slope, n and the section",
    "zero-depth": "the bankfull stage is not above the thalweg, or the channel between the "
                  "banks has no width: no bankfull figure",
    "closed-hollow": "water standing level at the pick's stage is held by higher bed up- and "
                     "downstream within a few top widths: a closed depression (kettle, pond, "
                     "pit), not a channel; no bankfull figure",
    "off-channel": "the thalweg was found near the snap limit and the section shows no channel "
                   "there: the line runs over ground with no channel; no bankfull figure",
    "isolated-pick": "neither neighbouring transect shows a bankfull pick: a local feature "
                     "(a hollow's rim, a ditch, a pit) rather than a channel; low confidence, "
                     "left out of the reach's medians",
    # appended by the drainage-area change (issue 12)
    "area-lower-bound": "the watershed of the drainage area reaches the raster's edge or nodata: "
                        "water may come from beyond, the area is only a lower bound",
    # appended by the regional-curves change (issue 12): a reach flag
    "regional-outlier": "a bankfull figure of the reach lies outside the 95 % prediction band of "
                        "the run's regional curve (regional_outside says which): check the reach",
}

SEVERITIES = ("information", "check", "do not use")

# severity of each flag; a code missing here is "check" (see severity())
SEVERITY = {
    "partial-nodata": "check", "off-raster": "check", "shortened": "information",
    "crosses-neighbour": "check", "snap-far": "check", "flat-reach": "check",
    "carved": "information", "methods-disagree": "check", "no-clear-break": "do not use",
    "spills-first": "check", "flat-thalweg": "check", "baseflow-added": "information",
    "bankfull-outlier": "check", "out-of-bank": "information", "over-profile": "check",
    "n-unusual": "check", "n-unknown-class": "check", "water-surface": "information",
    "reshaped-profile": "check", "break-unconfirmed": "check", "break-at-end": "check",
    "supercritical": "check", "zero-depth": "do not use", "closed-hollow": "do not use",
    "off-channel": "do not use", "isolated-pick": "check", "area-lower-bound": "check",
    "regional-outlier": "check",
}

# flags that withhold a transect's bankfull figures
WITHHELD = frozenset(c for c, s in SEVERITY.items() if s == "do not use")


def severity(code: str) -> str:
    """Severity of a flag code (:data:`SEVERITIES`); "check" for a code with none."""
    return SEVERITY.get(code, "check")


# results of the design-flow checks, not doubts about the section
CAPACITY_FLAGS = frozenset({"out-of-bank", "over-profile", "stage-at-jump"})


def has_quality_flag(text) -> bool:
    """True when a ';'-joined flag string holds a flag other than the
    design-flow results of :data:`CAPACITY_FLAGS`."""
    return any(c and c not in CAPACITY_FLAGS for c in str(text or "").split(";"))


def worst(text) -> str | None:
    """The gravest severity among the flags of a ';'-joined string, leaving out
    the design-flow results (:data:`CAPACITY_FLAGS`); None when there is none."""
    ranks = [SEVERITIES.index(severity(c)) for c in str(text or "").split(";")
             if c and c not in CAPACITY_FLAGS]
    return SEVERITIES[max(ranks)] if ranks else None


def join(codes) -> str:
    """Join flag codes (any iterable, duplicates and blanks dropped) as 'a;b'."""
    seen = []
    for c in codes:
        for part in str(c).split(";"):
            if part and part not in seen:
                seen.append(part)
    return ";".join(seen)


def join_columns(columns, t: int, base=None) -> np.ndarray:
    """';'-joined codes of ``t`` items from ``(code, mask)`` columns, in column order,
    vectorised over the items (the format of :func:`join`). ``base``: existing
    ';'-joined strings to extend."""
    out = np.full(t, "", dtype=object) if base is None else np.array(base, dtype=object)
    for code, mask in columns:
        sep = np.where(out == "", "", ";")
        out = np.where(np.asarray(mask, dtype=bool), out + sep + code, out)
    return out


def contains(text, code: str) -> np.ndarray:
    """Items of an array of ';'-joined codes that hold ``code``, vectorised (bool)."""
    t = np.asarray(text, dtype=object)
    if t.size == 0:
        return np.zeros(t.shape, bool)
    padded = np.char.add(np.char.add(";", t.astype(str)), ";")
    return np.char.find(padded, f";{code};") >= 0


def contains_any(text, codes) -> np.ndarray:
    """Items of an array of ';'-joined codes that hold any of ``codes`` (bool)."""
    out = np.zeros(np.shape(text), bool)
    for code in codes:                       # a handful of codes, not items
        out |= contains(text, code)
    return out


def concat(a, b) -> np.ndarray:
    """Two arrays of ';'-joined codes joined item by item, vectorised."""
    a = np.asarray(a, dtype=object)
    b = np.asarray(b, dtype=object)
    return np.where(a == "", b, np.where(b == "", a, a + ";" + b))


def markdown() -> str:
    """Tables of status and flag codes, for the README (kept in sync by a test)."""
    out = ["| reach status | meaning |", "|---|---|"]
    out += [f"| `{k}` | {v} |" for k, v in REACH_STATUS.items()]
    out += ["", "| transect status | meaning |", "|---|---|"]
    out += [f"| `{k}` | {v} |" for k, v in TRANSECT_STATUS.items()]
    out += ["", "| flag | severity | meaning |", "|---|---|---|"]
    out += [f"| `{k}` | {severity(k)} | {v} |" for k, v in FLAGS.items()]
    return "\n".join(out) + "\n"
