"""Builders of synthetic cross-sections whose bankfull stage is known by construction.

Invented data for tests and the bankfull evidence script (benchmarks/bankfull_methods.py),
not measurements. Each builder lays a piecewise-linear ground line through a few
key vertices (left to right looking downstream), samples it at a uniform step the
way a transect samples a raster, and optionally

- blurs it with a Gaussian kernel (``blur``, metres: a DEM's pixel averaging rounds
  the bank corners; scipy.ndimage.gaussian_filter1d), then
- adds seeded Gaussian noise (``noise``, metres: the elevation error of lidar), then
- makes the bed perfectly flat (``flat_bed``: a hydro-flattened or lidar water
  surface, the case the baseflow correction is for).

``bankfull`` is the known answer: the lower of the two bank tops (the elevation at
which water first leaves the channel for a floodplain), or NaN where the section has
no floodplain at all.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from hypothesis import strategies as st
from scipy.ndimage import gaussian_filter1d

from reachgauge import CrossSection


@dataclass(frozen=True)
class Synthetic:
    """A synthetic section and its known answers (elevations in m)."""

    name: str
    section: CrossSection
    bankfull: float          # known bankfull stage, NaN where there is none
    bed: float               # elevation of the bed before noise
    bank_offsets: tuple      # (left, right) offsets of the bank tops before noise
    vertices: tuple          # (offsets, elevations) of the noise-free key vertices


def sample(vx, vz, *, spacing=1.0, noise=0.0, seed=0, blur=0.0, flat=None):
    """Sample the polyline (vx, vz) every ``spacing`` m; blur, add noise, flatten.

    ``flat``: (x_from, x_to, level) sets the samples in that offset range to
    ``level`` exactly after the noise. Returns (offsets, elevations).
    """
    vx = np.asarray(vx, dtype=float)
    vz = np.asarray(vz, dtype=float)
    x = np.arange(vx[0], vx[-1] + 1e-9, spacing)
    z = np.interp(x, vx, vz)
    if blur > 0:
        z = gaussian_filter1d(z, blur / spacing, mode="nearest")
    if noise > 0:
        z = z + np.random.default_rng(seed).normal(0.0, noise, x.size)
    if flat is not None:
        a, b, level = flat
        z = np.where((x >= a) & (x <= b), level, z)
    return x, z


def compound_channel(*, bottom_width=6.0, bank_height=1.5, side_slope=1.5,
                     floodplain=(25.0, 25.0), bank_rise=(0.0, 0.0), floodplain_slope=0.0,
                     wall_height=2.0, wall_slope=3.0, bench=None, terrace=None,
                     bed=100.0, spacing=1.0, noise=0.0, seed=0, blur=0.0, flat_bed=False,
                     name="compound") -> Synthetic:
    """Trapezoidal channel with a floodplain each side and valley walls beyond.

    bottom_width, bank_height (m), side_slope (horizontal : vertical) give the channel;
    floodplain = (left, right) widths (m); bank_rise = (left, right) metres by which
    each bank top stands above ``bed + bank_height`` (an asymmetric section);
    floodplain_slope: rise per metre away from the channel; walls rise
    ``wall_height`` at ``wall_slope`` (H:V) beyond the floodplains.
    bench = (height above bed, width, "left"|"right"): a flat inset bench in a bank.
    terrace = (height above the bank top, riser width, tread width): a terrace step
    on both floodplains, ``floodplain`` metres out from the bank tops.
    """
    zl = bed + bank_height + bank_rise[0]
    zr = bed + bank_height + bank_rise[1]
    half = bottom_width / 2
    xs, zs = [0.0], [bed]

    def bank(side):
        top = zl if side == "left" else zr
        rise = top - bed
        if bench is not None and bench[2] == side and 0 < bench[0] < rise:
            hb, wb = bench[0], bench[1]
            return [(hb * side_slope, bed + hb), (hb * side_slope + wb, bed + hb),
                    (rise * side_slope + wb, top)]
        return [(rise * side_slope, top)]

    def outward(side, start_dx, top):
        fw = floodplain[0] if side == "left" else floodplain[1]
        pts = [(start_dx + fw, top + floodplain_slope * fw)]
        edge = pts[-1]
        if terrace is not None:
            th, riser, tread = terrace
            pts.append((edge[0] + riser, edge[1] + th))
            pts.append((edge[0] + riser + tread, edge[1] + th))
            edge = pts[-1]
        pts.append((edge[0] + wall_height * wall_slope, edge[1] + wall_height))
        return pts

    # build each side outward from the channel centre, then mirror the left side
    sides = {}
    for side in ("left", "right"):
        pts = [(half, bed)] + [(half + dx, z) for dx, z in bank(side)]
        top_dx, top_z = pts[-1]
        pts += outward(side, top_dx, top_z)
        sides[side] = pts
    left = [(-dx, z) for dx, z in reversed(sides["left"])]
    right = sides["right"]
    vx = np.array([p[0] for p in left + right])
    vz = np.array([p[1] for p in left + right])
    xs, zs = vx - vx[0], vz
    bank_x = (xs[len(left) - 2 - (2 if bench and bench[2] == "left" else 0)],
              xs[len(left) + 1 + (2 if bench and bench[2] == "right" else 0)])
    flat = (xs[len(left) - 1], xs[len(left)], bed) if flat_bed else None
    x, z = sample(xs, zs, spacing=spacing, noise=noise, seed=seed, blur=blur, flat=flat)
    return Synthetic(name, CrossSection(x, z), min(zl, zr), bed, bank_x, (xs, zs))


def v_valley(*, side_slope=4.0, depth=5.0, bed=100.0, spacing=1.0, noise=0.0, seed=0,
             blur=0.0, name="v-valley") -> Synthetic:
    """Symmetric V-shaped valley with no floodplain: no bankfull break (NaN)."""
    w = side_slope * depth
    xs, zs = np.array([0.0, w, 2 * w]), np.array([bed + depth, bed, bed + depth])
    x, z = sample(xs, zs, spacing=spacing, noise=noise, seed=seed, blur=blur)
    return Synthetic(name, CrossSection(x, z), float("nan"), bed, (0.0, 2 * w), (xs, zs))


def trapezoid(*, bottom_width=6.0, side_slope=1.5, depth=1.5, bed=100.0, spacing=0.5,
              noise=0.0, seed=0, flat_bed=False, name="trapezoid") -> Synthetic:
    """Trapezoid whose profile ends at its bank tops (no floodplain inside the profile).

    ``bankfull`` is the bank-top elevation, where the profile ends: the water spills
    over the ends, so a picker cannot see a floodplain and must say so.
    """
    t = side_slope * depth
    xs = np.array([0.0, t, t + bottom_width, 2 * t + bottom_width])
    zs = np.array([bed + depth, bed, bed, bed + depth])
    flat = (t, t + bottom_width, bed) if flat_bed else None
    x, z = sample(xs, zs, spacing=spacing, noise=noise, seed=seed, flat=flat)
    return Synthetic(name, CrossSection(x, z), bed + depth, bed, (0.0, xs[-1]), (xs, zs))


@st.composite
def random_profiles(draw):
    """Hypothesis strategy: any ground line of 3 to 40 points, offsets strictly
    increasing by 0.05-5 m, elevations anywhere in -5..5 m (property tests)."""
    n = draw(st.integers(3, 40))
    steps = draw(st.lists(st.floats(0.05, 5.0), min_size=n - 1, max_size=n - 1))
    x = np.concatenate([[0.0], np.cumsum(steps)])
    z = np.array(draw(st.lists(st.floats(-5.0, 5.0), min_size=n, max_size=n)))
    return x, z
