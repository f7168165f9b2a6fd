"""Build the fictional demo basin: terrain, land cover, centrelines and tables.

    python sample_data/make_basin.py [--out DIR]     (default: sample_data/basin)

Everything here is invented for the demo; no place, survey or organisation is
real. A valley drains east to west at a gentle gradient (0.26–0.40 %) between
hills. Its main stem is cut into three reaches at the mouths of two
tributaries, one from the north and one from the south. Every channel is a
trapezoid with a gently concave bed, cut into a flat floodplain at bank height.
A terrace 1.5 m high
borders the main valley floor on the north (right-bank) side. A road embankment
2 m high crosses the middle reach with no opening in the terrain: its culvert
is invisible to lidar. A stretch of the lower reach is hydro-flattened. The
generator is deterministic: the same files every run (fixed seeds).

How the pieces are built
------------------------
- Channel size. Bankfull (top) width and mean depth come from power laws of the
  drainage area A (km²) at the reach's downstream end, W = 2.70 A^0.352 m and
  D = 0.30 A^0.213 m. Those are the form and coefficients of the national fit
  of Bieger, K., Rathjens, H., Allen, P. M., and Arnold, J. G., 2015,
  "Development and evaluation of bankfull hydraulic geometry relationships for
  the physiographic regions of the United States", JAWRA 51(3). They are used
  here for realism only. The section is a trapezoid of side slope z (H:V)
  whose bed sags in a parabola by δ (0.15 m main stem, 0.10 m tributaries) at
  the centre. Real beds are not planar, and a planar one would look like a
  flattened water surface. Its top width is W and its mean depth A/T is D. The
  side height h and the bottom width b = W − 2 z h come in closed form from
  A = (b + z h) h + (2/3) b δ = W D. The bankfull depth above the thalweg is
  h + δ.
- Meanders. Each centreline is a sine-generated curve: its direction departs
  from the valley axis by ω cos(2π s / M). See Langbein, W. B., and Leopold,
  L. B., 1966, "River meanders — theory of minimum variance", USGS Professional
  Paper 422-H. Over whole wavelengths its sinuosity is 1 / J0(ω), so ω is
  solved from the target sinuosity with scipy's brentq. For irregularity, ω
  wanders by 8 % and M by 20 % (smooth seeded noise), and the belt's long-scale
  position is held near the valley axis with a slow drift of about 10 m. The
  sinuosity in truth.json is the one measured on the built line.
- Channel cut. Each pixel's distance to each true centreline is exact: the
  nearest vertex of a 0.5 m polyline comes from scipy.spatial.cKDTree, then the
  distance to its two segments is taken. The depth of cut is the largest of the
  channels' section depths below the valley surface. Where a tributary meets
  the main stem the deeper cut wins, and nothing is cut twice.
- Valley surface. The main valley floor is a function of x only (constant
  down-valley slope per reach, with breaks at the confluences). The terrace is
  a smooth 1.5 m step and the walls rise smoothly, W_H t²/(t² + L²). Each
  tributary valley is the main floor plus its own down-valley ramp beyond the
  main floor's edge. The terrain is the lowest of these surfaces, so the
  tributary floors meet the main floor without a step.
- Embankment. A 6 m crest at floodplain + 2 m, with 1:1 side slopes (a base
  about 10 m wide). It is at grade, 0.3 m above the smoothed ground, where the
  road climbs the hills.
- Hydro-flattening. Over a stretch of reach M3, every pixel within the wetted
  width (0.30 m above the thalweg at the flight) takes the water-surface elevation of its
  nearest centreline point. That surface is flat across the channel, falls
  steadily downstream, and carries no noise, as in processed lidar. Elsewhere
  the terrain shows the bed, as if flown at a dry or bathymetric stage.
- Noise. Seeded Gaussian noise by land cover: 3–5 cm on open ground, 6–8 cm
  under brush, 12 cm under timber. There are also a few single-pixel pits and
  spikes, and one nodata patch at the west edge.
- Centrelines. Digitised from the true lines with vertices every 10–15 m,
  Gaussian jitter (SD 1 m), and a systematic offset on M1, N1 and S1. The offset
  tapers to zero within 40 m of the ends, and the junction nodes are shared. M2
  and N1 are digitised upstream (reversed).

Manning's n of the land-cover classes (landcover_n.csv): normal values of Chow,
V. T., 1959, Open-Channel Hydraulics, Table 5-6, as encoded in
fluids.open_flow.n_natural:
  1 channel          0.040  "Minor streams: Clean, winding, some pools and shoals"
  2 pasture          0.030  "Flood plains: Pasture, no brush, short grass"
  3 row crops        0.035  "Flood plains: Cultivated areas, mature row crops"
  4 light brush      0.060  "Flood plains: Brush, light brush and trees, in summer"
  5 dense brush      0.100  "Flood plains: Brush, medium to dense brush, in summer"
  6 timber           0.100  "Flood plains: Trees, heavy stand of timber, a few down
                            trees, little undergrowth, flood stage below branches"
  7 road             0.030  "Flood plains: Cultivated areas, no crop"
The road class covers the whole embankment footprint, crest and side slopes. It
is mostly bare or grassed earth fill, so the bare cultivated-ground row fits it
better than a paving row (fluids' "Asphalt, Rough" is 0.016). The paved crest
is wetted only once a flood overtops the road.

The "measured" flows in observations.csv are Manning's equation on the true
section at the stated depth above the thalweg; the stage column is that depth
above the true thalweg elevation (floodplain at the channel less the bank height). They use n = 0.038 and the
reach's mean channel slope (bed fall over channel length), so that calibration
can recover n. The
Cowan terms in cowan.csv lie inside the ranges of Arcement, G. J., and
Schneider, V. R., 1989, USGS Water-Supply Paper 2339, Table 1. Each sums to
about that n, and the meander factor follows each reach's sinuosity.

Regional curves. The streams carry each reach's drainage area (``drainage_km2``),
so the run fits its own curves over the five reaches: five points are few (the
bands use Student's t with 3 degrees of freedom and are wide), enough to show the
fit, not a regional study. regional_curves.csv holds two published curves to
compare with; they are INVENTED for the demo (no real region, study or agency),
one in SI and one in US units (ft, ft³/s against mi²).
"""

from __future__ import annotations

import argparse
import json
import time
from dataclasses import dataclass
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
DEFAULT_OUT = HERE / "basin"

# ------------------------------------------------------------------ the grid
CRS = "EPSG:32632"
RES = 2.0                      # m
X0, Y_TOP = 420_000.0, 5_120_800.0
NX, NY = 1200, 800             # 2.4 km × 1.6 km
X1, Y_BOT = X0 + NX * RES, Y_TOP - NY * RES
NODATA = -9999.0
SEED = 20_240_611

# ---------------------------------------------------------------- the valley
AXIS_Y = 5_120_060.0           # main valley axis (runs east to west)
Z_OUTLET = 212.0               # floodplain elevation at the west edge, m
FLOOR_SOUTH = -130.0           # v of the south floodplain edge (v = y - AXIS_Y)
TERRACE_TOE, TERRACE_RAMP, TERRACE_H = 70.0, 8.0, 1.5
TERRACE_END = 190.0            # north valley wall starts here
WALL_H, WALL_L = 45.0, 300.0
TRIB_FLOOR_HALF, TRIB_WALL_H, TRIB_WALL_L = 30.0, 30.0, 160.0
SIDE_SLOPE = {"main": 2.0, "trib": 1.5}     # H:V
BED_DIP = {"main": 0.15, "trib": 0.10}      # m: a gently concave bed, deepest at the centre

# regional curves (Bieger et al. 2015, national fit; realism only)
WIDTH_COEF, WIDTH_EXP = 2.70, 0.352
DEPTH_COEF, DEPTH_EXP = 0.30, 0.213

# published regional curves to compare the run's own fit with (regional_curves.csv):
# INVENTED for the demo, no real region, study or agency; name, variable, a, b, units,
# area_min, area_max (us rows: ft, ft², ft³/s against mi²)
PUBLISHED_CURVES = (
    ("invented-valley-A", "width", 2.5, 0.36, "si", 5.0, 200.0),
    ("invented-valley-A", "depth", 0.28, 0.22, "si", 5.0, 200.0),
    ("invented-valley-A", "area", 0.70, 0.58, "si", 5.0, 200.0),
    ("invented-uplands-B", "width", 13.0, 0.34, "us", 2.0, 60.0),
    ("invented-uplands-B", "discharge", 62.5, 0.50, "us", 2.0, 60.0),
)

N_OBSERVED = 0.038             # n used to compute the "measured" flows
N_CHANNEL_TABLE = 0.040        # landcover class 1 (Chow 1959, Table 5-6)


@dataclass(frozen=True)
class ReachSpec:
    reach_id: str
    name: str
    drainage_km2: float
    sinuosity: float          # target; the built value is measured
    wavelength: float         # meander wavelength along the channel, m
    valley_slope: float       # main stem: down-valley slope; tributary: own ramp
    offset: float             # systematic digitising offset, m (+ right looking downstream)
    reversed: bool            # digitised upstream
    flow_ratios: tuple        # q2, q10, q100 as fractions of bankfull capacity (n 0.040)


REACHES = (
    ReachSpec("M1", "Main stem, upper", 80.0, 1.18, 175.0, 0.0040, 4.0, False, (0.45, 1.1, 2.5)),
    ReachSpec("M2", "Main stem, middle", 105.0, 1.25, 190.0, 0.0032, 0.0, True, (0.5, 1.2, 2.7)),
    ReachSpec("M3", "Main stem, lower", 124.0, 1.32, 205.0, 0.0026, 0.0, False, (0.45, 1.0, 2.3)),
    # a spring-fed northern tributary and a small southern one with muted floods (invented)
    ReachSpec("N1", "North tributary", 22.0, 1.12, 95.0, 0.0045, 2.5, True, (0.3, 0.42, 0.55)),
    ReachSpec("S1", "South tributary", 14.0, 1.12, 85.0, 0.0050, -3.0, False, (0.28, 0.4, 0.52)),
)
SPEC = {r.reach_id: r for r in REACHES}
JUNCTION_X = {"N1": 421_750.0, "S1": 420_800.0}         # targets; the nearest apex is used
TRIB_HEADING = {"N1": np.deg2rad(60.0), "S1": np.deg2rad(-70.0)}   # upstream, from east
ROAD = ((421_330.0, Y_BOT - 20.0), (421_390.0, Y_TOP + 20.0))
ROAD_HEIGHT, ROAD_CREST_HALF, ROAD_SIDE = 2.0, 3.0, 1.0
FLAT_REACH, FLAT_FROM, FLAT_TO, FLAT_DEPTH = "M3", 300.0, 600.0, 0.30
# gaugings at moderately high in-bank flows (0.6–0.85 of bankfull depth)
OBSERVATIONS = (("M1", 250.0, 0.60), ("M1", 520.0, 0.75), ("M2", 850.0, 0.70),
                ("M3", 800.0, 0.75))
LANDCOVER = (  # class, name, n (Chow 1959 Table 5-6 normal values, see docstring)
    (1, "channel", 0.040), (2, "short-grass pasture", 0.030), (3, "row crops", 0.035),
    (4, "light brush", 0.060), (5, "dense brush", 0.100), (6, "timber", 0.100),
    (7, "road", 0.030))
NOISE_SD = {1: 0.03, 2: 0.04, 3: 0.05, 4: 0.06, 5: 0.08, 6: 0.12, 7: 0.03}
COWAN = {  # base, irregularity, variation, obstruction, vegetation (m from sinuosity)
    "M1": (0.028, 0.003, 0.002, 0.002, 0.003), "M2": (0.025, 0.002, 0.001, 0.002, 0.003),
    "M3": (0.025, 0.002, 0.001, 0.002, 0.003), "N1": (0.030, 0.003, 0.001, 0.002, 0.002),
    "S1": (0.029, 0.004, 0.001, 0.002, 0.002)}


def rng(purpose: int) -> np.random.Generator:
    """One seeded stream per purpose, so that changing one leaves the others alone."""
    return np.random.default_rng([SEED, purpose])


def smoothstep(t):
    t = np.clip(t, 0.0, 1.0)
    return t * t * (3.0 - 2.0 * t)


# ------------------------------------------------------------ channel shape
def regional_channel(area_km2: float, side_slope: float, bed_dip: float = 0.0) -> dict:
    """Channel with the regional-curve top width W and mean depth D (A / T = D).

    Width and depth from Bieger et al. (2015)'s national fit (m, km²). The
    section is a trapezoid of side slope z whose bed, of width b, sags in a
    parabola to ``bed_dip`` δ below its edges at the centre. With side height
    h (bed edge to bank top), A = (b + z h) h + (2/3) b δ and b = W − 2 z h, so
    A = W D gives z h² − (W − 4 z δ / 3) h + W (D − 2 δ / 3) = 0 (smaller root).
    Bankfull depth above the thalweg is h + δ.
    """
    w = WIDTH_COEF * area_km2 ** WIDTH_EXP
    d = DEPTH_COEF * area_km2 ** DEPTH_EXP
    z, dip = side_slope, bed_dip
    p = w - 4.0 * z * dip / 3.0
    disc = p * p - 4.0 * z * w * (d - 2.0 * dip / 3.0)
    h = (p - np.sqrt(disc)) / (2.0 * z) if disc >= 0 else np.nan
    if not (disc >= 0 and h > 0 and w - 2.0 * z * h > 0):
        raise ValueError(f"no channel of side slope {z:g} and bed dip {dip:g} m has top width "
                         f"{w:.2f} m and mean depth {d:.2f} m; use a gentler side slope below "
                         f"{w / (4.0 * d):.2f} or a smaller dip")
    return {"top_width": w, "mean_depth": d, "side_height": h, "bed_dip": dip,
            "bank_height": h + dip, "bottom_width": w - 2.0 * z * h, "side_slope": z}


def parabola_length(width, sag):
    """Arc length of a parabola across ``width`` with ``sag`` at its middle (calculus:
    (b² / 8δ) [U √(1 + U²) + asinh U] with U = 4δ / b; the chord when δ = 0)."""
    if sag == 0:
        return width
    u = 4.0 * sag / width
    return width * width / (8.0 * sag) * (u * np.sqrt(1.0 + u * u) + np.arcsinh(u))


def section(ch: dict, y):
    """Area, wetted perimeter and top width of a channel (``regional_channel``) at
    depth y above its thalweg, for bed_dip <= y (standard geometry: a trapezoid over
    a parabolic bed segment, whose area is 2/3 of its bounding rectangle)."""
    b, z, dip = ch["bottom_width"], ch["side_slope"], ch["bed_dip"]
    y = np.asarray(y, dtype=float)
    if np.any(y < dip):
        raise ValueError("depth below the bed dip: water inside the bed's sag only")
    yt = y - dip
    area = (b + z * yt) * yt + 2.0 / 3.0 * b * dip
    perimeter = parabola_length(b, dip) + 2.0 * yt * np.sqrt(1.0 + z * z)
    return area, perimeter, b + 2.0 * z * yt


def omega_for_sinuosity(sinuosity: float) -> float:
    """ω of the sine-generated curve with sinuosity 1 / J0(ω) (Langbein & Leopold 1966)."""
    from scipy.optimize import brentq
    from scipy.special import j0

    return brentq(lambda w: 1.0 / j0(w) - sinuosity, 1e-6, 2.0)


def sine_generated(start, heading, length, wavelength, omega, step=0.5):
    """Vertices (k, 2) and chainage (k,) of a sine-generated curve.

    Direction = heading(s) + ω(s) cos(2π Φ(s)) with Φ' = 1 / M(s)
    (M the wavelength along the channel, m). ``heading``, ``wavelength`` and
    ``omega`` are each a number or a function of the chainage array s (m).
    """
    s = np.arange(0.0, length + step, step)

    def along(v):
        return np.asarray(v(s), dtype=float) if callable(v) else np.full_like(s, float(v))

    cycles = np.concatenate([[0.0], np.cumsum(step / along(wavelength)[:-1])])
    theta = along(heading) + along(omega) * np.cos(2.0 * np.pi * cycles)
    mid = 0.5 * (theta[1:] + theta[:-1])  # midpoint rule: second-order accurate
    xy = np.empty((s.size, 2))
    xy[0] = start
    xy[1:, 0] = start[0] + np.cumsum(step * np.cos(mid))
    xy[1:, 1] = start[1] + np.cumsum(step * np.sin(mid))
    return xy, s


def wobble(purpose, scale_m, step=0.5, length=5000.0):
    """A smooth seeded random function of chainage (unit SD, correlation ~scale_m):
    natural meanders are not a pure sine, so ω, M and the belt's position wander a little."""
    from scipy.ndimage import gaussian_filter1d

    grid = np.arange(0.0, length, step)
    f = gaussian_filter1d(rng(purpose).standard_normal(grid.size), scale_m / step, mode="reflect")
    f /= f.std()
    return lambda s: np.interp(s, grid, f)


def recentre(xy, s, origin, direction, window_m, drift=None, keep_start=0.0):
    """Shift a curve sideways so that its running mean (a Gaussian of SD ``window_m``,
    about one wavelength) follows the axis through ``origin`` along ``direction``, plus
    an optional ``drift(s)`` in metres to the left. A varying ω and M would
    otherwise walk the meander belt off the valley floor. Within ``keep_start``
    of the start the shift tapers to 0, so a tributary keeps its mouth."""
    from scipy.ndimage import gaussian_filter1d

    d = np.asarray(direction, dtype=float) / np.hypot(*direction)
    left = np.array([-d[1], d[0]])
    q = (xy - origin) @ left
    # a Gaussian of SD one wavelength passes exp(-2π²) ≈ 3e-9 of the meanders themselves
    shift = gaussian_filter1d(q, window_m / (s[1] - s[0]), mode="nearest")
    if drift is not None:
        shift = shift - drift(s)
    if keep_start > 0:
        shift = shift * smoothstep(s / keep_start)
    return xy - shift[:, None] * left


def arc_length(xy):
    """Chainage (m) of every vertex of a polyline."""
    return np.concatenate([[0.0], np.cumsum(np.hypot(*np.diff(xy, axis=0).T))])


def line_length(xy):
    return float(arc_length(xy)[-1])


# ---------------------------------------------------------------- planform
@dataclass
class Planform:
    main_xy: np.ndarray          # dense true main stem, east to west (beyond both edges)
    main_s: np.ndarray
    junction_s: dict             # trib id -> chainage of its mouth on the dense main stem
    trib_xy: dict                # trib id -> dense true line from its mouth upstream
    trib_s: dict
    trib_axis: dict              # trib id -> (mouth xy, unit vector upstream, u at floor edge)
    reach_lines: dict            # reach id -> true line inside the raster, downstream order
    dims: dict                   # reach id -> regional_channel(...)


def build_planform() -> Planform:
    """True centrelines: the main stem, its confluences and the two tributaries."""
    kind = {r.reach_id: "main" if r.reach_id[0] == "M" else "trib" for r in REACHES}
    dims = {r.reach_id: regional_channel(r.drainage_km2, SIDE_SLOPE[kind[r.reach_id]],
                                         BED_DIP[kind[r.reach_id]]) for r in REACHES}
    om = {r.reach_id: omega_for_sinuosity(r.sinuosity) for r in REACHES}
    # approximate chainages of the confluences, to switch ω and M between reaches
    s1 = (X1 + 150.0 - JUNCTION_X["N1"]) * SPEC["M1"].sinuosity
    s2 = s1 + (JUNCTION_X["N1"] - JUNCTION_X["S1"]) * SPEC["M2"].sinuosity
    anchors = np.array([0.0, s1 - 60, s1 + 60, s2 - 60, s2 + 60, 1e5])

    def per_reach(key, purpose):
        a, b, c = (getattr(SPEC[k], key) if key != "omega" else om[k] for k in ("M1", "M2", "M3"))
        wob, spread = wobble(purpose, 250.0), 0.2 if key == "wavelength" else 0.08
        return lambda s: np.interp(s, anchors, [a, a, b, b, c, c]) * (1.0 + spread * wob(s))

    start = np.array([X1 + 150.0, AXIS_Y])
    main_xy, main_s = sine_generated(start, np.pi, 3500.0,
                                     per_reach("wavelength", 11), per_reach("omega", 12))
    drift = wobble(13, 400.0)
    main_xy = recentre(main_xy, main_s, start, (-1.0, 0.0), 190.0, lambda s: 10.0 * drift(s))
    main_s = arc_length(main_xy)
    v = main_xy[:, 1] - AXIS_Y
    interior = np.arange(1, v.size - 1)
    north = interior[(v[1:-1] > v[:-2]) & (v[1:-1] >= v[2:])]
    south = interior[(v[1:-1] < v[:-2]) & (v[1:-1] <= v[2:])]
    junction_s, trib_xy, trib_s, trib_axis = {}, {}, {}, {}
    for tid, apexes in (("N1", north), ("S1", south)):
        k = apexes[np.argmin(np.abs(main_xy[apexes, 0] - JUNCTION_X[tid]))]
        junction_s[tid] = main_s[k]
        mouth = main_xy[k].copy()
        k0 = 20 if tid == "N1" else 30
        w_m, w_o, w_h = (wobble(k0 + i, 150.0) for i in range(3))
        xy, s = sine_generated(mouth, TRIB_HEADING[tid], 1400.0,
                               lambda s: SPEC[tid].wavelength * (1.0 + 0.2 * w_m(s)),
                               lambda s: om[tid] * (1.0 + 0.08 * w_o(s)))
        xy = recentre(xy, s, mouth, (np.cos(TRIB_HEADING[tid]), np.sin(TRIB_HEADING[tid])),
                      SPEC[tid].wavelength, lambda s: 5.0 * w_h(s), keep_start=100.0)
        trib_xy[tid], trib_s[tid] = xy, arc_length(xy)
        a = np.array([np.cos(TRIB_HEADING[tid]), np.sin(TRIB_HEADING[tid])])
        # where the tributary's axis leaves the main valley floor
        uu = np.arange(0.0, 600.0, 0.5)
        ax_x, ax_v = mouth[0] + uu * a[0], mouth[1] - AXIS_Y + uu * a[1]
        edge_south, edge_toe, _ = valley_edges(ax_x)
        u_edge = uu[np.argmax((ax_v >= edge_toe) if a[1] > 0 else (ax_v <= edge_south))]
        trib_axis[tid] = (mouth, a, float(u_edge))

    lines = {}
    inside = (main_xy[:, 0] <= X1 - 10.0) & (main_xy[:, 0] >= X0 + 10.0)
    ks = np.flatnonzero(inside)
    kj1 = int(np.searchsorted(main_s, junction_s["N1"]))
    kj2 = int(np.searchsorted(main_s, junction_s["S1"]))
    lines["M1"] = main_xy[ks[0]:kj1 + 1]
    lines["M2"] = main_xy[kj1:kj2 + 1]
    lines["M3"] = main_xy[kj2:ks[-1] + 1]
    for tid in ("N1", "S1"):
        xy = trib_xy[tid]
        ok = (xy[:, 1] <= Y_TOP - 10.0) & (xy[:, 1] >= Y_BOT + 10.0)
        last = int(np.argmin(ok)) if not ok.all() else len(ok)
        lines[tid] = xy[:last][::-1].copy()       # downstream order: ends at the mouth
    return Planform(main_xy, main_s, junction_s, trib_xy, trib_s, trib_axis, lines, dims)


# --------------------------------------------------------------- the valley
def floor_z(x, plan: Planform):
    """Main valley floor (floodplain) elevation, m: a function of x only, with
    a constant down-valley slope per reach and breaks at the confluences."""
    xj1 = plan.main_xy[np.searchsorted(plan.main_s, plan.junction_s["N1"]), 0]
    xj2 = plan.main_xy[np.searchsorted(plan.main_s, plan.junction_s["S1"]), 0]
    xs = np.array([X0 - 1000.0, xj2, xj1, X1 + 1000.0])
    slopes = np.array([SPEC["M3"].valley_slope, SPEC["M2"].valley_slope, SPEC["M1"].valley_slope])
    z_at_x0 = Z_OUTLET
    zs = np.empty(4)
    zs[0] = z_at_x0 - 1000.0 * slopes[0]
    zs[1:] = zs[0] + np.cumsum(np.diff(xs) * slopes)
    return np.interp(x, xs, zs)


def valley_edges(x):
    """v of the south floodplain edge, the terrace toe and the north wall foot at x:
    gently wavy, since no valley edge is ruled straight."""
    t = 2.0 * np.pi * (np.asarray(x, dtype=float) - X0)
    south = FLOOR_SOUTH + 15.0 * np.sin(t / 900.0 + 2.0)
    toe = TERRACE_TOE + 10.0 * np.sin(t / 700.0) + 4.0 * np.sin(t / 260.0 + 1.0)
    foot = TERRACE_END + 20.0 * np.sin(t / 1100.0 + 0.5)
    return south, toe, foot


def wall_rise(t, height, length):
    t = np.maximum(t, 0.0)
    return height * t * t / (t * t + length * length)


def valley_surface(x, y, plan: Planform):
    """Valley surface without channels or noise, m; and the wall part of it
    (0 on valley floors and the terrace, rising on the hillsides)."""
    fz = floor_z(x, plan)
    v = y - AXIS_Y
    south, toe, foot = valley_edges(x)
    wall = wall_rise(v - foot, WALL_H, WALL_L) + wall_rise(south - v, WALL_H, WALL_L)
    surface = fz + TERRACE_H * smoothstep((v - toe) / TERRACE_RAMP) + wall
    wall_part = wall
    for tid, (mouth, a, u_edge) in plan.trib_axis.items():
        rx, ry = x - mouth[0], y - mouth[1]
        u = rx * a[0] + ry * a[1]
        w = np.abs(rx * a[1] - ry * a[0])
        rise = wall_rise(np.maximum(w - TRIB_FLOOR_HALF, 0.0) + np.maximum(-u, 0.0),
                         TRIB_WALL_H, TRIB_WALL_L)
        trib = fz + SPEC[tid].valley_slope * np.maximum(u - u_edge, 0.0) + rise
        lower = trib < surface
        surface = np.where(lower, trib, surface)
        wall_part = np.where(lower, rise, wall_part)
    return surface, wall_part


# ------------------------------------------------------- distance to a line
def nearest_on_line(line_xy, line_s, px, py, bound):
    """Exact distance (m) from points to a dense polyline, and the chainage of
    the nearest point; inf / NaN beyond ``bound``."""
    from scipy.spatial import cKDTree

    pts = np.column_stack([px, py])
    dist, k = cKDTree(line_xy).query(pts, distance_upper_bound=bound)
    ok = np.isfinite(dist)
    d = np.full(px.shape, np.inf)
    s = np.full(px.shape, np.nan)
    kk, p = k[ok], pts[ok]
    best_d, best_s = dist[ok], line_s[kk]
    n = len(line_xy)
    for j in (kk - 1, kk):                 # the two segments at the nearest vertex
        valid = (j >= 0) & (j + 1 < n)
        j = np.clip(j, 0, n - 2)
        a, ab = line_xy[j], line_xy[j + 1] - line_xy[j]
        seg2 = (ab * ab).sum(axis=1)
        t = np.clip(((p - a) * ab).sum(axis=1) / seg2, 0.0, 1.0)
        dd = np.hypot(*(p - a - t[:, None] * ab).T)
        better = valid & (dd < best_d)
        best_d = np.where(better, dd, best_d)
        best_s = np.where(better, line_s[j] + t * np.sqrt(seg2), best_s)
    d[ok], s[ok] = best_d, best_s
    return d, s


def main_reach_at(s, plan: Planform):
    """Index 0, 1, 2 (M1, M2, M3) of the main-stem reach at dense chainage s."""
    return np.searchsorted([plan.junction_s["N1"], plan.junction_s["S1"]], s, side="right")


def channel_params(cid, s, plan: Planform):
    """Half bottom width, side height, side slope and bed dip along channel ``cid``
    (arrays for the main stem, chosen by reach from the chainage s)."""
    keys = ("bottom_width", "side_height", "side_slope", "bed_dip")
    if cid == "main":
        i = main_reach_at(np.nan_to_num(s), plan)
        b, h, z, dip = (np.choose(i, [plan.dims[r][k] for r in ("M1", "M2", "M3")]) for k in keys)
    else:
        b, h, z, dip = (plan.dims[cid][k] for k in keys)
    return 0.5 * b, h, z, dip


def cut_depth(d, hb, h, z, dip):
    """Depth of the channel below the floodplain at distance d from its centreline:
    parabolic bed (h + dip at the centre, h at the bed's edges), then 1:z sides."""
    bed = h + dip * (1.0 - np.minimum(d / hb, 1.0) ** 2)
    return np.where(d < hb, bed, h * np.clip(1.0 - (d - hb) / (z * h), 0.0, 1.0))


# -------------------------------------------------------------- the rasters
def pixel_centres():
    x = X0 + (np.arange(NX) + 0.5) * RES
    y = Y_TOP - (np.arange(NY) + 0.5) * RES
    return np.meshgrid(x, y)


def smooth_field(purpose, sigma_px):
    """Seeded Gaussian random field with unit standard deviation."""
    from scipy.ndimage import gaussian_filter

    f = gaussian_filter(rng(purpose).standard_normal((NY, NX)), sigma_px, mode="reflect")
    return f / f.std()


def build_rasters(plan: Planform):
    """Terrain (m, float64 before quantising) and land cover (uint8), plus facts for truth."""
    from scipy.ndimage import map_coordinates, maximum_filter1d, uniform_filter1d

    gx, gy = pixel_centres()
    base, wall = valley_surface(gx, gy, plan)
    # distance to every channel; depth of cut = the deepest channel section there
    dist, chain, cut, half_top = {}, {}, np.zeros_like(gx), np.full_like(gx, np.inf)
    lines = {"main": (plan.main_xy, plan.main_s)}
    lines.update({t: (plan.trib_xy[t], plan.trib_s[t]) for t in ("N1", "S1")})
    for cid, (xy, s) in lines.items():
        d, sc = nearest_on_line(xy, s, gx.ravel(), gy.ravel(), bound=80.0)
        d, sc = d.reshape(gx.shape), sc.reshape(gx.shape)
        hb, h, z, dip = channel_params(cid, sc, plan)
        cut = np.maximum(cut, cut_depth(d, hb, h, z, dip))
        half_top = np.minimum(half_top, d - (hb + z * h))   # distance beyond the bank top
        dist[cid], chain[cid] = d, sc

    hills = smoothstep((wall - 1.0) / 6.0)
    near_bank = smoothstep(half_top / 12.0)     # no micro-relief next to a channel
    # hill relief scales with the wall height, so it never digs below the valley floor
    relief = (np.minimum(0.2 * wall, 4.0) * smooth_field(1, 30)
              + np.minimum(0.05 * wall, 0.5) * smooth_field(2, 5))
    terrain = (base + relief
               + (1.0 - hills) * near_bank * 0.06 * smooth_field(3, 12) - cut)

    # road embankment: crest at floodplain + 2 m, at grade 0.3 m above the ground on the hills
    (ax, ay), (bx, by) = ROAD
    rl = np.hypot(bx - ax, by - ay)
    ux, uy = (bx - ax) / rl, (by - ay) / rl
    t_along = np.arange(0.0, rl, RES)
    rx, ry = ax + t_along * ux, ay + t_along * uy
    ground = map_coordinates(terrain, [(Y_TOP - ry) / RES - 0.5, (rx - X0) / RES - 0.5],
                             order=1, mode="nearest")
    ground = uniform_filter1d(maximum_filter1d(ground, 15), 25)
    crest = np.maximum(floor_z(rx, plan) + ROAD_HEIGHT, ground + 0.3)
    tp = (gx - ax) * ux + (gy - ay) * uy
    dr = np.abs((gx - ax) * uy - (gy - ay) * ux)
    embankment = np.interp(tp, t_along, crest) - ROAD_SIDE * np.maximum(dr - ROAD_CREST_HALF, 0.0)
    terrain = np.maximum(terrain, embankment)

    # hydro-flattened stretch on M3: flat across the wetted width, falling downstream
    sj = plan.junction_s["S1"]          # M3 starts at the mouth of S1
    ch = plan.dims[FLAT_REACH]
    wet_half = 0.5 * section(ch, FLAT_DEPTH)[2]
    sm = chain["main"]
    water = ((sm >= sj + FLAT_FROM) & (sm <= sj + FLAT_TO) & (dist["main"] <= wet_half)
             & (dist["main"] <= dist["N1"]) & (dist["main"] <= dist["S1"]))
    cx = np.interp(sm[water], plan.main_s, plan.main_xy[:, 0])
    terrain[water] = floor_z(cx, plan) - ch["bank_height"] + FLAT_DEPTH

    cover = land_cover(gx, gy, dist, half_top, hills, dr, plan)
    sd = np.zeros_like(terrain)
    for cls, value in NOISE_SD.items():
        sd[cover == cls] = value
    sd[water] = 0.0                            # processed water surfaces carry no noise
    terrain = np.round(terrain + sd * rng(4).standard_normal(terrain.shape), 2)

    # single-pixel pits and spikes (low and high lidar outliers), some inside channels
    g = rng(5)
    cand = np.flatnonzero(~water.ravel())
    spots = g.choice(cand, 60, replace=False)
    in_channel = np.flatnonzero(((half_top < 0) & ~water).ravel())
    spots = np.concatenate([spots, g.choice(in_channel, 6, replace=False)])
    jumps = np.concatenate([-g.uniform(0.3, 1.5, 30), g.uniform(0.5, 3.0, 30),
                            -g.uniform(0.3, 1.0, 6)])
    terrain.ravel()[spots] = np.round(terrain.ravel()[spots] + jumps, 2)

    # a nodata patch at the west edge (a gap between flight lines), on the south floodplain
    v = gy - AXIS_Y
    near_edge = plan.main_xy[:, 0] < X0 + 60.0
    v_top = (plan.main_xy[near_edge, 1] - AXIS_Y).min() - 25.0     # clear of the channel
    gap = ((gx < X0 + 36.0 + 10.0 * np.sin((gy - Y_BOT) / 15.0))
           & (v > v_top - 65.0 + 6.0 * np.cos((gx - X0) / 9.0)) & (v < v_top))
    terrain[gap] = NODATA
    cover[gap] = 0
    facts = {"water_pixels": int(water.sum()), "gap_pixels": int(gap.sum()),
             "gap_min_distance_to_channel": float(dist["main"][gap].min()),
             "wet_width": 2.0 * wet_half,
             "road_crest": (t_along, crest, (ax, ay), (ux, uy))}
    return terrain.astype(np.float32), cover, facts


def land_cover(gx, gy, dist, half_top, hills, dr, plan):
    """Classes 1–7 (LANDCOVER): channel, pasture, row crops, brush, timber, road."""
    v = gy - AXIS_Y
    # fields: 90 m × 50 m parcels, pasture or row crops, mostly crops on the terrace
    parcel = ((gx - X0) // 90.0).astype(np.int64) * 1000 + ((gy - Y_BOT) // 50.0).astype(np.int64)
    draws = rng(6).uniform(size=parcel.max() + 1)
    terrace = (v >= valley_edges(gx)[1] + TERRACE_RAMP) & (hills < 0.05)
    crops = draws[parcel] < np.where(terrace, 0.75, 0.45)
    cover = np.where(crops, 3, 2).astype(np.uint8)
    # hills: timber with clearings of pasture
    timber = smooth_field(7, 20) > -0.4
    cover = np.where(hills > 0.3, np.where(timber, 6, 2), cover).astype(np.uint8)
    # riparian strip of light brush about 8 m wide (4–12 m), dense in patches
    strip = 8.0 + 4.0 * smooth_field(8, 15)
    brush = (half_top >= 0) & (half_top < strip)
    cover[brush] = np.where(smooth_field(9, 10)[brush] > 0.6, 5, 4)
    cover[(half_top < 0)] = 1
    road = dr < np.where(hills > 0.3, 3.0, ROAD_CREST_HALF + 2.0)
    cover[road] = 7
    return cover


# ---------------------------------------------------------------- digitising
def digitise(plan: Planform):
    """Digitised centrelines: vertices every 10–15 m, jitter, offsets, shared nodes."""
    g = rng(10)
    nodes = {}
    nodes["J1"] = plan.reach_lines["M1"][-1] + g.normal(0.0, 0.5, 2)
    nodes["J2"] = plan.reach_lines["M2"][-1] + g.normal(0.0, 0.5, 2)
    ends = {"M1": (None, "J1"), "M2": ("J1", "J2"), "M3": ("J2", None),
            "N1": (None, "J1"), "S1": (None, "J2")}
    out = {}
    for r in REACHES:
        xy = plan.reach_lines[r.reach_id]
        s = arc_length(xy)
        length = s[-1]
        stops = np.cumsum(g.uniform(10.0, 15.0, int(length / 10.0) + 2))
        stops = np.concatenate([[0.0], stops[stops < length - 5.0], [length]])
        px, py = np.interp(stops, s, xy[:, 0]), np.interp(stops, s, xy[:, 1])
        tx = np.interp(stops, s, np.gradient(xy[:, 0]))     # tangent of the true line
        ty = np.interp(stops, s, np.gradient(xy[:, 1]))
        norm = np.hypot(tx, ty)
        off = r.offset * smoothstep(np.minimum(stops, length - stops) / 40.0)
        px, py = px + off * ty / norm, py - off * tx / norm      # right of the flow
        jitter = g.normal(0.0, 1.0, (stops.size, 2))
        pts = np.column_stack([px, py]) + jitter
        first, last = ends[r.reach_id]
        if first:
            pts[0] = nodes[first]
        if last:
            pts[-1] = nodes[last]
        pts = np.round(pts, 2)
        out[r.reach_id] = pts[::-1].copy() if r.reversed else pts
    return out


def check_layout(plan: Planform, raster_facts: dict) -> None:
    """Stop if an edit to the constants broke the scenario's geometry."""
    from shapely.geometry import LineString

    problems = []
    for rid, xy in plan.reach_lines.items():
        half_top = 0.5 * plan.dims[rid]["top_width"]
        if rid[0] == "M":
            v = xy[:, 1] - AXIS_Y
            south, toe, _ = valley_edges(xy[:, 0])
            if np.any(v + half_top + 5.0 > toe) or np.any(v - half_top - 5.0 < south):
                problems.append(f"{rid} leaves the valley floor")
        else:
            mouth, a, u_edge = plan.trib_axis[rid]
            rel = xy - mouth
            u, w = rel @ a, np.abs(rel[:, 0] * a[1] - rel[:, 1] * a[0])
            if np.any(w[u > u_edge] + half_top > TRIB_FLOOR_HALF):
                problems.append(f"{rid} leaves its valley floor")
    road = LineString(ROAD)
    for rid, xy in plan.reach_lines.items():
        hits = LineString(xy).intersection(road)
        count = 0 if hits.is_empty else len(getattr(hits, "geoms", [hits]))
        if count != (1 if rid == "M2" else 0):
            problems.append(f"the road crosses {rid} {count} times")
    if raster_facts["gap_min_distance_to_channel"] < 20.0:
        problems.append("the nodata patch is too close to the channel")
    if problems:
        raise RuntimeError("make_basin layout: " + "; ".join(problems))


# ------------------------------------------------------------------- truth
def reach_facts(plan: Planform):
    """Length, slopes and sinuosity of every true reach, measured on the build."""
    facts = {}
    for r in REACHES:
        xy = plan.reach_lines[r.reach_id]
        length = line_length(xy)
        surf, _ = valley_surface(xy[[0, -1], 0], xy[[0, -1], 1], plan)
        fall = float(surf[0] - surf[1])
        if r.reach_id[0] == "M":
            valley_len = float(xy[0, 0] - xy[-1, 0])       # along the east–west axis
        else:
            mouth, a, _ = plan.trib_axis[r.reach_id]
            valley_len = float(((xy[0] - mouth) @ a) - ((xy[-1] - mouth) @ a))
        facts[r.reach_id] = {"length": length, "valley_length": valley_len, "fall": fall,
                             "sinuosity": length / valley_len,
                             "down_valley_slope": fall / valley_len,
                             "channel_slope": fall / length}
    return facts


def manning_q(ch, y, slope, n):
    """Manning's equation, SI: Q = A R^(2/3) S^(1/2) / n (Chow 1959), at depth y."""
    a, p, _ = section(ch, y)
    return a * (a / p) ** (2.0 / 3.0) * np.sqrt(slope) / n


def r4(v):
    return round(float(v), 4)


def build_truth(plan, facts, raster_facts, culvert):
    m = {}
    for r in REACHES:
        d, f = plan.dims[r.reach_id], facts[r.reach_id]
        qbf = manning_q(d, d["bank_height"], f["channel_slope"], N_CHANNEL_TABLE)
        a_bf, p_bf, _ = section(d, d["bank_height"])
        m[r.reach_id] = {
            "name": r.name, "drainage_km2": r.drainage_km2,
            "bankfull_width": r4(d["top_width"]), "bottom_width": r4(d["bottom_width"]),
            "bank_height": r4(d["bank_height"]), "side_height": r4(d["side_height"]),
            "bed_dip": d["bed_dip"], "side_slope": d["side_slope"],
            "mean_depth": r4(d["mean_depth"]),
            "bankfull_area": r4(a_bf), "bankfull_wetted_perimeter": r4(p_bf),
            "length_m": round(f["length"], 2), "valley_length_m": round(f["valley_length"], 2),
            "down_valley_slope": round(f["down_valley_slope"], 6),
            "sinuosity": r4(f["sinuosity"]), "channel_slope": round(f["channel_slope"], 6),
            "meander_wavelength_m": r.wavelength, "omega_rad": r4(omega_for_sinuosity(r.sinuosity)),
            "n_observations": N_OBSERVED,
            "bankfull_discharge_n040": round(float(qbf), 3),
            "digitised": {"offset_m": r.offset, "reversed": r.reversed, "jitter_sd_m": 1.0,
                          "vertex_spacing_m": [10.0, 15.0], "offset_taper_m": 40.0},
            "upstream_xy": [round(float(c), 2) for c in plan.reach_lines[r.reach_id][0]],
            "downstream_xy": [round(float(c), 2) for c in plan.reach_lines[r.reach_id][-1]],
        }
    t_along, crest, (ax, ay), (ux, uy) = raster_facts["road_crest"]
    cul_x, cul_y = culvert[1]
    crest_z = float(np.interp((cul_x - ax) * ux + (cul_y - ay) * uy, t_along, crest))
    sj = plan.junction_s["S1"]
    ws = []
    for s in (sj + FLAT_FROM, sj + FLAT_TO):
        cx = np.interp(s, plan.main_s, plan.main_xy[:, 0])
        ws.append(round(float(floor_z(cx, plan) - plan.dims[FLAT_REACH]["bank_height"]
                              + FLAT_DEPTH), 3))
    return {
        "about": "Invented demo basin; no real place. Lengths m, slopes m/m, discharges m3/s. "
                 "Chainage from each reach's upstream end along the true channel.",
        "crs": CRS, "pixel_size_m": RES, "seed": SEED,
        "regional_curves": {
            "source": "Bieger et al. 2015, JAWRA, national fit (realism only)",
            "bankfull_width": f"{WIDTH_COEF} * A^{WIDTH_EXP}",
            "mean_depth": f"{DEPTH_COEF} * A^{DEPTH_EXP}",
            "side_height": "h from z h^2 - (W - 4 z dip / 3) h + W (D - 2 dip / 3) = 0"},
        "channel_shape": "trapezoid whose bed sags in a parabola by bed_dip at the centre, cut "
                         "into a flat floodplain; bank_height = side_height + bed_dip is the "
                         "bankfull depth above the thalweg; area = (b + z h) h + 2/3 b dip",
        "n_observations": N_OBSERVED,
        "observation_slope": "channel_slope of the reach (bed fall / channel length)",
        "valley": {"flow": "east to west", "axis_y": AXIS_Y, "floodplain_z_at_west_edge": Z_OUTLET,
                   "v": "y - axis_y; edges wave by up to 20 m about the values given",
                   "floodplain_v_range": [FLOOR_SOUTH, TERRACE_TOE],
                   "terrace": {"side": "north (right bank of the main stem)", "height_m": TERRACE_H,
                               "v_from": TERRACE_TOE, "v_to": TERRACE_END,
                               "ramp_m": TERRACE_RAMP}},
        "reaches": m,
        "embankment": {"reach_id": "M2", "chainage_m": round(culvert[0], 2),
                       "xy": [round(culvert[1][0], 2), round(culvert[1][1], 2)],
                       "height_above_floodplain_m": ROAD_HEIGHT,
                       "crest_z_m": round(crest_z, 3),
                       "floodplain_z_m": round(float(floor_z(cul_x, plan)), 3),
                       "crest_width_m": 2 * ROAD_CREST_HALF, "side_slope_h_per_v": ROAD_SIDE,
                       "base_width_m": 2 * ROAD_CREST_HALF + 2 * ROAD_SIDE * ROAD_HEIGHT,
                       "culvert": "under the road at the crossing; invisible in the terrain",
                       "road_line": [list(ROAD[0]), list(ROAD[1])]},
        "hydro_flattened": {"reach_id": FLAT_REACH, "chainage_from_m": FLAT_FROM,
                            "chainage_to_m": FLAT_TO, "water_depth_at_flight_m": FLAT_DEPTH,
                            "wetted_width_m": r4(raster_facts["wet_width"]),
                            "water_surface_z_from_to": ws,
                            "pixels": raster_facts["water_pixels"]},
        "nodata_patch": {"where": "west edge, south floodplain",
                         "pixels": raster_facts["gap_pixels"],
                         "min_distance_to_channel_m":
                             round(raster_facts["gap_min_distance_to_channel"], 2)},
        "noise_sd_m_by_class": {str(k): v for k, v in NOISE_SD.items()},
        "outliers": "60 single-pixel pits and spikes at random, 6 more pits inside channels",
    }


# ------------------------------------------------------------------ writers
def write_geotiff(path, array, dtype, nodata, predictor, tags):
    import rasterio
    from rasterio.transform import from_origin

    profile = {"driver": "GTiff", "width": NX, "height": NY, "count": 1, "dtype": dtype,
               "crs": CRS, "transform": from_origin(X0, Y_TOP, RES, RES), "nodata": nodata,
               "tiled": True, "blockxsize": 256, "blockysize": 256, "compress": "deflate",
               "predictor": predictor, "zlevel": 9}
    with rasterio.open(path, "w", **profile) as dst:
        dst.write(array.astype(dtype), 1)
        dst.update_tags(**tags)


def write_csv(path, header, rows, units=None, comment=None):
    with open(path, "w", encoding="utf-8", newline="\n") as f:
        if comment:
            f.write(f"# {comment}\n")
        if units:   # the file's unit system, read whatever the run's --units
            f.write(f"# units: {units}\n")
        f.write(",".join(header) + "\n")
        for row in rows:
            f.write(",".join(str(v) for v in row) + "\n")


CONFIG_TOML = """\
# reachgauge demo run on the invented basin of make_basin.py (no real place).
# Paths are relative to this file; lengths are in metres (units = "si"), and stay
# metres in a run with --units us.
units = "si"

[inputs]
dem = "terrain.tif"
streams = "streams.gpkg"
layer = "streams"
id_field = "reach_id"
name_field = "name"

[transects]
spacing = 25.0
# the widest channel (about 15 m) plus some 30 m of floodplain either side;
# wider transects would cross each other at the tightest bends (radius ~50 m)
half_width = 40.0
# digitising offsets up to 4 m plus about 1 m of jitter
snap_distance = 10.0

[bankfull]
drainage_area_field = "drainage_km2"
# invented published curves, for comparison with the run's own regional fit
regional_curves = "regional_curves.csv"

[roughness]
landcover = "landcover.tif"
landcover_table = "landcover_n.csv"
observations = "observations.csv"
# Cowan's method per reach, as an alternative source of the channel n:
# cowan = "cowan.csv"

[stages]
design_flows = "design_flows.csv"

[monte_carlo]
# Monte Carlo bands on discharge, rating curves and design checks (JCGM 101:2008);
# the terrain's vertical accuracy (RMSE, m) is as invented as the basin
uncertainty = 200
vertical_accuracy = 0.1
"""


def main(out: Path = DEFAULT_OUT) -> Path:
    import geopandas as gpd
    from shapely.geometry import LineString

    out = Path(out)
    out.mkdir(parents=True, exist_ok=True)
    plan = build_planform()
    facts = reach_facts(plan)
    terrain, cover, raster_facts = build_rasters(plan)
    check_layout(plan, raster_facts)
    m2 = LineString(plan.reach_lines["M2"])
    hit = m2.intersection(LineString(ROAD))
    culvert = (m2.project(hit), (hit.x, hit.y))

    write_geotiff(out / "terrain.tif", terrain, "float32", NODATA, 3,
                  {"DESCRIPTION": "invented demo terrain (make_basin.py); elevations m",
                   "VERTICAL_UNITS": "m"})
    write_geotiff(out / "landcover.tif", cover, "uint8", 0, 2,
                  {"DESCRIPTION": "invented demo land cover (make_basin.py)",
                   "CLASSES": "; ".join(f"{c}={name}" for c, name, _n in LANDCOVER)})

    lines = digitise(plan)
    q = {}
    for r in REACHES:
        ch = plan.dims[r.reach_id]
        qbf = manning_q(ch, ch["bank_height"], facts[r.reach_id]["channel_slope"], N_CHANNEL_TABLE)
        q[r.reach_id] = [round(float(f * qbf), 1) for f in r.flow_ratios]
    gdf = gpd.GeoDataFrame(
        {"reach_id": [r.reach_id for r in REACHES], "name": [r.name for r in REACHES],
         "drainage_km2": [r.drainage_km2 for r in REACHES],
         "q_design": [q[r.reach_id][0] for r in REACHES]},
        geometry=[LineString(lines[r.reach_id]) for r in REACHES], crs=CRS)
    gpkg = out / "streams.gpkg"
    if gpkg.exists():
        gpkg.unlink()
    gdf.to_file(gpkg, layer="streams", driver="GPKG", engine="pyogrio")

    write_csv(out / "landcover_n.csv", ("class", "name", "n"),
              [(c, name, f"{n:.3f}") for c, name, n in LANDCOVER])
    write_csv(out / "design_flows.csv", ("reach_id", "flow", "discharge"),
              [(r.reach_id, name, value) for r in REACHES
               for name, value in zip(("q2", "q10", "q100"), q[r.reach_id])], units="si")
    obs = []
    for rid, chainage, depth in OBSERVATIONS:
        qo = manning_q(plan.dims[rid], depth, facts[rid]["channel_slope"], N_OBSERVED)
        # the crew's water-surface elevation: floodplain at the channel, less the
        # bank height (the thalweg), plus the measured depth
        xy = np.asarray(plan.reach_lines[rid], dtype=float)
        s_line = np.concatenate([[0.0], np.cumsum(np.hypot(*np.diff(xy, axis=0).T))])
        px, py = np.interp(chainage, s_line, xy[:, 0]), np.interp(chainage, s_line, xy[:, 1])
        plain = float(valley_surface(np.array([px]), np.array([py]), plan)[0][0])
        stage = plain - plan.dims[rid]["bank_height"] + depth
        obs.append((rid, f"{chainage:.1f}", f"{stage:.3f}", f"{depth:.2f}", f"{qo:.3f}"))
    write_csv(out / "observations.csv", ("reach_id", "chainage", "stage", "depth", "discharge"),
              obs, units="si")
    write_csv(out / "cowan.csv", ("reach_id", "base", "irregularity", "variation", "obstruction",
                                  "vegetation", "meander"),
              [(rid, *(f"{t:.3f}" for t in terms),
                "1.00" if facts[rid]["sinuosity"] < 1.2 else "1.15")
               for rid, terms in COWAN.items()])
    write_csv(out / "regional_curves.csv",
              ("name", "variable", "coefficient", "exponent", "units", "area_min", "area_max"),
              PUBLISHED_CURVES, comment="invented curves for the demo only: no real region, "
                                        "study or agency")
    truth = build_truth(plan, facts, raster_facts, culvert)
    (out / "truth.json").write_text(json.dumps(truth, indent=2) + "\n", encoding="utf-8")
    (out / "config.toml").write_text(CONFIG_TOML, encoding="utf-8")
    for stale in out.glob("*.aux.xml"):
        stale.unlink()
    return out


if __name__ == "__main__":
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--out", type=Path, default=DEFAULT_OUT,
                        help="directory to write (default: sample_data/basin)")
    args = parser.parse_args()
    t0 = time.perf_counter()
    path = main(args.out)
    print(f"wrote {path} in {time.perf_counter() - t0:.1f} s")
