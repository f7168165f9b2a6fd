"""Design stages where a flow runs over a transect's ends: the transect widened.

The design checks (:func:`reachgauge.hydraulics.capacity.check_flows`) solve the
normal-depth stage on the transect as cut, walled at its ends: where the water
reaches an end, that stage counts only the water inside and is an upper bound
(``over_profile``). For a footprint the stage matters where it spreads, so each
such transect is sampled again, centred on the same thalweg point and direction,
``limit / 2`` m either side, and the normal-depth stage (Manning, steady uniform
flow; Chow 1959, §6-2; divided-channel method at the same banks and the same n)
solved again on it. Where the water still reaches an end of the widened transect,
the stage stays an upper bound and the transect is *cut* by the limit.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from reachgauge.inputs import sampler
from reachgauge.kernel import sections as K
from reachgauge.kernel.solver import normal_stage
from reachgauge.transects.stations import transect_points


@dataclass(frozen=True)
class Widened:
    """Stages (m) of the rows asked for, and ``cut``: the water still reaches an end
    of the widened transect (its stage is an upper bound). ``width`` m: the widened
    transect's length."""

    stage: np.ndarray
    cut: np.ndarray
    width: float


def widened_profiles(ds, z_factor, thalweg_xy, left, xy_factor, half_m, step, snap, bed_z):
    """Profiles of transects centred on ``thalweg_xy`` (r, 2; work CRS) along the
    left normals ``left`` (r, 2), sampled every ``step`` m from ``half_m`` left to
    ``half_m`` right. The thalweg is the lowest sample within ``snap`` m of the
    centre, its depths measured from ``bed_z`` (r,) where that is higher
    (:func:`reachgauge.kernel.sections.profiles`). Offsets run from the left end."""
    n_half = max(1, int(np.ceil(half_m / step - 1e-9)))
    u = np.linspace(-half_m, half_m, 2 * n_half + 1)
    f = float(xy_factor)
    pts = transect_points(np.asarray(thalweg_xy, float) * f, np.asarray(left, float), u) / f
    z = sampler.sample(ds, pts, z_factor=z_factor).z
    near = np.abs(u) <= (snap if np.isfinite(snap) else step) + 1e-9
    col = np.argmin(np.where(near[None, :] & np.isfinite(z), z, np.inf), axis=1)
    return K.profiles(u + half_m, z, col, bed_z), half_m


def widen(ds, z_factor, rows, q, sections, limit_m: float) -> Widened:
    """Normal-depth stages of discharges ``q`` (r,) m³/s at transects ``rows`` (r,)
    of a reach, on the transects widened to ``limit_m`` metres in all.

    ``sections``: a :class:`Sections` of the reach (per transect thalweg point,
    left normal, bank offsets, n, slope, bed level and the frame of its offsets)."""
    s = sections
    rows = np.asarray(rows, dtype=int)
    if rows.size == 0:
        return Widened(np.zeros(0), np.zeros(0, bool), limit_m)
    half = 0.5 * limit_m
    p, half = widened_profiles(ds, z_factor, s.thalweg_xy[rows], s.left[rows], s.xy_factor,
                               half, s.step, s.snap, s.bed_z[rows])
    # the banks, from the cut transect's frame (thalweg at s.half) to this one's
    banks = s.banks[rows] - s.half + half
    sol = normal_stage(p, q, s.slope[rows], s.n[rows], banks, above="walled")
    cut = (~sol.reached) | sol.over_profile
    return Widened(sol.stage, cut, 2 * half)


@dataclass(frozen=True)
class Sections:
    """What widening a reach's transects needs (per transect ``t``): ``thalweg_xy``
    (t, 2) work CRS, ``left`` (t, 2) unit normals, ``banks`` (t, 2) m in the cut
    transects' sampling frame (thalweg at ``half``), ``n`` (t, 3), ``slope`` (t,),
    ``bed_z`` (t,) m; ``step`` m between samples, ``snap`` m, ``xy_factor``."""

    thalweg_xy: np.ndarray
    left: np.ndarray
    banks: np.ndarray
    n: np.ndarray
    slope: np.ndarray
    bed_z: np.ndarray
    half: float
    step: float
    snap: float
    xy_factor: float

    @classmethod
    def of(cls, rs, result) -> "Sections":
        """From a reach's :class:`~reachgauge.transects.cutting.ReachSections` and
        :class:`~reachgauge.hydraulics.reach.ReachResult`."""
        tr = result.transects
        n = tr[["n_overbank_left", "n_channel", "n_overbank_right"]].to_numpy(float)
        step = float(rs.sample_step) if np.isfinite(rs.sample_step) else 1.0
        return cls(np.asarray(rs.thalweg_xy, float), np.asarray(rs.left_normal, float),
                   np.asarray(result.banks, float), n, tr["slope"].to_numpy(float),
                   np.asarray(rs.thalweg_z, float), 0.5 * float(np.asarray(rs.offsets)[-1]),
                   step, float(rs.snap), float(rs.xy_factor))
