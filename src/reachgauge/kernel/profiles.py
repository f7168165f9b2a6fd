"""Many profiles at once: a reach's transects as one (transects × samples) array.

:class:`ProfileSet` computes the same exact geometry as
:class:`~reachgauge.section.CrossSection` (piecewise-linear ground clipped at
the water line, only water connected to the thalweg, spills flagged, division
lines not wetted perimeter), but for every transect of a reach and every stage
in one set of 3-D numpy operations (transects × stages × segments), evaluated in
blocks of transects to bound memory.

Missing samples (NaN): gaps inside a profile are bridged by straight ground
lines (as :class:`CrossSection` does with ``drop_nan=True``); NaNs at the ends
shorten the profile, whose ends are then the first and last valid samples.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd
from scipy.optimize import elementwise

from reachgauge import manning
from reachgauge.kernel.crosssection import Geometry, clip_at_water, safe_ratio

_BLOCK_CELLS = 3_000_000


@dataclass(frozen=True)
class Parts:
    """Left overbank, channel and right overbank figures, arrays of one shape."""

    area: np.ndarray        # (3, ...) m²
    wetted_perimeter: np.ndarray
    top_width: np.ndarray

    @property
    def hydraulic_radius(self):
        return safe_ratio(self.area, self.wetted_perimeter)


class ProfileSet:
    """Profiles sharing one offset grid.

    ``offset``: (n,) strictly increasing; ``elevation``: (t, n), NaN where no
    data. Rows with fewer than 3 valid samples are marked invalid
    (``self.valid``) and give zeros.
    """

    def __init__(self, offset, elevation):
        x = np.asarray(offset, dtype=float)
        z = np.array(elevation, dtype=float, ndmin=2)
        if z.shape[1] != x.size or x.size < 3 or np.any(np.diff(x) <= 0):
            raise ValueError("offset must be strictly increasing with one column of elevation each")
        ok = np.isfinite(z)
        self.valid = ok.sum(axis=1) >= 3
        t, n = z.shape
        idx = np.arange(n)
        lo = np.where(ok.any(axis=1), np.argmax(ok, axis=1), 0)
        hi = np.where(ok.any(axis=1), n - 1 - np.argmax(ok[:, ::-1], axis=1), n - 1)
        # bridge interior gaps linearly; pad the ends with the end values (masked later)
        frame = pd.DataFrame(z.T, index=x)
        filled = frame.interpolate(method="index", limit_area="inside").ffill().bfill()
        filled = filled.fillna(0.0).to_numpy().T.copy()
        self.offset = x
        self.elevation = filled
        self.lo, self.hi = lo, hi
        inside = (idx[None, :] >= lo[:, None]) & (idx[None, :] <= hi[:, None])
        zmask = np.where(inside, filled, np.inf)
        self.i0 = np.argmin(zmask, axis=1)
        rows = np.arange(t)
        self.thalweg = filled[rows, self.i0]
        self.thalweg_offset = x[self.i0]

        # running maxima outward from the thalweg (-inf on the other side of it,
        # so they do not count); _bounds only reads them between the profile ends
        left = np.where(idx[None, :] <= self.i0[:, None], filled, -np.inf)
        self._left_max = np.maximum.accumulate(left[:, ::-1], axis=1)[:, ::-1]
        right = np.where(idx[None, :] >= self.i0[:, None], filled, -np.inf)
        self._right_max = np.maximum.accumulate(right, axis=1)
        # highest stage inside the profile: the lower of the two sides' highest
        # points (see CrossSection.top)
        self.top = np.minimum(self._left_max[rows, lo], self._right_max[rows, hi])
        self._dx = np.diff(x)

    def take(self, rows) -> "ProfileSet":
        """The profiles at ``rows`` (indices, repeats allowed) as a new set."""
        rows = np.asarray(rows, dtype=int)
        new = object.__new__(ProfileSet)
        new.offset, new._dx = self.offset, self._dx
        for name in ("elevation", "valid", "lo", "hi", "i0", "thalweg", "thalweg_offset", "top",
                     "_left_max", "_right_max"):
            setattr(new, name, getattr(self, name)[rows])
        return new

    @property
    def count(self) -> int:
        return self.elevation.shape[0]

    # ------------------------------------------------------------ internals
    def _stage2d(self, stage):
        s = np.asarray(stage, dtype=float)
        if s.ndim == 0:
            s = np.full((self.count, 1), float(s))
        elif s.ndim == 1:
            if s.size != self.count:
                raise ValueError(f"a 1-D stage needs one value per profile ({self.count})")
            s = s[:, None]
        if s.shape[0] != self.count:
            raise ValueError("stage rows must match the profiles")
        return s

    def _bounds(self, rows, s):
        """Boundary vertices (jl, jr) and spill flags for stages s (r, m)."""
        i0 = self.i0[rows][:, None]
        lo = self.lo[rows][:, None]
        hi = self.hi[rows][:, None]
        idx = np.arange(self.offset.size)
        lm = self._left_max[rows]
        rm = self._right_max[rows]
        # count of vertices j in [lo, i0] whose running max is below the stage
        in_left = (idx[None, :] >= lo) & (idx[None, :] <= i0)
        cl = ((lm[:, None, :] < s[:, :, None]) & in_left[:, None, :]).sum(axis=2)
        in_right = (idx[None, :] >= i0) & (idx[None, :] <= hi)
        cr = ((rm[:, None, :] < s[:, :, None]) & in_right[:, None, :]).sum(axis=2)
        spill_l = cl >= (i0 - lo + 1)
        spill_r = cr >= (hi - i0 + 1)
        jl = np.where(spill_l, lo, i0 - cl)
        jr = np.where(spill_r, hi, i0 + cr)
        return jl, jr, spill_l, spill_r

    def _clip(self, rows, s, jl, jr, a=None, b=None):
        """Sum of wetted area, perimeter and top width over the connected
        segments, restricted to offsets in [a, b] (per-row arrays or None)."""
        x1, x2 = self.offset[:-1], self.offset[1:]
        z = self.elevation[rows]
        z1, z2 = z[:, :-1], z[:, 1:]
        if a is None:
            xa = np.broadcast_to(x1, z1.shape)
            xb = np.broadcast_to(x2, z1.shape)
            za, zb = z1, z2
        else:
            xa = np.clip(x1[None, :], a[:, None], b[:, None])
            xb = np.clip(x2[None, :], a[:, None], b[:, None])
            u1 = (xa - x1) / self._dx
            u2 = (xb - x1) / self._dx
            za = z1 + u1 * (z2 - z1)
            zb = z1 + u2 * (z2 - z1)
        w = xb - xa                                   # (r, nseg) horizontal length
        length = np.hypot(w, zb - za)
        seg = np.arange(x1.size)
        connected = (seg[None, None, :] >= jl[:, :, None]) & (seg[None, None, :] < jr[:, :, None])
        parts = clip_at_water(s[:, :, None] - za[:, None, :], s[:, :, None] - zb[:, None, :],
                              w[:, None, :], length[:, None, :], connected)
        return tuple(p.sum(axis=2) for p in parts)

    def _row_blocks(self, m):
        per = max(1, _BLOCK_CELLS // max(1, m * self.offset.size))
        for i in range(0, self.count, per):
            yield np.arange(i, min(self.count, i + per))

    # --------------------------------------------------------------- public
    def geometry(self, stage) -> Geometry:
        """Geometry at ``stage``: (t,) one stage per profile, or (t, m).

        Returns a :class:`~reachgauge.section.Geometry` whose arrays have the
        stage's shape; invalid profiles give zeros and NaN edges.
        """
        s_in = np.asarray(stage, dtype=float)
        s = self._stage2d(stage)
        t, m = s.shape
        out = {k: np.zeros((t, m)) for k in ("area", "perim", "width")}
        left = np.full((t, m), np.nan)
        right = np.full((t, m), np.nan)
        sl = np.zeros((t, m), bool)
        sr = np.zeros((t, m), bool)
        x = self.offset
        for rows in self._row_blocks(m):
            ss = s[rows]
            jl, jr, spl, spr = self._bounds(rows, ss)
            a, p, w = self._clip(rows, ss, jl, jr)
            out["area"][rows], out["perim"][rows], out["width"][rows] = a, p, w
            z = self.elevation[rows]
            r = np.arange(rows.size)[:, None]
            wet = ss > self.thalweg[rows][:, None]
            with np.errstate(all="ignore"):
                jl1 = np.minimum(jl + 1, x.size - 1)
                tl = (ss - z[r, jl1]) / (z[r, jl] - z[r, jl1])
                le = np.where(spl, x[jl], x[jl1] - tl * (x[jl1] - x[jl]))
                jr0 = np.maximum(jr - 1, 0)
                tr = (ss - z[r, jr0]) / (z[r, jr] - z[r, jr0])
                re = np.where(spr, x[jr], x[jr0] + tr * (x[jr] - x[jr0]))
            left[rows] = np.where(wet, le, np.nan)
            right[rows] = np.where(wet, re, np.nan)
            sl[rows], sr[rows] = spl & wet, spr & wet
        inval = ~self.valid
        for arr in out.values():
            arr[inval] = 0.0
        shape = s_in.shape if s_in.ndim else (t,)
        rs = (lambda v: v.reshape(shape))
        return Geometry(stage=rs(s), depth=rs(np.maximum(s - self.thalweg[:, None], 0.0)),
                        area=rs(out["area"]), wetted_perimeter=rs(out["perim"]),
                        top_width=rs(out["width"]), left_edge=rs(left), right_edge=rs(right),
                        spills_left=rs(sl), spills_right=rs(sr))

    def subsections(self, stage, banks) -> Parts:
        """Figures of left overbank, channel, right overbank split at ``banks``
        (t, 2) offsets by vertical lines that are not wetted perimeter
        (divided-channel method, Chow 1959, §6-9). Arrays have shape
        (3,) + stage shape."""
        s_in = np.asarray(stage, dtype=float)
        s = self._stage2d(stage)
        t, m = s.shape
        bk = np.asarray(banks, dtype=float).reshape(t, 2)
        lo = np.full(t, -np.inf)
        hi = np.full(t, np.inf)
        ranges = ((lo, bk[:, 0]), (bk[:, 0], bk[:, 1]), (bk[:, 1], hi))
        res = np.zeros((3, 3, t, m))
        for rows in self._row_blocks(m):
            ss = s[rows]
            jl, jr, _, _ = self._bounds(rows, ss)
            for k, (a, b) in enumerate(ranges):
                res[k][:, rows] = np.stack(self._clip(rows, ss, jl, jr, a[rows], b[rows]))
        res[:, :, ~self.valid] = 0.0
        shape = (3,) + (s_in.shape if s_in.ndim else (t,))
        return Parts(res[:, 0].reshape(shape), res[:, 1].reshape(shape), res[:, 2].reshape(shape))

    def _conveyance_rows(self, rows, s, n, bk):
        """Conveyance for profile ``rows`` at stages ``s`` (r, m); ``n`` (r,) or
        (r, 3); ``bk`` (r, 2) or None."""
        jl, jr, _, _ = self._bounds(rows, s)
        if bk is None:
            a, p, _ = self._clip(rows, s, jl, jr)
            return manning.conveyance(a, safe_ratio(a, p), n.reshape(-1, 1))
        total = 0.0
        lo = np.full(rows.size, -np.inf)
        hi = np.full(rows.size, np.inf)
        for k, (a_, b_) in enumerate(((lo, bk[:, 0]), (bk[:, 0], bk[:, 1]), (bk[:, 1], hi))):
            a, p, _ = self._clip(rows, s, jl, jr, a_, b_)
            total = total + manning.conveyance(a, safe_ratio(a, p), n[:, k:k + 1])
        return total

    def _prepare(self, n, banks):
        t = self.count
        nn = np.asarray(manning.check_n(n), dtype=float)
        if banks is None:
            nn = np.broadcast_to(nn.reshape(-1)[:1] if nn.size == 1 else nn.reshape(t), (t,))
            return nn, None
        bk = np.asarray(banks, dtype=float).reshape(t, 2)
        # a 1-D triple is (left, channel, right) for every profile; a 1-D array of
        # t values is one n per profile for all three parts; (t, 3) is per profile
        if nn.ndim == 1 and nn.size != 3:
            nn = nn.reshape(-1, 1)
        nn = np.broadcast_to(nn, (t, 3))
        return nn, bk

    def conveyance(self, stage, n, banks=None):
        """Conveyance K (m³/s; Q = K S^(1/2)) at ``stage``, SI.

        ``n``: scalar or (t,) one n per profile; with ``banks`` (t, 2), also
        (3,) or (t, 3) for (left overbank, channel, right overbank), and the
        total is the sum of subsection conveyances (divided-channel method,
        Chow 1959, §6-9).
        """
        s_in = np.asarray(stage, dtype=float)
        s = self._stage2d(stage)
        nn, bk = self._prepare(n, banks)
        k = np.zeros(s.shape)
        for rows in self._row_blocks(s.shape[1] * (3 if bk is not None else 1)):
            k[rows] = self._conveyance_rows(rows, s[rows], nn[rows],
                                            None if bk is None else bk[rows])
        k[~self.valid] = 0.0
        return k.reshape(s_in.shape if s_in.ndim else (self.count,))

    def discharge(self, stage, slope, n, banks=None):
        """Manning discharge (m³/s) at ``stage``; ``slope`` scalar or (t,)."""
        sl = np.broadcast_to(np.asarray(manning.check_slope(slope), dtype=float), (self.count,))
        k = self.conveyance(stage, n, banks)
        return k * (np.sqrt(sl)[:, None] if k.ndim == 2 else np.sqrt(sl))

    def discharge_grid(self, slope, n, banks=None, reach=3.0):
        """Stages (t, m), even steps from the thalweg to ``reach`` times the
        profile's in-profile depth, and the discharge at each: the bracket
        search of :meth:`stage_for_discharge`, computed once for many flows."""
        sl = np.broadcast_to(np.asarray(manning.check_slope(slope), dtype=float), (self.count,))
        nn, bk = self._prepare(n, banks)
        frac = np.linspace(0.0, float(reach), int(128 * reach) + 1)
        grid = self.thalweg[:, None] + frac[None, :] * (self.top - self.thalweg)[:, None]
        return grid, self.discharge(grid, sl, nn, bk)

    def stage_for_discharge(self, q, slope, n, banks=None, reach=3.0, grid=None):
        """Normal-depth stage (t,) for discharge ``q`` (scalar or (t,)) on every
        profile: the lowest stage inside the profile carrying ``q``.

        A grid of stages (even steps from the thalweg to ``reach`` times the
        profile's depth at its lower end) brackets the first crossing;
        Chandrupatla's method (scipy.optimize.elementwise.find_root) refines all
        profiles at once. Above the lower end the water spills; only the water
        inside the profile counts (as if walled at the ends, with no wall
        perimeter), so such a stage is an upper bound where the plain continues
        beyond the transect: callers flag it (``stage > self.top``).
        Returns ``(stage, reached)``: ``reached`` is False where ``q`` exceeds
        what the profile carries even there (``stage`` is then NaN). ``grid``:
        the result of :meth:`discharge_grid` for the same slope, n and banks,
        to share it between flows.
        """
        t = self.count
        qq = np.broadcast_to(np.asarray(manning.check_discharge(q), dtype=float), (t,))
        sl = np.broadcast_to(np.asarray(manning.check_slope(slope), dtype=float), (t,))
        nn, bk = self._prepare(n, banks)
        grid, qg = grid if grid is not None else self.discharge_grid(sl, nn, bk, reach)
        above = qg >= qq[:, None]
        reached = above.any(axis=1) & self.valid & (self.top > self.thalweg)
        i = np.argmax(above, axis=1)
        rows = np.arange(t)
        hi_s = grid[rows, i]
        lo_s = grid[rows, np.maximum(i - 1, 0)]
        stage = np.where(reached, hi_s, np.nan)
        need = reached & (i > 0) & (qg[rows, i] > qq)
        if need.any():
            r = np.nonzero(need)[0]

            def f(s, ridx):
                ri = ridx.astype(int).ravel()
                k = self._conveyance_rows(ri, s.reshape(-1, 1), nn[ri],
                                          None if bk is None else bk[ri])
                return (k[:, 0] * np.sqrt(sl[ri]) - qq[ri]).reshape(s.shape)

            res = elementwise.find_root(f, (lo_s[r], hi_s[r]), args=(r.astype(float),),
                                        tolerances=dict(xatol=1e-9, xrtol=1e-12))
            stage[r] = res.x
        return stage, reached

