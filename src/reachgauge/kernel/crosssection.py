"""The geometry and hydraulics of one station–elevation profile at any stage.

The ground is the piecewise-linear line through the surveyed (or sampled)
points. At a stage (water-surface elevation) each ground segment is clipped at
the water line, the crossing point interpolated linearly, so area, wetted
perimeter and top width are exact for that line (standard plane geometry: area
by trapezoids, perimeter along the ground only).

Only water connected to the thalweg counts: walking out from the lowest point,
the wetted region ends at the first ground point on each side that stands at or
above the stage. A depression behind a bank that the water has not overtopped is
not part of the section. If the water reaches an end of the profile without
meeting such a point, the section *spills* on that side: the figures are those
of the water inside the profile, and ``spills_left`` / ``spills_right`` say so
(no wall is added).

Everything is vectorised over stages: a rating curve of many stages is one set
of 2-D array operations (stages × segments), evaluated in blocks to bound memory.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.optimize import brentq

from reachgauge import manning
from reachgauge.errors import InputError

# Stages are evaluated in blocks of at most this many (stage, segment) cells so a
# long profile and a long rating curve never build a huge temporary array.
_BLOCK_CELLS = 2_000_000


@dataclass(frozen=True)
class Geometry:
    """Hydraulic geometry at an array of stages (all arrays share one shape).

    Lengths in the profile's unit (m or ft), areas in its square.
    ``left_edge`` / ``right_edge`` are the offsets of the water's edges; NaN when dry.
    """

    stage: np.ndarray
    depth: np.ndarray
    area: np.ndarray
    wetted_perimeter: np.ndarray
    top_width: np.ndarray
    left_edge: np.ndarray
    right_edge: np.ndarray
    spills_left: np.ndarray
    spills_right: np.ndarray

    @property
    def hydraulic_radius(self) -> np.ndarray:
        """R = A / P; 0 where dry."""
        return safe_ratio(self.area, self.wetted_perimeter)

    @property
    def hydraulic_depth(self) -> np.ndarray:
        """D = A / T (Chow 1959, §2-7); 0 where dry."""
        return safe_ratio(self.area, self.top_width)

    @property
    def spills(self) -> np.ndarray:
        """True where the water reaches either end of the profile."""
        return self.spills_left | self.spills_right


@dataclass(frozen=True)
class SubsectionGeometry:
    """Geometry of the left overbank, main channel and right overbank.

    Each part is a :class:`Geometry`-like set of arrays (``area``,
    ``wetted_perimeter``, ``top_width``) split at vertical lines through the
    bank offsets. The vertical division lines are not wetted perimeter
    (divided-channel method, Chow 1959, §6-9).
    """

    left: "_Part"
    channel: "_Part"
    right: "_Part"

    @property
    def parts(self):
        return (self.left, self.channel, self.right)


@dataclass(frozen=True)
class _Part:
    area: np.ndarray
    wetted_perimeter: np.ndarray
    top_width: np.ndarray

    @property
    def hydraulic_radius(self) -> np.ndarray:
        return safe_ratio(self.area, self.wetted_perimeter)


def safe_ratio(a, b):
    """a / b, 0 where b is 0 (a dry section has no hydraulic radius or depth)."""
    a = np.asarray(a, dtype=float)
    b = np.asarray(b, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(b > 0, a / np.where(b > 0, b, 1.0), 0.0)


def clip_at_water(d1, d2, width, length, connected):
    """Wetted area, perimeter and top width of straight ground segments.

    ``d1``, ``d2``: water depth (stage minus ground) at each segment's ends;
    ``width``, ``length``: its horizontal and sloping lengths; ``connected``:
    segments whose water joins the thalweg (others count nothing). All arrays
    broadcast. With d⁺ = max(d, 0) the wet fraction of a segment is
    (d1⁺ + d2⁺) / (|d1| + |d2|), exact where a straight segment crosses the
    water line; its area is the trapezoid 0.5 (d1⁺ + d2⁺) × wet width.
    """
    p1 = np.maximum(d1, 0.0)
    p2 = np.maximum(d2, 0.0)
    denom = np.abs(d1) + np.abs(d2)
    with np.errstate(divide="ignore", invalid="ignore"):
        frac = np.where(denom > 0, (p1 + p2) / np.where(denom > 0, denom, 1.0), 0.0)
    frac = np.where(connected, frac, 0.0)
    return 0.5 * (p1 + p2) * frac * width, frac * length, frac * width


class CrossSection:
    """One profile across a channel: ``offset`` (left to right looking
    downstream) and ``elevation``, both 1-D arrays in the same length unit.

    Parameters
    ----------
    offset, elevation : array-like
        At least 3 finite points; offsets strictly increasing.
    banks : (float, float), optional
        Left and right bank offsets. When given, :meth:`discharge` uses the
        divided-channel method (left overbank, channel, right overbank).
    drop_nan : bool
        Drop points whose elevation is NaN instead of raising.
    """

    def __init__(self, offset, elevation, *, banks=None, drop_nan=False):
        x = np.asarray(offset, dtype=float).ravel()
        z = np.asarray(elevation, dtype=float).ravel()
        if x.size != z.size:
            raise InputError(
                f"offset and elevation differ in length ({x.size} and {z.size})",
                "give one elevation per offset")
        if not np.all(np.isfinite(x)):
            raise InputError("offsets contain NaN or infinite values",
                             "remove or fill the points with no offset")
        bad = ~np.isfinite(z)
        if bad.any():
            if not drop_nan:
                raise InputError(
                    f"{int(bad.sum())} elevation(s) are NaN or infinite "
                    f"(first at offset {x[bad][0]:g})",
                    "fill them, or pass drop_nan=True to drop those points")
            x, z = x[~bad], z[~bad]
        if x.size < 3:
            raise InputError(f"a cross-section needs at least 3 points, got {x.size}",
                             "sample the profile more finely or widen it")
        if np.any(np.diff(x) <= 0):
            i = int(np.argmax(np.diff(x) <= 0))
            raise InputError(
                f"offsets must increase strictly, but offset {x[i + 1]:g} follows {x[i]:g}",
                "sort the points from left bank to right bank and remove duplicates")
        self.banks = None
        if banks is not None:
            lb, rb = (float(v) for v in banks)
            if not (x[0] <= lb < rb <= x[-1]):
                raise InputError(
                    f"bank offsets ({lb:g}, {rb:g}) must satisfy "
                    f"{x[0]:g} <= left < right <= {x[-1]:g}",
                    "give the left bank first and keep both inside the profile")
            self.banks = (lb, rb)
            # Put vertices at the banks so every subsection is a set of whole segments.
            extra = np.array([v for v in (lb, rb) if not np.any(np.isclose(x, v, rtol=0, atol=1e-12))])
            if extra.size:
                z = np.concatenate([z, np.interp(extra, x, z)])
                x = np.concatenate([x, extra])
                order = np.argsort(x)
                x, z = x[order], z[order]
        self.offset = x
        self.elevation = z
        self._i0 = int(np.argmin(z))
        dx = np.diff(x)
        self._dx = dx
        self._seglen = np.hypot(dx, np.diff(z))
        # Running maxima outward from the thalweg: the wet region at a stage ends
        # at the first point on each side whose running maximum reaches it.
        self._left_max = np.maximum.accumulate(z[: self._i0 + 1][::-1])
        self._right_max = np.maximum.accumulate(z[self._i0:])

    # ------------------------------------------------------------------ basics
    @property
    def thalweg(self) -> float:
        """Lowest elevation of the profile."""
        return float(self.elevation[self._i0])

    @property
    def thalweg_offset(self) -> float:
        """Offset of the lowest point (the first, if several tie)."""
        return float(self.offset[self._i0])

    @property
    def top(self) -> float:
        """Highest stage that stays inside the profile: the lower of the highest
        points on either side of the thalweg. Above it the connected water
        reaches an end of the profile (it spills); an end lower than a bank in
        between is behind that bank and does not limit the section."""
        return float(min(self._left_max[-1], self._right_max[-1]))

    def __repr__(self) -> str:
        return (f"CrossSection({self.offset.size} points, offsets {self.offset[0]:g}"
                f"..{self.offset[-1]:g}, thalweg {self.thalweg:g})")

    # ---------------------------------------------------------------- geometry
    def _segments(self, stage):
        """Per-segment wetted area, perimeter and top width at each stage.

        Returns arrays of shape (stages, segments) (see :func:`clip_at_water`)
        plus the water-edge offsets and spill flags.
        """
        s = stage[:, None]
        z = self.elevation
        i0 = self._i0
        nseg = z.size - 1
        kl = np.searchsorted(self._left_max, stage, side="left")
        kr = np.searchsorted(self._right_max, stage, side="left")
        spill_l = kl >= self._left_max.size
        spill_r = kr >= self._right_max.size
        jl = np.where(spill_l, 0, i0 - np.minimum(kl, i0))          # boundary vertex (or end)
        jr = np.where(spill_r, nseg, i0 + np.minimum(kr, nseg - i0))
        seg = np.arange(nseg)[None, :]
        connected = (seg >= jl[:, None]) & (seg < jr[:, None])
        area, perim, width = clip_at_water(s - z[None, :-1], s - z[None, 1:], self._dx[None, :],
                                           self._seglen[None, :], connected)

        # Water edges: interpolated crossing on the boundary segment, or the end.
        x = self.offset
        wet = stage > self.thalweg
        with np.errstate(all="ignore"):  # spilled sides divide by 0; masked below
            jl1 = np.minimum(jl + 1, nseg)
            tl = (stage - z[jl1]) / (z[jl] - z[jl1])
            left = np.where(spill_l, x[0], x[jl1] - tl * (x[jl1] - x[jl]))
            jr0 = np.maximum(jr - 1, 0)
            tr = (stage - z[jr0]) / (z[jr] - z[jr0])
            right = np.where(spill_r, x[-1], x[jr0] + tr * (x[jr] - x[jr0]))
        left = np.where(wet, left, np.nan)
        right = np.where(wet, right, np.nan)
        return area, perim, width, left, right, spill_l & wet, spill_r & wet

    def _blocks(self, stage):
        per = max(1, _BLOCK_CELLS // max(1, self.offset.size))
        for i in range(0, stage.size, per):
            yield slice(i, i + per), self._segments(stage[i:i + per])

    def geometry(self, stage) -> Geometry:
        """Hydraulic geometry at ``stage`` (scalar or 1-D array of water-surface
        elevations). Returns a :class:`Geometry` of arrays (0-d for a scalar)."""
        stage_arr = np.asarray(stage, dtype=float)
        flat = np.atleast_1d(stage_arr).ravel()
        if not np.all(np.isfinite(flat)):
            raise InputError("stage contains NaN or infinite values",
                             "give finite water-surface elevations")
        out = {k: np.empty(flat.size) for k in ("area", "perim", "width", "left", "right")}
        sl = np.empty(flat.size, dtype=bool)
        sr = np.empty(flat.size, dtype=bool)
        for idx, (a, p, w, le, re, l_sp, r_sp) in self._blocks(flat):
            out["area"][idx] = a.sum(axis=1)
            out["perim"][idx] = p.sum(axis=1)
            out["width"][idx] = w.sum(axis=1)
            out["left"][idx] = le
            out["right"][idx] = re
            sl[idx] = l_sp
            sr[idx] = r_sp
        shape = stage_arr.shape
        return Geometry(
            stage=flat.reshape(shape),
            depth=np.maximum(flat - self.thalweg, 0.0).reshape(shape),
            area=out["area"].reshape(shape),
            wetted_perimeter=out["perim"].reshape(shape),
            top_width=out["width"].reshape(shape),
            left_edge=out["left"].reshape(shape),
            right_edge=out["right"].reshape(shape),
            spills_left=sl.reshape(shape),
            spills_right=sr.reshape(shape),
        )

    def subsections(self, stage, banks=None) -> SubsectionGeometry:
        """Geometry split at the bank offsets into left overbank, channel and
        right overbank (vertical division lines carry no wetted perimeter;
        Chow 1959, §6-9). ``banks`` defaults to the section's own banks."""
        section = self
        if banks is not None and (self.banks is None or tuple(banks) != self.banks):
            section = CrossSection(self.offset, self.elevation, banks=banks)
        if section.banks is None:
            raise InputError("no bank offsets to split the section at",
                             "create the CrossSection with banks=(left, right)")
        stage_arr = np.asarray(stage, dtype=float)
        flat = np.atleast_1d(stage_arr).ravel()
        mid = 0.5 * (section.offset[:-1] + section.offset[1:])
        lb, rb = section.banks
        masks = (mid < lb, (mid >= lb) & (mid <= rb), mid > rb)
        sums = np.zeros((3, 3, flat.size))
        for idx, (a, p, w, *_rest) in section._blocks(flat):
            for j, m in enumerate(masks):
                sums[j, 0, idx] = a[:, m].sum(axis=1)
                sums[j, 1, idx] = p[:, m].sum(axis=1)
                sums[j, 2, idx] = w[:, m].sum(axis=1)
        parts = [_Part(*(sums[j, i].reshape(stage_arr.shape) for i in range(3))) for j in range(3)]
        return SubsectionGeometry(*parts)

    # --------------------------------------------------------------- discharge
    def conveyance(self, stage, n, units="si"):
        """Conveyance K (Q = K S^(1/2)) at ``stage``.

        ``n`` is one Manning's n, or, for a section with banks, a triple
        ``(n_left_overbank, n_channel, n_right_overbank)``. With banks the
        total is the sum of subsection conveyances (divided-channel method,
        Chow 1959, §6-9); without, the whole section is one conveyance.
        """
        n_arr = np.atleast_1d(np.asarray(n, dtype=float))
        if self.banks is None:
            if n_arr.size != 1:
                raise InputError("three n values need bank offsets",
                                 "create the CrossSection with banks=(left, right) or give one n")
            g = self.geometry(stage)
            return manning.conveyance(g.area, g.hydraulic_radius, n_arr[0], units)
        if n_arr.size == 1:
            n_arr = np.repeat(n_arr, 3)
        if n_arr.size != 3:
            raise InputError(f"n must be one value or three (left, channel, right), got {n_arr.size}",
                             "give n as a number or a (left, channel, right) triple")
        sub = self.subsections(stage)
        return sum(manning.conveyance(p.area, p.hydraulic_radius, ni, units)
                   for p, ni in zip(sub.parts, n_arr))

    def discharge(self, stage, slope, n, units="si"):
        """Manning discharge at ``stage`` (m³/s or ft³/s); see :meth:`conveyance`."""
        return self.conveyance(stage, n, units) * np.sqrt(manning.check_slope(slope))

    def _solve_stage(self, func, target, what, fix):
        """Lowest stage inside the profile where ``func(stage)`` reaches
        ``target``: scan a grid (even steps plus every vertex elevation), then
        refine with Brent's method (scipy.optimize.brentq) inside the first
        bracketing interval."""
        lo, hi = self.thalweg, self.top
        if hi <= lo:
            raise InputError("the profile has no depth: its lower end is at the thalweg",
                             "widen the transect so both ends stand above the channel")
        # Add the vertex elevations: the figures change shape only there, so a
        # peak of a non-monotone curve (water about to spill onto a flat) is seen.
        z = self.elevation
        grid = np.union1d(np.linspace(lo, hi, 257), z[(z > lo) & (z < hi)])
        vals = func(grid)
        above = np.nonzero(vals >= target)[0]
        if above.size == 0:
            raise InputError(
                f"{what} {target:.4g} cannot be reached inside the profile "
                f"(at most {vals.max():.4g} at stage {grid[np.argmax(vals)]:.4g}, "
                f"the profile's lower end being {hi:.4g})", fix)
        i = int(above[0])
        if i == 0 or vals[i] == target:
            return float(grid[i])
        return float(brentq(lambda s: float(func(np.array([s]))[0]) - target,
                            grid[i - 1], grid[i], xtol=1e-10, rtol=4 * np.finfo(float).eps))

    def stage_for_discharge(self, q, slope, n, units="si") -> float:
        """Normal-depth stage for discharge ``q`` (Manning, uniform flow).

        Returns the lowest stage inside the profile whose Manning discharge is
        ``q``. Raises :class:`InputError` when ``q`` exceeds what the profile can
        carry below its lower end.
        """
        q = float(manning.check_discharge(q))
        manning.check_slope(slope)
        manning.check_n(n)
        if q == 0:
            return self.thalweg
        return self._solve_stage(
            lambda s: self.discharge(s, slope, n, units), q, "discharge",
            "widen the transect (half-width) or check the discharge and its units")

    def critical_stage(self, q, units="si") -> float:
        """Critical-flow stage for discharge ``q``: where Q² T / (g A³) = 1, i.e.
        the section factor A^(3/2) / T^(1/2) equals Q / g^(1/2) (Chow 1959, Eq. 4-5)."""
        q = float(manning.check_discharge(q))
        if q == 0:
            return self.thalweg
        g = manning.unit_system(units).g

        def factor(s):
            geo = self.geometry(s)
            return np.where(geo.top_width > 0,
                            geo.area ** 1.5 / np.sqrt(np.where(geo.top_width > 0, geo.top_width, 1.0)),
                            0.0)

        return self._solve_stage(factor, q / np.sqrt(g), "critical-flow section factor for discharge",
                                 "widen the transect (half-width) or check the discharge")
