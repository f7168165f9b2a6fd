"""One station–elevation profile: a one-row view of the section kernel.

:class:`CrossSection` checks its input (the kernel assumes clean arrays) and answers
every question about one profile through :mod:`reachgauge.kernel.sections` and
:mod:`reachgauge.kernel.solver`: geometry at any array of stages, subsections at the
banks, divided-channel conveyance and discharge, normal and critical stage. See
:mod:`reachgauge.kernel.sections` for the geometry (exact for the piecewise-linear
ground; only water connected to the thalweg counts; a section that reaches an end of
the profile *spills* and counts the water inside the profile only, with no wall).
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass

import numpy as np

from reachgauge import manning
from reachgauge.errors import InputError, ReachgaugeWarning
from reachgauge.kernel import sections as K
from reachgauge.kernel import solver


@dataclass(frozen=True)
class Geometry:
    """Hydraulic geometry at an array of stages (all arrays share the stage's shape).

    Lengths in the profile's unit (m or ft), areas in its square. ``left_edge`` /
    ``right_edge`` are the offsets of the water's edges; NaN when dry.
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
        return K.safe_ratio(self.area, self.wetted_perimeter)

    @property
    def hydraulic_depth(self) -> np.ndarray:
        """D = A / T (Chow 1959, §2-7); 0 where dry."""
        return K.safe_ratio(self.area, self.top_width)

    @property
    def spills(self) -> np.ndarray:
        """True where the water reaches either end of the profile."""
        return self.spills_left | self.spills_right


@dataclass(frozen=True)
class Part:
    """Area, wetted perimeter and top width of one subsection."""

    area: np.ndarray
    wetted_perimeter: np.ndarray
    top_width: np.ndarray

    @property
    def hydraulic_radius(self) -> np.ndarray:
        return K.safe_ratio(self.area, self.wetted_perimeter)


@dataclass(frozen=True)
class SubsectionGeometry:
    """Left overbank, main channel and right overbank, split at vertical lines
    through the bank offsets that are not wetted perimeter (Chow 1959, §6-9)."""

    left: Part
    channel: Part
    right: Part

    @property
    def parts(self):
        return (self.left, self.channel, self.right)


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
        self.offset = x
        self.elevation = z
        self._p = K.profiles(x, z[None, :])

    @classmethod
    def _trusted(cls, offset, elevation, banks=None) -> "CrossSection":
        """A section from arrays already checked (kernel rows), without re-checking."""
        cs = object.__new__(cls)
        cs.offset, cs.elevation, cs.banks = offset, elevation, banks
        cs._p = K.profiles(offset, elevation[None, :])
        return cs

    @property
    def profiles(self) -> K.Profiles:
        """This section as a one-row :class:`~reachgauge.kernel.sections.Profiles`."""
        return self._p

    # ------------------------------------------------------------------ basics
    @property
    def thalweg(self) -> float:
        """Lowest elevation of the profile."""
        return float(self._p.thalweg[0])

    @property
    def thalweg_offset(self) -> float:
        """Offset of the lowest point (the first, if several tie)."""
        return float(self._p.thalweg_offset[0])

    @property
    def top(self) -> float:
        """Highest stage that stays inside the profile: the lower of the highest
        points on either side of the thalweg. Above it the connected water
        reaches an end of the profile (it spills); an end lower than a bank in
        between is behind that bank and does not limit the section."""
        return float(self._p.top[0])

    def __repr__(self) -> str:
        return (f"CrossSection({self.offset.size} points, offsets {self.offset[0]:g}"
                f"..{self.offset[-1]:g}, thalweg {self.thalweg:g})")

    # ---------------------------------------------------------------- geometry
    @staticmethod
    def _stages(stage):
        s = np.asarray(stage, dtype=float)
        if not np.all(np.isfinite(s)):
            raise InputError("stage contains NaN or infinite values",
                             "give finite water-surface elevations")
        return s

    def geometry(self, stage) -> Geometry:
        """Hydraulic geometry at ``stage`` (scalar or array of water-surface
        elevations). Returns a :class:`Geometry` of arrays of the stage's shape."""
        s = self._stages(stage)
        w = K.wet(self._p, s.reshape(1, -1))
        r = (lambda a: a.reshape(s.shape))
        return Geometry(stage=r(w.stage), depth=r(w.depth), area=r(w.area),
                        wetted_perimeter=r(w.wetted_perimeter), top_width=r(w.top_width),
                        left_edge=r(w.left_edge), right_edge=r(w.right_edge),
                        spills_left=r(w.spills_left), spills_right=r(w.spills_right))

    def _banks(self, banks):
        if banks is not None:
            return CrossSection(self.offset, self.elevation, banks=banks).banks
        if self.banks is None:
            raise InputError("no bank offsets to split the section at",
                             "create the CrossSection with banks=(left, right)")
        return self.banks

    def subsections(self, stage, banks=None) -> SubsectionGeometry:
        """Geometry split at the bank offsets into left overbank, channel and
        right overbank (vertical division lines carry no wetted perimeter;
        Chow 1959, §6-9). ``banks`` defaults to the section's own banks."""
        bk = np.asarray(self._banks(banks), dtype=float).reshape(1, 2)
        s = self._stages(stage)
        pt = K.parts(self._p, K.wet(self._p, s.reshape(1, -1)), bk)
        r = (lambda a: a.reshape(s.shape))
        return SubsectionGeometry(*(Part(r(pt.area[i]), r(pt.wetted_perimeter[i]),
                                         r(pt.top_width[i])) for i in range(3)))

    # --------------------------------------------------------------- discharge
    def _n(self, n):
        """n as the kernel's (1, 3) triple; three values need banks."""
        n_arr = np.atleast_1d(np.asarray(n, dtype=float)).ravel()
        if n_arr.size == 3 and self.banks is None:
            raise InputError("three n values need bank offsets",
                             "create the CrossSection with banks=(left, right) or give one n")
        if n_arr.size not in (1, 3):
            raise InputError(f"n must be one value or three (left, channel, right), got {n_arr.size}",
                             "give n as a number or a (left, channel, right) triple")
        manning.check_n(n_arr)
        return np.broadcast_to(n_arr, (3,)).reshape(1, 3)

    def _bank_rows(self):
        return None if self.banks is None else np.asarray(self.banks, dtype=float).reshape(1, 2)

    def flow(self, stage, slope, n, units="si") -> K.Flow:
        """The kernel's :class:`~reachgauge.kernel.sections.Flow` at ``stage``
        (arrays (1, k)): whole section, subsections and their discharges."""
        manning.unit_system(units)
        s = self._stages(stage)
        return K.flow(self._p, s.reshape(1, -1), slope, self._n(n), self._bank_rows(), units)

    def conveyance(self, stage, n, units="si"):
        """Conveyance K (Q = K S^(1/2)) at ``stage``.

        ``n`` is one Manning's n, or, for a section with banks, a triple
        ``(n_left_overbank, n_channel, n_right_overbank)``. With banks the
        total is the sum of subsection conveyances (divided-channel method,
        Chow 1959, §6-9); without, the whole section is one conveyance.
        """
        s = self._stages(stage)
        return self.flow(s, 1.0, n, units).discharge.reshape(s.shape)

    def discharge(self, stage, slope, n, units="si"):
        """Manning discharge at ``stage`` (m³/s or ft³/s); see :meth:`conveyance`."""
        return self.conveyance(stage, n, units) * np.sqrt(manning.check_slope(slope))

    def stage_for_discharge(self, q, slope, n, units="si") -> float:
        """Normal-depth stage for discharge ``q`` (Manning, uniform flow).

        Returns the lowest stage inside the profile whose Manning discharge is
        ``q`` (policy ``"inside"`` of :mod:`reachgauge.kernel.solver`). Raises
        :class:`InputError` when ``q`` exceeds what the profile can carry below
        its lower end. Where ``q`` is carried only once the water tops a bank into
        lower ground behind it, the stage is that bank's elevation (the discharge
        there is below ``q``, just above it more) and a
        :class:`~reachgauge.errors.ReachgaugeWarning` says so.
        """
        q = float(manning.check_discharge(q))
        manning.check_slope(slope)
        manning.unit_system(units)
        sol = solver.normal_stage(self._p, np.array([q]), slope, self._n(n), self._bank_rows(),
                                  units)
        if sol.at_jump[0]:
            warnings.warn(f"discharge {q:.4g} is carried only once the water tops a bank at "
                          f"{sol.stage[0]:.4g} into lower ground behind it; that elevation is "
                          "returned", ReachgaugeWarning, stacklevel=2)
        return self._solved(sol, q, "discharge", lambda s: self.discharge(s, slope, n, units),
                            "widen the transect (half-width) or check the discharge and its units")

    def critical_stage(self, q, units="si") -> float:
        """Critical-flow stage for discharge ``q``: where Q² T / (g A³) = 1, i.e.
        the section factor A^(3/2) / T^(1/2) equals Q / g^(1/2) (Chow 1959, Eq. 4-5)."""
        q = float(manning.check_discharge(q))
        sol = solver.critical_stage(self._p, np.array([q]), units)
        g = manning.unit_system(units).g

        def factor(s):
            geo = self.geometry(s)
            return K.safe_ratio(geo.area ** 1.5, np.sqrt(geo.top_width)) * np.sqrt(g)

        return self._solved(sol, q, "discharge", factor,
                            "widen the transect (half-width) or check the discharge")

    def _solved(self, sol, q, what, func, fix) -> float:
        if self.top <= self.thalweg:
            raise InputError("the profile has no depth: its lower end is at the thalweg",
                             "widen the transect so both ends stand above the channel")
        if not sol.reached[0]:
            grid = np.linspace(self.thalweg, self.top, 257)
            vals = func(grid)
            raise InputError(
                f"{what} {q:.4g} cannot be reached inside the profile "
                f"(at most {vals.max():.4g} at stage {grid[np.argmax(vals)]:.4g}, "
                f"the profile's lower end being {self.top:.4g})", fix)
        return float(sol.stage[0])
