"""One reach from terrain to sections: stations → sampler → thalweg → slope.

:func:`cut_reach` cuts one reach from an open raster (the dataset, or a warped view
of it, in the work CRS: the batch task opens it, :func:`reachgauge.inputs.network.open_raster`)
and reads only windows around the reach. Its parameters are a small
:class:`CuttingParams`.

The steps, for a reach of ``t`` stations:

1. Stations every ``spacing`` m, directions smoothed over ``smoothing`` m
   (:mod:`reachgauge.stations`).
2. The ground within ``snap_distance`` of the line, pits filled, is sampled
   across every transect at once and the thalweg found (:mod:`reachgauge.thalweg`).
3. Each transect is re-centred on its thalweg, cut back where it would cross
   another stream or a neighbouring transect, and sampled from its left end
   (offset 0) to its right end (offset 2 × half-width): the thalweg sits at
   offset = half-width.
4. The longitudinal profile is carved and the slopes fitted (:mod:`reachgauge.slope`).

Geometry is computed in a metre frame: the work CRS scaled by its unit factor
(a similarity transform, so angles and distances are kept). Results go back to
the work CRS. Slope source ``"water"``: hydro-flattened terrain holds the water
surface of the flight, flat across the channel and stepping down along it; the
lowest run on each transect is then that water, so its median elevation
(``Thalweg.level``) is the profile fitted, and every station is flagged
``water-surface``.
"""

from __future__ import annotations

import logging
import math
import traceback
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
import shapely

from reachgauge import flags as F
from reachgauge.inputs import sampler
from reachgauge.kernel import bed
from reachgauge.kernel import sections as K
from reachgauge.transects import slope, stations, thalweg
from reachgauge.errors import InputError
from reachgauge.inputs.network import Reach, RasterInfo
from reachgauge.kernel.crosssection import CrossSection

log = logging.getLogger(__name__)

# A transect needs at least this share of valid samples over its (possibly cut) length.
MIN_VALID_SHARE = 0.5
PROFILE_COLUMNS = ["station", "chainage", "z_raw", "z_carved", "z_used", "carved", "slope"]


@dataclass
class ReachSections:
    """Everything cut from one reach (see the module docstring for the frame).

    Per station ``t``: ``chainage`` m; ``centre_xy`` station on the digitised
    line and ``thalweg_xy`` (work CRS); ``thalweg_z`` m; ``thalweg_shift`` m
    (+ toward the right bank); ``transect_status`` / ``transect_flags`` codes;
    ``slope`` (> 0, after the floor); ``reach_left`` / ``reach_right`` m: how
    far the transect reaches either side of the thalweg (less than half-width
    where it was cut back). ``offsets`` (n,) m from the left end;
    ``elevations`` (t, n) m, NaN where no data or beyond a cut end.
    ``transects``: t LineStrings in the work CRS, left end first, as cut (a cut
    transect's left end is at offset ``half-width − reach_left``, not 0; use
    :meth:`sample_points` for the position of every sample). ``left_normal``
    (t, 2): unit vectors toward the left bank.
    ``snap`` m: the thalweg was sought this far either side of the digitised line.
    ``profile``: one row per station — chainage, z_raw (thalweg, or water level),
    z_carved, z_used (carved when ``carve`` is on), carved (bool), slope.
    """

    reach: Reach
    status: str
    message: str
    chainage: np.ndarray
    offsets: np.ndarray
    elevations: np.ndarray
    transects: list
    centre_xy: np.ndarray
    thalweg_xy: np.ndarray
    thalweg_z: np.ndarray
    thalweg_shift: np.ndarray
    transect_status: np.ndarray
    transect_flags: np.ndarray
    slope: np.ndarray
    reach_slope: float
    profile: pd.DataFrame
    reach_left: np.ndarray = field(default_factory=lambda: np.zeros(0))
    reach_right: np.ndarray = field(default_factory=lambda: np.zeros(0))
    slope_source: str = "bed"
    reach_flags: str = ""
    sample_step: float = math.nan
    left_normal: np.ndarray = field(default_factory=lambda: np.zeros((0, 2)))
    xy_factor: float = 1.0  # metres per work-CRS unit
    snap: float = math.nan  # m: the thalweg was sought this far either side of the line

    @property
    def slope_flags(self) -> str:
        """Flags of the reach slope (``flat-reach``, ``water-surface``)."""
        return self.reach_flags

    def sample_points(self) -> np.ndarray:
        """(t, n, 2) work-CRS coordinates of every sample (offset ``offsets[j]``
        on transect ``i``), including those beyond a cut end."""
        u = self.offsets - 0.5 * (self.offsets[-1] if self.offsets.size else 0.0)
        return stations.transect_points(self.thalweg_xy, self.left_normal, u / self.xy_factor)

    def __len__(self) -> int:
        return int(self.chainage.size)

    def section(self, i: int) -> CrossSection | None:
        """The CrossSection of transect ``i`` (NaN samples dropped), or None
        when the transect's status is not ok."""
        if self.transect_status[i] != "ok":
            return None
        try:
            return CrossSection(self.offsets, self.elevations[i], drop_nan=True)
        except InputError:
            return None

    @classmethod
    def empty(cls, reach: Reach, status: str, message: str) -> "ReachSections":
        z = np.zeros(0)
        return cls(reach=reach, status=status, message=message, chainage=z, offsets=z,
                   elevations=np.zeros((0, 0)), transects=[], centre_xy=np.zeros((0, 2)),
                   thalweg_xy=np.zeros((0, 2)), thalweg_z=z, thalweg_shift=z,
                   transect_status=np.zeros(0, dtype=object),
                   transect_flags=np.zeros(0, dtype=object),
                   slope=z, reach_slope=math.nan, profile=pd.DataFrame(columns=PROFILE_COLUMNS))


@dataclass(frozen=True)
class CuttingParams:
    """What cutting a reach needs (lengths in metres; see
    :class:`reachgauge.config.RunConfig` for each one's meaning)."""

    spacing: float = 20.0
    smoothing: float = 30.0
    snap_distance: float = 8.0
    sample_step: float | None = None
    slope_source: str = "bed"
    carve: bool = True
    slope_window: float = 200.0
    min_slope: float = 1e-4

    @classmethod
    def from_config(cls, cfg) -> "CuttingParams":
        return cls(**{f: getattr(cfg, f) for f in cls.__dataclass_fields__})


def _scale(geom, k):
    return None if geom is None else shapely.transform(geom, lambda c: c * k)


def cut_reach(ds, raster: RasterInfo, reach: Reach, params: CuttingParams,
              neighbours=None) -> ReachSections:
    """Cut, sample and profile one reach from the open raster ``ds`` (described by
    ``raster``). Never raises for a bad reach: an unexpected error gives status
    ``failed`` with the error in ``message``."""
    if reach.status != "ok" or reach.geometry is None:
        return ReachSections.empty(reach, reach.status, reach.message)
    try:
        return _cut(ds, raster, reach, params, neighbours)
    except Exception as exc:  # a bad reach must never fail the batch
        log.exception("reach %s failed", reach.reach_id)
        tb = traceback.format_exception_only(type(exc), exc)[-1].strip()
        return ReachSections.empty(reach, "failed", tb)


def _cut(ds, raster, reach, cfg, neighbours):
    f = raster.xy_factor
    line = _scale(reach.geometry, f)
    hw = float(reach.half_width_m)
    snap = min(cfg.snap_distance, hw)
    step = cfg.sample_step or raster.res
    st = stations.place_stations(line, cfg.spacing, cfg.smoothing)
    t = st.chainage.size
    n_half = max(1, math.ceil(hw / step - 1e-9))
    u = np.linspace(-hw, hw, 2 * n_half + 1)
    near = np.abs(u) <= snap + 1e-9
    # Thalweg search on pit-filled ground, then the final, re-centred sections.
    pts = stations.transect_points(st.xy, st.left, u[near]) / f
    search = sampler.sample(ds, pts, z_factor=raster.z_factor, fill_pits=True)
    tw = thalweg.find_thalweg(u[near], search.z, snap)
    centre = st.xy - tw.shift[:, None] * st.left
    lim = stations.crossing_limits(centre, st.left, hw, st.xy, st.chainage, own=line,
                                   others=_scale(neighbours, f), margin=snap, min_keep=snap,
                                   own_skip=cfg.smoothing / 2)
    pts = stations.transect_points(centre, st.left, u) / f
    got = sampler.sample(ds, pts, z_factor=raster.z_factor)
    inside = (u[None, :] >= -lim.left[:, None] - 1e-9) & (u[None, :] <= lim.right[:, None] + 1e-9)
    z = np.where(inside, got.z, np.nan)
    # the thalweg: the lowest sample within the search distance of the re-centred
    # line, the point the section's water connects to (hydraulics.reach.
    # _channel_thalweg); its elevation, the bed level the sections' depths are measured
    # from, so the long profile and the sections agree
    candidates = np.where(near[None, :] & np.isfinite(z), z, np.inf)
    low_col = np.argmin(candidates, axis=1)
    low = candidates[np.arange(t), low_col]
    # the bed level below the lidar noise (kernel.bed): depths are measured from it.
    # The noise is the raster's, not a transect's: one σ for the reach, pooled over its
    # transects (kernel.bed.reach_noise), so the bed levels, and the slope fitted to
    # them, do not scatter with each transect's own estimate of it
    prof = K.profiles(u, z, low_col)
    bed_z = bed.bed_level(prof, bed.reach_noise(prof))
    tz = np.where(np.isfinite(z[:, n_half]) & np.isfinite(low), bed_z, np.nan)

    status, flag_cols = _section_status(z, low_col, tz, tw, inside, got, lim)

    # Longitudinal profile and slopes.
    water = cfg.slope_source == "water"
    # The profile keeps every transect with ground at its thalweg, "no-depth" ones
    # too: a transect along a road crest has no section but its thalweg is the hump.
    z_raw = np.where(status != "no-data", tw.level if water else tz, np.nan)
    z_carved, carved = slope.carve(st.chainage, z_raw)
    z_used = z_carved if cfg.carve else z_raw
    carved = carved & bool(cfg.carve)  # only a carving that is used moves a station
    reshaped = bool(cfg.carve) and slope.reshaped(z_raw, z_carved)
    fit = slope.profile_slopes(st.chainage, z_used, cfg.slope_window, cfg.min_slope)
    flag_cols += [("carved", carved), ("flat-reach", fit.floored),
                  ("water-surface", np.full(t, water))]
    tflags = F.join_columns(flag_cols, t)

    # one station with ground fits no slope: such a transect has no discharge
    status = np.where((status == "ok") & ~np.isfinite(fit.station), "no-slope", status)
    ok = status == "ok"
    rstatus, rmsg = ("ok", reach.message) if ok.any() else (
        "no-sections", "no transect of the reach has enough terrain data and a slope")
    profile = pd.DataFrame({"station": np.arange(t), "chainage": st.chainage, "z_raw": z_raw,
                            "z_carved": z_carved, "z_used": z_used, "carved": carved,
                            "slope": fit.station})
    lines = stations.transect_lines(centre, st.left, lim.left, lim.right)
    return ReachSections(
        reach=reach, status=rstatus, message=rmsg, chainage=st.chainage, offsets=u + hw,
        elevations=z, transects=list(_scale_array(lines, 1 / f)), centre_xy=st.xy / f,
        thalweg_xy=centre / f, thalweg_z=tz, thalweg_shift=tw.shift, transect_status=status,
        transect_flags=tflags, slope=fit.station, reach_slope=fit.reach, profile=profile,
        reach_left=lim.left, reach_right=lim.right, slope_source=cfg.slope_source,
        reach_flags=F.join(["flat-reach"] * fit.reach_floored + ["water-surface"] * water
                           + ["reshaped-profile"] * reshaped),
        sample_step=float(u[1] - u[0]), left_normal=st.left, xy_factor=f, snap=snap)


def _section_status(z, low_col, tz, tw, inside, got, lim):
    """Each transect's status (ok, no-data, no-depth) and its (flag, mask) columns,
    as arrays over transects."""
    finite = np.isfinite(z)
    enough = ((finite.sum(axis=1) >= np.maximum(3, MIN_VALID_SHARE * inside.sum(axis=1)))
              & np.isfinite(tz))
    # ground must rise above the thalweg on both sides of it (a transect along a
    # hillslope's contour falls away on one side: no section)
    col = np.arange(z.shape[1])[None, :]
    left_max = np.max(np.where((col < low_col[:, None]) & finite, z, -np.inf), axis=1)
    right_max = np.max(np.where((col > low_col[:, None]) & finite, z, -np.inf), axis=1)
    depth = (left_max > tz) & (right_max > tz)
    status = np.where(~(tw.found & enough), "no-data",
                      np.where(depth, "ok", "no-depth")).astype(object)
    return status, [
        ("off-raster", (got.outside & inside).any(axis=1)),
        ("partial-nodata", (got.nodata & inside).any(axis=1)),
        ("shortened", lim.shortened),
        ("crosses-neighbour", lim.crossing),
        ("snap-far", tw.far),
    ]


def _scale_array(geoms, k):
    return shapely.transform(geoms, lambda c: c * k)
