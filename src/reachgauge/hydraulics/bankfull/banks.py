"""Bank tops of every transect at once, to a fraction of a sample step.

The bankfull stage says how high the water stands; the banks say where the channel
ends. The water's edges at the stage itself are no measure of that: a terrain model
rounds the corner between the bank face and the floodplain (and noise roughens it),
so a stage at or just below the bank top already reaches out over the rounded
corner, a pixel or more beyond the top of the face.

Method: a least-squares fit of each bank face, extrapolated to the bankfull stage.
For stages at evenly spaced fractions f of the bankfull depth H, from
:data:`FIT_FROM` to :data:`FIT_TO` (the middle of the bank, away from the rounded
toe and top), the water's edges come from the section kernel; on each side a
straight line x(f) is fitted to them by least squares. Its value at f = ½ is the
middle of the face, and its slope dx/df is the face's apparent horizontal width W
(a straight face from the thalweg to the stage spans exactly dx/df). The bank top is
the middle of the face plus half its width, outward: where the face line meets the
stage. Reading the bank top at the break of slope between the bank face and the
floodplain is common practice in surveying channel sections (e.g. Harrelson, C. C.,
Rawlins, C. L. & Potyondy, J. P., 1994, *Stream channel reference sites*, USDA Forest
Service GTR RM-245 [memory]); the fit and the blur correction below are ours, chosen
over the water's edges below the stage, the width just below the break and a
two-line break of slope by benchmarks/bench_banks.py (part 3).

Sampling blur. A section cut from a raster is not the ground: each sample is a
bilinear interpolation between pixel centres, and the section is the straight line
between samples. A linear interpolation a fraction u of the way between two values
a step Δ apart weighs them 1 − u and u: a two-point kernel of variance u(1 − u)Δ²,
whose mean over positions is Δ²/6 (∫₀¹ u(1 − u) du = 1/6). Bilinear interpolation
is one such kernel along each grid axis, so across a channel at any angle θ to the
grid its variance is Δ²/6 (cos²θ + sin²θ) on average; the line between samples adds
another, step²/6. With pixels and samples both Δ apart (the tool's default) the
ground is seen through a kernel of variance Δ²/3. That blur does not move the
middle of a straight face (a face is point-symmetric about its middle, and so is its
blurred image), but it spreads the face: a face of width L blurred by a kernel of
standard deviation σ, taken as normal (a sum of independent kernels), is the ramp

    z(x) = H·F(x),   F(x) = [G(x + L/2) − G(x − L/2)] / L   (lengths in units of σ)

with G(u) = u Φ(u) + φ(u) the integral of the normal distribution function Φ
(standard calculus: a uniform slope convolved with a normal kernel). The fit above,
applied to that ramp, reads an apparent width W(L/σ) ≥ L, tabulated once
(:func:`apparent_width`); the face width is W's inverse at the measured width (0
where the measured width is no more than a step's, W(0) ≈ 2.6σ). Without the
correction a face 1.5 pixels wide reads about a quarter of a pixel wide on each side
(benchmarks/bench_banks.py). The correction removes only the blur the tool itself
adds; a terrain model interpolated from points carries some of its own, which is
left (widths may still read a little wide on such rasters).

Bounds: a bank top is never inside the water's edge at half the bankfull depth (any
bank that rises outward is wider there) nor beyond the outer edge the caller gives
(the water's edge a little below the stage, where the water has not yet spread); a
side whose fitted stages reach an end of the profile keeps the outer edge.

Lengths in metres (or the profile's unit) throughout.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numpy as np
from scipy.special import ndtr

from reachgauge.kernel import sections as K

FIT_FROM, FIT_TO = 0.3, 0.7   # fractions of the bankfull depth over which a face is fitted
FIT_STAGES = 9                # stages in that range (one kernel call for all of them)


def sampling_blur(step, pixel=None) -> np.ndarray:
    """Standard deviation σ (m) of the blur through which a section sampled every
    ``step`` m from a raster of ``pixel`` m (default: ``step``, the tool's default
    sampling) sees the ground: bilinear interpolation between pixel centres, then
    straight lines between samples, σ² = (pixel² + step²) / 6 (module docstring).
    0 where ``step`` is not a positive number."""
    s = np.asarray(step, dtype=float)
    px = s if pixel is None else np.asarray(pixel, dtype=float)
    ok = np.isfinite(s) & (s > 0)
    var = (np.where(ok, px, 0.0) ** 2 + np.where(ok, s, 0.0) ** 2) / 6.0
    return np.where(ok, np.sqrt(var), 0.0)


def _fractions() -> np.ndarray:
    return np.linspace(FIT_FROM, FIT_TO, FIT_STAGES)


def _normal_cdf_integral(u):
    """G(u) = ∫ Φ = u Φ(u) + φ(u)."""
    return u * ndtr(u) + np.exp(-0.5 * u * u) / np.sqrt(2 * np.pi)


def _ramp(x, q):
    """F(x) of a face of width q (units of σ) blurred by a unit normal kernel."""
    g = _normal_cdf_integral
    with np.errstate(divide="ignore", invalid="ignore"):
        f = (g(x + q / 2) - g(x - q / 2)) / q
    return np.where(q > 1e-9, f, ndtr(x))


@lru_cache(maxsize=1)
def apparent_width():
    """The table (q, W): W(q) is the width (units of σ) the face fit reads on a straight
    face of width q·σ blurred by a normal kernel of standard deviation σ. The ramp
    is inverted at the fit's fractions by Chandrupatla's method
    (scipy.optimize.elementwise.find_root) for all q at once."""
    from scipy.optimize import elementwise

    q = np.concatenate([np.linspace(0.0, 8.0, 161), np.linspace(8.25, 40.0, 128)])[:, None]
    f = _fractions()[None, :]
    lo = np.broadcast_to(-(q / 2 + 12.0), (q.size, f.size))
    hi = np.broadcast_to(q / 2 + 12.0, (q.size, f.size))
    qq = np.broadcast_to(q, lo.shape)
    ff = np.broadcast_to(f, lo.shape)
    x = elementwise.find_root(lambda x, q_, f_: _ramp(x, q_) - f_, (lo, hi), args=(qq, ff),
                              tolerances=dict(xatol=1e-12, xrtol=1e-14)).x
    fc = f - f.mean()
    w = (fc * (x - x.mean(axis=1, keepdims=True))).sum(axis=1) / (fc * fc).sum()
    return q[:, 0], w


def deblurred(width, sigma) -> np.ndarray:
    """Face width (m) whose blurred image reads ``width`` (m) under a blur of standard
    deviation ``sigma`` (m): the inverse of :func:`apparent_width`; 0 for a width
    no larger than a step's image, the width itself where ``sigma`` is 0."""
    width = np.asarray(width, dtype=float)
    sigma = np.broadcast_to(np.asarray(sigma, dtype=float), width.shape)
    q, w = apparent_width()
    blurred = sigma > 0
    with np.errstate(divide="ignore", invalid="ignore"):
        r = np.where(blurred, width / np.where(blurred, sigma, 1.0), 0.0)
    # beyond the table the blur no longer changes the fit: W(q) = q + (W − q) at its end
    inv = np.where(r > w[-1], r - (w[-1] - q[-1]), np.interp(r, w, q, left=0.0))
    return np.where(blurred, inv * sigma, width)


@dataclass(frozen=True)
class Faces:
    """The least-squares lines of the bank faces of t profiles, arrays (t, 2) (left,
    right): ``middle`` the fitted offset at half the bankfull depth; ``width`` the
    apparent horizontal width of the face (dx/df ≥ 0); ``half`` the water's edge at
    half the depth; ``spills`` a fitted stage reached that end of the profile."""

    middle: np.ndarray
    width: np.ndarray
    half: np.ndarray
    spills: np.ndarray


def faces(p: K.Profiles, stage) -> Faces:
    """Fit both bank faces of every profile below ``stage`` (t,) (module docstring):
    one kernel call for the :data:`FIT_STAGES` stages of every profile."""
    stage = np.asarray(stage, dtype=float)
    f = _fractions()
    depth = np.maximum(np.where(np.isfinite(stage), stage, p.thalweg) - p.thalweg, 0.0)
    w = K.wet(p, p.thalweg[:, None] + depth[:, None] * f[None, :])
    fc = f - f.mean()
    sides = []
    for edge, spill in ((w.left_edge, w.spills_left), (w.right_edge, w.spills_right)):
        mean = edge.mean(axis=1)
        slope = (fc[None, :] * (edge - mean[:, None])).sum(axis=1) / (fc * fc).sum()
        sides.append((mean + slope * (0.5 - f.mean()), np.abs(slope),
                      edge[:, FIT_STAGES // 2], spill.any(axis=1)))
    left, right = sides
    return Faces(*(np.column_stack([left[i], right[i]]) for i in range(4)))


def bank_tops(p: K.Profiles, stage, outer, blur=None) -> np.ndarray:
    """Offsets (t, 2) of the left and right bank tops of every profile at the bankfull
    ``stage`` (t,): each face's middle plus half its width, the width corrected for
    the sampling blur ``blur`` (σ, m, scalar or (t,); None or 0 for an exact profile,
    e.g. a survey), kept between the water's edge at half the depth and ``outer``
    (t, 2), the outermost offsets a bank may take. NaN where ``outer`` is NaN."""
    outer = np.asarray(outer, dtype=float).reshape(p.count, 2)
    fc = faces(p, stage)
    sigma = np.zeros(p.count) if blur is None else np.broadcast_to(np.asarray(blur, float),
                                                                   (p.count,))
    width = deblurred(fc.width, sigma[:, None])
    top = fc.middle + np.array([-0.5, 0.5]) * width
    ok = np.isfinite(top) & ~fc.spills & np.isfinite(fc.half)
    left = np.clip(top[:, 0], outer[:, 0], np.maximum(outer[:, 0], fc.half[:, 0]))
    right = np.clip(top[:, 1], np.minimum(outer[:, 1], fc.half[:, 1]), outer[:, 1])
    return np.where(ok, np.column_stack([left, right]), outer)
