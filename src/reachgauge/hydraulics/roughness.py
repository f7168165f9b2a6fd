"""Where Manning's n comes from, and how plausible a value is.

Tables
------
``CHOW_NATURAL`` holds the natural-channel and flood-plain rows of Chow, V. T.,
1959, *Open-Channel Hydraulics*, Table 5-6 (minimum, normal, maximum), checked
against the encoding of the same table in the ``fluids`` package
(``fluids.open_flow.n_natural``); the tests compare every row.

Range checks
------------
The plausible range for a natural channel or flood plain runs from the smallest
minimum to the largest maximum of those rows (0.020 to 0.200). Measured
natural-channel values in Barnes, H. H., 1967, USGS Water-Supply Paper 1849, run
from 0.024 to 0.097. A value outside ``HARD_RANGE`` (0.010–0.250; 0.010 is a
smooth lined channel, common practice) is an error unless forced; a value
outside the table range is a warning.

Cowan's method
--------------
n = (nb + n1 + n2 + n3 + n4) m: Cowan, W. L., 1956, "Estimating hydraulic
roughness coefficients", Agricultural Engineering 37(7); tables as given in
Arcement, G. J., and Schneider, V. R., 1989, *Guide for selecting Manning's
roughness coefficients for natural channels and flood plains*, USGS
Water-Supply Paper 2339, Tables 1 and 2.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from reachgauge.errors import InputError, ReachgaugeWarning

# Chow (1959), Table 5-6; our short keys, Chow's wording in ``text``.
# (key, text, (min, normal, max))
CHOW_NATURAL: tuple[tuple[str, str, tuple[float, float, float]], ...] = (
    ("clean-straight", "minor stream, clean, straight, full stage, no rifts or deep pools",
     (0.025, 0.030, 0.033)),
    ("clean-straight-stony", "as above, more stones and weeds", (0.030, 0.035, 0.040)),
    ("clean-winding", "clean, winding, some pools and shoals", (0.033, 0.040, 0.045)),
    ("winding-weeds", "clean, winding, some weeds and stones", (0.035, 0.045, 0.050)),
    ("winding-low-stage", "as above, lower stages, less effective slopes and sections",
     (0.040, 0.048, 0.055)),
    ("winding-stony", "clean, winding, more weeds and stones", (0.045, 0.050, 0.060)),
    ("sluggish-weedy", "sluggish reaches, weedy, deep pools", (0.050, 0.070, 0.080)),
    ("very-weedy", "very weedy reaches, deep pools, or floodways with heavy stand of timber "
     "and underbrush", (0.075, 0.100, 0.150)),
    ("mountain-gravel", "mountain stream, gravel, cobbles and few boulders on bottom",
     (0.030, 0.040, 0.050)),
    ("mountain-boulders", "mountain stream, cobbles with large boulders on bottom",
     (0.040, 0.050, 0.070)),
    ("major-irregular", "major stream, irregular and rough section", (0.035, 0.070, 0.100)),
    ("plain-short-grass", "flood plain, pasture, no brush, short grass", (0.025, 0.030, 0.035)),
    ("plain-high-grass", "flood plain, pasture, no brush, high grass", (0.030, 0.035, 0.050)),
    ("plain-no-crop", "flood plain, cultivated, no crop", (0.020, 0.030, 0.040)),
    ("plain-row-crops", "flood plain, cultivated, mature row crops", (0.025, 0.035, 0.045)),
    ("plain-field-crops", "flood plain, cultivated, mature field crops", (0.030, 0.040, 0.050)),
    ("plain-scattered-brush", "flood plain, scattered brush, heavy weeds", (0.035, 0.050, 0.070)),
    ("plain-light-brush-winter", "flood plain, light brush and trees, in winter",
     (0.035, 0.050, 0.060)),
    ("plain-light-brush-summer", "flood plain, light brush and trees, in summer",
     (0.040, 0.060, 0.080)),
    ("plain-dense-brush-winter", "flood plain, medium to dense brush, in winter",
     (0.045, 0.070, 0.110)),
    ("plain-dense-brush-summer", "flood plain, medium to dense brush, in summer",
     (0.070, 0.100, 0.160)),
    ("plain-willows", "flood plain, dense willows, summer, straight", (0.110, 0.150, 0.200)),
    ("plain-stumps", "flood plain, cleared land with tree stumps, no sprouts",
     (0.030, 0.040, 0.050)),
    ("plain-stumps-sprouts", "flood plain, cleared land with stumps, heavy growth of sprouts",
     (0.050, 0.060, 0.080)),
    ("plain-timber-low", "flood plain, heavy stand of timber, flood stage below branches",
     (0.080, 0.100, 0.120)),
    ("plain-timber-high", "flood plain, heavy stand of timber, flood stage reaching branches",
     (0.100, 0.120, 0.160)),
)

TABLE_RANGE = (min(r[2][0] for r in CHOW_NATURAL), max(r[2][2] for r in CHOW_NATURAL))
HARD_RANGE = (0.010, 0.250)


def table_matches(n: float, kind: str | None = None) -> list[tuple[str, str, tuple[float, float, float]]]:
    """Rows of Chow's Table 5-6 whose min–max range contains ``n``.

    ``kind``: ``"channel"`` for stream rows only, ``"plain"`` for flood-plain
    rows only, ``None`` for both.
    """
    rows = CHOW_NATURAL
    if kind == "channel":
        rows = [r for r in rows if not r[0].startswith("plain-")]
    elif kind == "plain":
        rows = [r for r in rows if r[0].startswith("plain-")]
    return [row for row in rows if row[2][0] <= n <= row[2][2]]


def check_n_range(n, *, force: bool = False, where: str = "Manning's n") -> list[str]:
    """Check n values against the published ranges.

    Raises :class:`InputError` for a value outside :data:`HARD_RANGE` unless
    ``force``; returns a list of warning texts for values outside
    :data:`TABLE_RANGE` (natural channels and flood plains, Chow 1959, Table 5-6).
    """
    arr = np.atleast_1d(np.asarray(n, dtype=float))
    if not np.all(np.isfinite(arr)) or np.any(arr <= 0):
        raise InputError(f"{where} must be a finite number greater than 0",
                         "natural channels usually lie between 0.025 and 0.15")
    lo, hi = HARD_RANGE
    out = arr[(arr < lo) | (arr > hi)]
    if out.size and not force:
        raise InputError(
            f"{where} = {out[0]:g} is outside {lo:g}–{hi:g}, the range of published values for "
            "channels and flood plains",
            "check the value (a typo such as 0.3 for 0.03?), or pass --force-n "
            "(force_n = true) if you mean it")
    notes = []
    tlo, thi = TABLE_RANGE
    odd = np.unique(arr[(arr < tlo) | (arr > thi)])
    for v in odd:
        notes.append(f"{where} = {v:g} lies outside {tlo:g}–{thi:g}, the natural-channel and "
                     "flood-plain range of Chow (1959) Table 5-6")
    return notes


# --------------------------------------------------------------- Cowan's method
# Arcement & Schneider (1989), Table 1 (channels), as (low, high) ranges.
COWAN_BASE = {  # nb, straight uniform channel in the named material
    "sand": (0.012, 0.026),  # by median grain size 0.2–1.0 mm [memory]
    "earth": (0.025, 0.032),
    "gravel": (0.028, 0.035),
    "cobble": (0.030, 0.050),
    "boulder": (0.040, 0.070),
}
COWAN_IRREGULARITY = {"smooth": (0.0, 0.0), "minor": (0.001, 0.005),
                      "moderate": (0.006, 0.010), "severe": (0.011, 0.020)}
COWAN_VARIATION = {"gradual": (0.0, 0.0), "occasional": (0.001, 0.005),
                   "frequent": (0.010, 0.015)}
COWAN_OBSTRUCTION = {"negligible": (0.0, 0.004), "minor": (0.005, 0.015),
                     "appreciable": (0.020, 0.030), "severe": (0.040, 0.050)}
COWAN_VEGETATION = {"small": (0.002, 0.010), "medium": (0.010, 0.025),  # [memory]
                    "large": (0.025, 0.050), "very-large": (0.050, 0.100)}
COWAN_MEANDER = {"minor": 1.00, "appreciable": 1.15, "severe": 1.30}  # [memory]


@dataclass(frozen=True)
class CowanTerms:
    """Components of Cowan's method (Arcement & Schneider 1989, Eq. 1).

    ``base`` nb, ``irregularity`` n1, ``variation`` n2, ``obstruction`` n3,
    ``vegetation`` n4 (all s/m^(1/3)) and ``meander`` m (dimensionless).
    """

    base: float
    irregularity: float = 0.0
    variation: float = 0.0
    obstruction: float = 0.0
    vegetation: float = 0.0
    meander: float = 1.0

    def n(self) -> float:
        return cowan_n(self.base, self.irregularity, self.variation, self.obstruction,
                       self.vegetation, self.meander)


def cowan_n(base, irregularity=0.0, variation=0.0, obstruction=0.0, vegetation=0.0, meander=1.0,
            *, strict=True) -> float:
    """Cowan's method: n = (nb + n1 + n2 + n3 + n4) m.

    Source: Cowan (1956); Arcement & Schneider (1989), USGS WSP 2339, Eq. 1 and
    Table 1. With ``strict`` each term is checked against the widest range that
    table gives for it (nb 0.012–0.070, n1 0–0.020, n2 0–0.015, n3 0–0.050,
    n4 0.002–0.100 or 0, m 1.00–1.30).
    """
    terms = {"base": base, "irregularity": irregularity, "variation": variation,
             "obstruction": obstruction, "vegetation": vegetation}
    limits = {"base": (0.012, 0.070), "irregularity": (0.0, 0.020), "variation": (0.0, 0.015),
              "obstruction": (0.0, 0.050), "vegetation": (0.0, 0.100)}
    for name, value in terms.items():
        v = float(value)
        lo, hi = limits[name]
        if not np.isfinite(v) or (strict and not lo <= v <= hi) or v < 0:
            raise InputError(
                f"Cowan {name} term {v:g} is outside {lo:g}–{hi:g} "
                "(Arcement & Schneider 1989, Table 1)",
                "check the component, or pass it unchecked if you have a source for it")
    m = float(meander)
    if not np.isfinite(m) or (strict and not 1.0 <= m <= 1.30) or m <= 0:
        raise InputError(f"Cowan meander multiplier {m:g} is outside 1.00–1.30",
                         "use 1.00 (minor), 1.15 (appreciable) or 1.30 (severe meandering)")
    return (float(base) + float(irregularity) + float(variation) + float(obstruction)
            + float(vegetation)) * m


def meander_multiplier(sinuosity: float) -> float:
    """Cowan's m from sinuosity: 1.00 below 1.2, 1.15 to 1.5, 1.30 above
    (Arcement & Schneider 1989, Table 1; thresholds from memory)."""
    if sinuosity < 1.2:
        return 1.00
    if sinuosity < 1.5:
        return 1.15
    return 1.30


def horton_einstein(perimeters, ns) -> float | np.ndarray:
    """Composite n for a section whose parts of the wetted perimeter have
    different n, assuming equal mean velocity in every part (Horton 1933;
    Einstein 1934; Chow 1959, §6-9, Eq. 6-17)::

        n_c = [ Σ P_i n_i^1.5 / Σ P_i ]^(2/3)

    ``perimeters`` and ``ns`` broadcast along their first axis.
    """
    p = np.asarray(perimeters, dtype=float)
    n = np.asarray(ns, dtype=float)
    total = p.sum(axis=0)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.power((p * n ** 1.5).sum(axis=0) / total, 2.0 / 3.0)


def warn_all(notes: list[str]) -> None:
    import warnings

    for note in notes:
        warnings.warn(note, ReachgaugeWarning, stacklevel=3)


# ------------------------------------------------------- n from land cover
def subsection_n_from_classes(classes, offsets, banks, table: dict[int, float], fallback):
    """Manning's n of the left overbank, channel and right overbank of every
    transect from the land-cover classes under it.

    ``classes`` (t, n) integer classes sampled at ``offsets`` (n,) m;
    ``banks`` (t, 2) bank offsets; ``table`` class → n; ``fallback`` (t,) n
    used for samples of unknown class and for a part with no samples.
    Within a part every sample stands for an equal length of ground, so the
    Horton–Einstein composite (Chow 1959, §6-9, Eq. 6-17) reduces to
    n = (mean n_i^1.5)^(2/3). Returns ``(n (t, 3), unknown (t,) bool)``.
    """
    cls = np.asarray(classes)
    t = cls.shape[0]
    fb = np.broadcast_to(np.asarray(fallback, dtype=float), (t,))
    keys = np.array(sorted(table), dtype=np.int64)
    vals = np.array([table[k] for k in keys], dtype=float)
    flat = np.nan_to_num(cls.astype(float), nan=-1).astype(np.int64)
    pos = np.clip(np.searchsorted(keys, flat), 0, max(len(keys) - 1, 0))
    known = (keys.size > 0) & (keys[pos] == flat) if keys.size else np.zeros_like(flat, bool)
    n_at = np.where(known, vals[pos] if keys.size else 0.0, fb[:, None])
    bk = np.asarray(banks, dtype=float).reshape(t, 2)
    x = np.asarray(offsets, dtype=float)[None, :]
    parts = (x < bk[:, :1], (x >= bk[:, :1]) & (x <= bk[:, 1:]), x > bk[:, 1:])
    out = np.empty((t, 3))
    for k, m in enumerate(parts):
        cnt = m.sum(axis=1)
        with np.errstate(invalid="ignore", divide="ignore"):
            mean15 = np.where(m, n_at ** 1.5, 0.0).sum(axis=1) / np.where(cnt > 0, cnt, 1)
        out[:, k] = np.where(cnt > 0, mean15 ** (2.0 / 3.0), fb)
    unknown = (~known & (cls >= 0 if np.issubdtype(cls.dtype, np.integer) else np.isfinite(cls))
               ).any(axis=1)
    return out, unknown


def reach_channel_n(reach_id: str, attributes: dict, *, default: float, n_field=None,
                    cowan_terms: dict | None = None) -> tuple[float, str]:
    """The channel n of a reach and where it came from.

    Priority: Cowan's method terms for the reach (if given), then the reach's
    ``n_field`` value, then ``default``. Returns ``(n, source)`` with source
    ``"cowan"``, ``"field"`` or ``"default"``.
    """
    if cowan_terms and reach_id in cowan_terms:
        t = cowan_terms[reach_id]
        return cowan_n(t["base"], t["irregularity"], t["variation"], t["obstruction"],
                       t["vegetation"], t["meander"]), "cowan"
    if n_field:
        if n_field not in attributes:
            raise InputError(f"n-field {n_field!r} is not a field of the streams",
                             f"fields are: {', '.join(map(str, attributes))}")
        v = attributes[n_field]
        try:
            v = float(v)
        except (TypeError, ValueError):
            v = float("nan")
        if np.isfinite(v) and v > 0:
            return v, "field"
    return float(default), "default"


# --------------------------------------------------------- n of every transect
# The overbanks' n when nothing says otherwise: 0.050, the median of the "normal"
# values of the flood-plain rows of Chow (1959) Table 5-6 (pasture 0.030 to dense
# willows 0.150). Reusing the channel's n would make the plains as smooth as the
# channel (and, from Cowan's method, carry the channel's meander multiplier, which
# Arcement & Schneider 1989 apply to channels only), so overbank conveyance would
# read high and freeboard better than it is.
FLOODPLAIN_N = 0.050
@dataclass(frozen=True)
class RoughnessParams:
    """Where a reach's n comes from: ``n`` the default channel n; ``n_overbank``
    the overbanks' (None: :data:`FLOODPLAIN_N`, or land cover where given);
    ``n_field`` a streams field of channel n."""

    n: float = 0.035
    n_overbank: float | None = None
    n_field: str | None = None


def transect_n(reach_id: str, attributes: dict, t: int, params: RoughnessParams, *,
               cowan_terms=None, classes=None, class_offsets=None, class_table=None,
               banks=None):
    """Manning's n of the left overbank, channel and right overbank of ``t``
    transects, and where the channel n came from.

    The channel n is the reach's (:func:`reach_channel_n`); with land-cover classes
    sampled on the transects (``classes`` (t, k) at ``class_offsets`` (k,), with
    ``class_table`` class → n), each part's n is the Horton–Einstein composite of the
    classes under it (:func:`subsection_n_from_classes`), the channel's only where no
    reach value was given. Returns ``(n (t, 3), source (t,) str, unknown_class (t,) bool)``.
    """
    n_ch, src0 = reach_channel_n(reach_id, attributes, default=params.n, n_field=params.n_field,
                                 cowan_terms=cowan_terms)
    n_ob = params.n_overbank if params.n_overbank is not None else FLOODPLAIN_N
    n = np.tile([n_ob, n_ch, n_ob], (t, 1)).astype(float)
    source = np.full(t, src0, dtype=object)
    unknown = np.zeros(t, dtype=bool)
    if classes is not None and class_table:
        lc, unknown = subsection_n_from_classes(classes, class_offsets, banks, class_table, n_ch)
        n[:, 0], n[:, 2] = lc[:, 0], lc[:, 2]
        if src0 == "default":  # land cover sets the channel n unless a reach value does
            n[:, 1] = lc[:, 1]
        source = np.where(source == "default", "landcover", source + "+landcover")
    return n, source, unknown
