"""Which bankfull figures of a reach the terrain supports: the reach-scale tests of a
pick, the flags of the bankfull figures, and the reach's verdict.

A pick is *published* (its figures written) when the chosen method gave it and no
test below withholds it; it is *trusted* when it is published with confidence
"medium" or "high" (:mod:`reachgauge.hydraulics.bankfull.pick`). The reach's bankfull
figures are medians over the trusted picks only, and a reach whose trusted picks are
not more than half of its transects gets the status ``bankfull-unsupported`` and no
bankfull figures. Every function takes arrays over the transects of one reach and
returns arrays: no loop over transects.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from reachgauge import flags
from reachgauge.hydraulics.bankfull.pick import TRUSTED_CONFIDENCE

# closed-hollow: a neighbour closes the pick's water when its bed rises to within this
# fraction of the pick's depth of the pick's stage
HOLLOW_DEPTH_FRACTION = 0.5
# ... and the hollow counts as closed when it closes on both sides within this many top
# widths of the pick (end to end): a hollow about as long as it is wide is round, a
# channel runs on for many widths
HOLLOW_WIDTHS = 5.0
# the search looks at most this many stations either way (bounds the work per reach)
HOLLOW_MAX_STATIONS = 256
# a reach's bankfull figures need trusted picks on more than this share of its transects
TRUSTED_SHARE = 0.5
# Froude number above which flow at bankfull is supercritical
CRITICAL_FROUDE = 1.0


def closed_hollow(chainage, bed, stage, depth, width, candidates) -> np.ndarray:
    """(t,) True where the pick of a ``candidates`` transect is a closed hollow.

    A channel carries its water along the reach: downstream of a section the bed
    falls, so water standing level at the section's bankfull stage runs on over the
    bed of the next transects. In a closed depression (a kettle, a pond, a pit) the
    same level water is held by higher ground both ways. Transect j *closes* the pick
    of transect i when its bed rises to within HOLLOW_DEPTH_FRACTION of depth_i of
    stage_i; a pick closed on both sides, with the two closing transects no more
    than HOLLOW_WIDTHS top widths apart, is a closed hollow. Level water rather than
    water sloping at the reach's slope: on terrain with no channel the slope is
    itself unreliable (an inflated slope would open every hollow upstream), and a
    channel's falling bed never closes it downstream whatever the slope. A transect
    at a reach end is never closed on its open side, and a road or a culvert the
    terrain shows as a dam closes a channel on one side only. The rule is ours, from
    the definition of a channel as conveying water downstream (common practice).

    chainage, bed, stage, depth, width (m): (t,) arrays (bed NaN where a transect
    has no ground: it closes nothing); candidates: (t,) bool.
    """
    c = np.asarray(chainage, dtype=float)
    t = c.size
    width = np.asarray(width, dtype=float)
    cand = np.asarray(candidates, dtype=bool) & np.isfinite(stage) & (np.nan_to_num(width) > 0)
    if t < 3 or not cand.any():
        return np.zeros(t, bool)
    gaps = np.diff(c)
    step = float(np.min(gaps[gaps > 0])) if (gaps > 0).any() else 1.0
    span = HOLLOW_WIDTHS * float(np.max(np.where(cand, width, 0.0)))
    k = int(min(t - 1, HOLLOW_MAX_STATIONS, np.ceil(span / step)))
    o = np.arange(-k, k + 1)[None, :]
    j = np.arange(t)[:, None] + o
    inside = (j >= 0) & (j < t) & (o != 0)
    jj = np.clip(j, 0, t - 1)
    dist = c[jj] - c[:, None]
    level = np.asarray(stage, float) - HOLLOW_DEPTH_FRACTION * np.asarray(depth, float)
    with np.errstate(invalid="ignore"):
        closes = inside & (np.asarray(bed, float)[jj] >= level[:, None])
    down = np.min(np.where(closes & (o > 0), dist, np.inf), axis=1)
    up = np.max(np.where(closes & (o < 0), dist, -np.inf), axis=1)
    with np.errstate(invalid="ignore"):
        return cand & np.isfinite(down) & np.isfinite(up) & (down - up <= HOLLOW_WIDTHS * width)


def isolated(published, ok) -> np.ndarray:
    """(t,) True where a published pick has an ok neighbouring transect (the station
    before or after it) and no ok neighbour with a published pick. A channel runs
    along the reach, so at transect spacings of a few widths its neighbours show it
    too; a pick neither neighbour confirms is a local feature (the rim of a hollow, a
    ditch crossing the line, a pit), not evidence of a channel. Neighbours without a
    section (no data, no depth, a reach end) are no evidence either way. Ours, common
    practice of reading a reach as a whole."""
    pub = np.asarray(published, dtype=bool)
    ok = np.asarray(ok, dtype=bool)
    if pub.size < 2:
        return np.zeros(pub.size, bool)
    f = np.zeros(1, bool)
    ok_before, ok_after = np.concatenate([f, ok[:-1]]), np.concatenate([ok[1:], f])
    pub_before, pub_after = np.concatenate([f, pub[:-1]]), np.concatenate([pub[1:], f])
    return pub & (ok_before | ok_after) & ~(pub_before | pub_after)


@dataclass(frozen=True)
class Trust:
    """What the terrain supports, per transect (t,) arrays.

    published: bankfull figures written; trusted: published with confidence medium
    or high; confidence: the pick's confidence after the reach-scale tests ("none"
    where not published, "low" where isolated or supercritical, "" where no
    section); and the masks of the flags this module adds (:mod:`reachgauge.flags`):
    zero_depth, closed_hollow, off_channel ("do not use": not published), isolated
    and supercritical ("check": rated "low")."""

    published: np.ndarray
    trusted: np.ndarray
    confidence: np.ndarray
    zero_depth: np.ndarray
    closed_hollow: np.ndarray
    off_channel: np.ndarray
    isolated: np.ndarray
    supercritical: np.ndarray

    def columns(self):
        """(code, mask) columns for :func:`reachgauge.flags.join_columns`."""
        return [("zero-depth", self.zero_depth), ("closed-hollow", self.closed_hollow),
                ("off-channel", self.off_channel), ("isolated-pick", self.isolated),
                ("supercritical", self.supercritical)]

    def with_froude(self, froude) -> "Trust":
        """This assessment with the bankfull Froude numbers (t,) of the published
        picks: a supercritical pick is flagged and rated "low" (:func:`supercritical`)."""
        fast = self.published & supercritical(froude)
        conf = _demote(self.confidence, fast)
        return replace(self, confidence=conf, supercritical=fast,
                       trusted=self.published & np.isin(conf, TRUSTED_CONFIDENCE))


def _demote(conf, mask):
    """Confidence "medium" or "high" lowered to "low" where ``mask``."""
    conf = np.asarray(conf, dtype=object)
    return np.where(mask & np.isin(conf, TRUSTED_CONFIDENCE), "low", conf).astype(object)


def assess(picks, ok, chainage, bed, snap_far) -> Trust:
    """The reach-scale tests of every pick of a reach.

    picks: :class:`~reachgauge.hydraulics.bankfull.pick.Picks`; ok (t,): transects
    with a valid section; chainage, bed (thalweg elevation, NaN where none) m;
    snap_far (t,) bool: the thalweg was found near the snap limit. A pick of the
    method's own is withheld for a bankfull stage not above the thalweg or banks
    with no width between them (``zero-depth``) and for a closed hollow
    (:func:`closed_hollow`); a transect whose thalweg went to the snap limit and
    found no break there is ``off-channel``; a published pick no neighbour confirms
    (:func:`isolated`) is rated "low".
    """
    ok = np.asarray(ok, dtype=bool)
    own = ok & np.asarray(picks.published, dtype=bool)
    depth = picks.stage - picks.profiles.thalweg
    width = picks.right_bank - picks.left_bank
    with np.errstate(invalid="ignore"):
        zero = own & ~((depth > 0) & (width > 0))
    hollow = closed_hollow(chainage, bed, picks.stage, depth, width, own & ~zero)
    off = ok & ~own & np.asarray(snap_far, dtype=bool)
    published = own & ~zero & ~hollow
    alone = isolated(published, ok)
    conf = np.where(ok & ~published, "none", _demote(picks.confidence, alone)).astype(object)
    trusted = published & np.isin(conf, TRUSTED_CONFIDENCE)
    return Trust(published, trusted, conf, zero, hollow, off, alone, np.zeros(ok.size, bool))


def supercritical(froude) -> np.ndarray:
    """(t,) True where the Froude number at bankfull exceeds 1 (NaN: False). Flow at
    bankfull in a natural channel stays near or below critical over a reach (Grant,
    G. E., 1997, "Critical flow constrains flow hydraulics in mobile-bed streams",
    Water Resources Research 33(2) [memory]): a Manning figure above it means the
    slope, the n or the section does not describe a channel (on coarse terrain, a
    whole valley read as one), and its discharge is too high to defend."""
    with np.errstate(invalid="ignore"):
        return np.asarray(froude, dtype=float) > CRITICAL_FROUDE


def verdict(trusted, status, flag_text, t: int):
    """The reach's status and the reason: ``("ok", "")`` when more than TRUSTED_SHARE
    of its ``t`` transects have a trusted pick, else ``("bankfull-unsupported",
    message)`` counting the reasons.

    Why a majority: the reach's figures are medians and stand for the whole reach.
    Had every transect been given a figure, the median of them all would stay within
    the range of the trusted ones only while the trusted ones are more than half of
    them: 50 % is the median's breakdown point (Hampel, F. R., 1971, "A general
    qualitative definition of robustness", Annals of Mathematical Statistics 42
    [memory]). With fewer, the reach is not a channel with a few bad sections but
    mostly ground whose figures cannot be defended, and a median of the few trusted
    ones would stand for a minority of it.

    trusted (t,) bool; status (t,) transect statuses; flag_text (t,) ';'-joined flags.
    """
    k = int(np.count_nonzero(trusted))
    if t == 0 or k > TRUSTED_SHARE * t:
        return "ok", ""
    text = np.asarray(flag_text, dtype=object)
    ok = np.asarray(status, dtype=object) == "ok"
    withheld = flags.contains_any(text, flags.WITHHELD)
    low = ok & ~np.asarray(trusted, bool) & ~withheld
    reasons = [(int(np.count_nonzero(~ok)), "without a section")]
    reasons += [(int(np.count_nonzero(flags.contains(text, code) & ok)), code)
                for code in sorted(flags.WITHHELD)]
    why = [f"{n} {what}" for n, what in reasons if n]
    if low.any():
        codes = ("supercritical", "isolated-pick", "break-unconfirmed", "break-at-end",
                 "spills-first")
        parts = [f"{int(np.count_nonzero(flags.contains(text, c) & low))} {c}" for c in codes]
        parts = [x for x in parts if not x.startswith("0 ")]
        why.append(f"{int(low.sum())} low confidence"
                   + (f" ({', '.join(parts)})" if parts else ""))
    return ("bankfull-unsupported",
            f"{k} of {t} transects have a trusted bankfull pick, not more than half "
            f"({'; '.join(why)}): the reach's bankfull figures are withheld")
