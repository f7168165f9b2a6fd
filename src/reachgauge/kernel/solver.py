"""One stage solver for every caller: the lowest stage at which a section figure
(Manning discharge for normal depth, the section factor for critical depth) reaches
a target, for all profiles and any number of targets at once.

Method: the figure is evaluated on a grid of stages per profile — even steps from
the thalweg to the highest stage allowed, plus every vertex elevation in between
(the figures change form only at vertex elevations, so a peak of a non-monotone
curve, water about to spread onto a flat, is seen) — which brackets the first
crossing; Chandrupatla's method (``scipy.optimize.elementwise.find_root``;
Chandrupatla, T. R., 1997, "A new hybrid quadratic/bisection algorithm for finding
the zero of a nonlinear function without using derivatives", Advances in
Engineering Software 28(3)) refines all brackets at once.

Above the profile. Where the water reaches an end of a transect the section
spills; what a caller wants there differs, so the caller says it (``above``) and the
solution records it:

``"inside"``
    Stages only up to the profile's top (:attr:`Profiles.top`); a target not reached
    there is not reached (stage NaN).
``"walled"``
    Stages up to ``reach`` times the in-profile depth, counting only the water
    inside the transect (as if walled at its ends, with no wall perimeter): where
    the plain goes on beyond the transect such a stage is an upper bound, and
    ``over_profile`` marks it.

A figure can jump where water tops a bank into lower ground behind it (the
connected area grows at once). A target inside such a jump has no stage that
carries it exactly: the solution is the elevation of the jump, and ``at_jump``
marks it (the figure there is below the target; just above it, above).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.optimize import elementwise

from reachgauge import manning
from reachgauge.kernel.sections import Profiles, flow, roughness_triple, wet

ABOVE = ("inside", "walled")
GRID_STEPS = 64            # even steps of the bracketing grid
JUMP_TOLERANCE = 1e-6      # relative shortfall of the figure that marks a jump


@dataclass(frozen=True)
class StageSolution:
    """Stages (t,) or (t, f) for targets of the same shape.

    reached: a stage carries the target within the allowed range (else stage NaN);
    over_profile: the stage is above the profile's top (only with ``above="walled"``);
    at_jump: the target falls in a jump of the figure (see the module docstring);
    above: the policy used.
    """

    stage: np.ndarray
    reached: np.ndarray
    over_profile: np.ndarray
    at_jump: np.ndarray
    above: str


def _grid(p: Profiles, hi: np.ndarray) -> np.ndarray:
    """(t, G) sorted stages from the thalweg to ``hi``, with the vertex elevations."""
    zt = p.thalweg[:, None]
    even = zt + np.linspace(0.0, 1.0, GRID_STEPS + 1)[None, :] * (hi[:, None] - zt)
    inside = np.arange(p.z.shape[1])[None, :] < p.size[:, None]
    vert = np.where(inside & (p.z > zt) & (p.z < hi[:, None]), p.z, hi[:, None])
    return np.sort(np.concatenate([even, vert], axis=1), axis=1)


def solve_stage(p: Profiles, figure, target, *, above: str = "inside", reach: float = 3.0
                ) -> StageSolution:
    """Lowest stage where ``figure(rows, stages)`` reaches ``target``.

    ``figure(rows, stages)`` returns the figure at ``stages`` (r, k) of profiles
    ``rows`` (r,); it must be 0 at the thalweg. ``target`` (t,) or (t, f), ≥ 0;
    a target of 0 gives the thalweg.
    """
    if above not in ABOVE:
        raise ValueError(f"above must be one of {ABOVE}, not {above!r}")
    tgt = np.asarray(target, dtype=float)
    one = tgt.ndim == 1
    tgt = tgt.reshape(p.count, -1)
    t, f = tgt.shape
    depth = p.top - p.thalweg
    hi = p.top if above == "inside" else p.thalweg + reach * depth
    possible = p.valid & (depth > 0)
    hi = np.where(possible, hi, p.thalweg + 1.0)
    grid = _grid(p, hi)
    vals = figure(np.arange(t), grid)                                   # (t, G)
    hit = vals[:, :, None] >= tgt[:, None, :]                           # (t, G, f)
    reached = hit.any(axis=1) & possible[:, None]
    i = np.argmax(hit, axis=1)                                          # (t, f)
    rows = np.broadcast_to(np.arange(t)[:, None], (t, f))
    stage = np.where(reached, grid[rows, i], np.nan)
    stage = np.where(tgt == 0, p.thalweg[:, None], stage)
    reached |= tgt == 0
    need = reached & (i > 0) & (vals[rows, i] > tgt)
    if need.any():
        r, c = np.nonzero(need)
        lo_s, hi_s = grid[r, i[r, c] - 1], grid[r, i[r, c]]

        def g(s, ri, ti):
            return figure(ri.astype(int), s[:, None])[:, 0] - ti

        res = elementwise.find_root(g, (lo_s, hi_s), args=(r.astype(float), tgt[r, c]),
                                    tolerances=dict(xatol=1e-10, xrtol=1e-12))
        stage[r, c] = res.x
    short = np.zeros((t, f), dtype=bool)
    if reached.any():
        r, c = np.nonzero(reached & (tgt > 0))
        got = figure(r, stage[r, c][:, None])[:, 0]
        short[r, c] = got < tgt[r, c] * (1.0 - JUMP_TOLERANCE)
    over = reached & (stage > p.top[:, None] + 1e-9)
    out = (stage, reached, over, short)
    if one:
        out = tuple(a[:, 0] for a in out)
    return StageSolution(*out, above=above)


def normal_stage(p: Profiles, q, slope, n, banks=None, units="si", *, above="inside",
                 reach=3.0) -> StageSolution:
    """Normal-depth stage (Manning, steady uniform flow; Chow 1959, §6-2) of
    discharge ``q`` ((t,) or (t, f); m³/s or ft³/s) on every profile, by the
    divided-channel method when ``banks`` (t, 2) are given."""
    slope = np.broadcast_to(manning.check_slope(slope), (p.count,))
    nn = roughness_triple(n, p.count)
    bk = None if banks is None else np.asarray(banks, dtype=float).reshape(p.count, 2)
    q = manning.check_discharge(np.broadcast_to(np.asarray(q, dtype=float),
                                                (p.count,) + np.shape(q)[1:]))

    def figure(rows, s):
        sub = p.take(rows)
        return flow(sub, s, slope[rows], nn[rows], None if bk is None else bk[rows],
                    units).discharge

    return solve_stage(p, figure, q, above=above, reach=reach)


def critical_stage(p: Profiles, q, units="si", *, above="inside") -> StageSolution:
    """Critical-flow stage of discharge ``q``: where Q² T / (g A³) = 1, i.e. the
    section factor A^(3/2) / T^(1/2) equals Q / g^(1/2) (Chow 1959, Eq. 4-5)."""
    g = manning.unit_system(units).g
    q = manning.check_discharge(np.broadcast_to(np.asarray(q, dtype=float), (p.count,)))

    def figure(rows, s):
        w = wet(p.take(rows), s)
        with np.errstate(divide="ignore", invalid="ignore"):
            return np.where(w.top_width > 0, w.area ** 1.5 / np.sqrt(
                np.where(w.top_width > 0, w.top_width, 1.0)), 0.0)

    return solve_stage(p, figure, q / np.sqrt(g), above=above)
