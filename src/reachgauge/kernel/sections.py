"""The section kernel: exact geometry of many piecewise-linear profiles at many stages.

Every caller — one surveyed profile, every transect of a reach, one stage, a rating
curve, a bankfull search, a stage solver — goes through the pure functions here,
over one array type, :class:`Profiles` (t profiles, padded to m points).

The ground of a profile is the piecewise-linear line through its points, so area,
wetted perimeter and top width are exact for that line (plane geometry: area by
trapezoids, perimeter along the ground only). Only water connected to the thalweg
counts: a depression behind a bank the water has not overtopped is not part of the
section. The key fact that makes this fast: walking out from the thalweg, the wet
region ends at the first point whose elevation reaches the stage, i.e. where the
*running maximum* of the ground outward from the thalweg first reaches it. The
running maxima are sorted, so the boundary is one binary search per (profile,
stage), and inside the wet interval every point of ground is under water. Area and
perimeter then follow from prefix sums of ∫(z − z_thalweg) dx and of segment
lengths, evaluated at the two water edges (which lie on known segments):

    A = (s − z₀)(x_r − x_l) − (G(x_r) − G(x_l)),   P = L(x_r) − L(x_l),   T = x_r − x_l

with G and L the running integrals. Subsections split the wet interval with
vertical lines at the bank offsets; the division lines carry no wetted perimeter
(divided-channel method, Chow, V. T., 1959, *Open-Channel Hydraulics*, §6-9).
Cost: O(log m) per (profile, stage); memory: a few arrays of the stages' shape.

If the water reaches an end of a profile the section *spills* on that side; the
figures are those of the water inside the profile (no wall), and the spill is
reported. Lengths are in the profile's unit (m or ft) throughout.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from reachgauge import manning


@dataclass(frozen=True)
class Profiles:
    """t ground profiles, each with its own offsets, padded on the right to m points.

    x, z (t, m): offsets (increasing within a row's valid points) and elevations;
    points past ``size`` repeat the last valid one. size (t,): valid points.
    i0 (t,): index of the thalweg (the point given, else the first lowest point);
    thalweg (t,): its elevation. left_max, right_max (t, m): running maxima of the ground walking out
    from the thalweg (entry k is the highest ground within k points), +inf past the
    profile's end. cz, cl (t, m): integrals from the left end of (z − thalweg) dx
    and of ground length, at each point. Build with :func:`profiles`.
    """

    x: np.ndarray
    z: np.ndarray
    size: np.ndarray
    i0: np.ndarray
    thalweg: np.ndarray
    left_max: np.ndarray
    right_max: np.ndarray
    cz: np.ndarray
    cl: np.ndarray

    @property
    def count(self) -> int:
        return self.z.shape[0]

    @property
    def valid(self) -> np.ndarray:
        """Profiles with at least 3 points (others give zero figures)."""
        return self.size >= 3

    @property
    def top(self) -> np.ndarray:
        """Highest stage that stays inside each profile: the lower of the highest
        points either side of the thalweg (an end behind a higher bank does not
        limit the section)."""
        rows = np.arange(self.count)
        left = self.left_max[rows, self.i0]                  # all points left of the thalweg
        right = self.right_max[rows, np.maximum(self.size - 1 - self.i0, 0)]
        return np.minimum(left, right)

    @property
    def thalweg_offset(self) -> np.ndarray:
        return self.x[np.arange(self.count), self.i0]

    @property
    def first_offset(self) -> np.ndarray:
        return self.x[:, 0]

    @property
    def last_offset(self) -> np.ndarray:
        return self.x[np.arange(self.count), np.maximum(self.size - 1, 0)]

    def take(self, rows) -> "Profiles":
        """The profiles at ``rows`` (indices, repeats allowed)."""
        rows = np.asarray(rows, dtype=int)
        return Profiles(*(getattr(self, f)[rows] for f in self.__dataclass_fields__))


def profiles(offset, elevation, thalweg=None, bed=None) -> Profiles:
    """Build :class:`Profiles` from offsets (m,) shared or (t, m) per profile, and
    elevations (t, m) or (m,). NaN elevations are dropped (the ground line bridges
    the gap linearly). Offsets must increase along each row; callers check input
    (see :class:`~reachgauge.kernel.crosssection.CrossSection`).

    ``thalweg`` (t,): column of each row's thalweg, where the caller knows it (a
    transect re-centred on the channel's lowest point: a deeper ditch or pond
    elsewhere on the transect is not the channel, and the water must be connected
    to the channel's thalweg). Default, or where that point has no elevation: the
    row's first lowest point. ``bed`` (t,): the elevation depths are measured from
    (:func:`reachgauge.kernel.bed.bed_level`), where finite and above the thalweg
    point; default the thalweg point's own elevation."""
    z = np.array(elevation, dtype=float, ndmin=2)
    x = np.broadcast_to(np.asarray(offset, dtype=float), z.shape)
    ok = np.isfinite(z) & np.isfinite(x)
    size = ok.sum(axis=1)
    t, m = z.shape
    x = x.copy()
    z = z.copy()
    ragged = np.nonzero(size < m)[0]
    if ragged.size:  # compact the valid points to the left, keeping their order, and pad
        sub = ok[ragged]
        order = np.argsort(~sub, axis=1, kind="stable")
        last = np.maximum(size[ragged] - 1, 0)[:, None]
        order = np.take_along_axis(order, np.minimum(np.arange(m)[None, :], last), axis=1)
        x[ragged] = np.take_along_axis(x[ragged], order, axis=1)
        z[ragged] = np.take_along_axis(z[ragged], order, axis=1)
        empty = size == 0
        x[empty], z[empty] = 0.0, 0.0

    k = np.arange(m)[None, :]
    i0 = np.argmin(np.where(k < size[:, None], z, np.inf), axis=1)
    if thalweg is not None:   # the given column, counted among the valid points
        col = np.broadcast_to(np.asarray(thalweg, dtype=int), (t,))
        given = ok[np.arange(t), col]
        i0 = np.where(given, np.cumsum(ok, axis=1)[np.arange(t), col] - 1, i0)
    base = np.arange(t)[:, None] * m
    zf = z.ravel()
    zt = zf.take(base[:, 0] + i0)
    if bed is not None:
        b = np.broadcast_to(np.asarray(bed, dtype=float), (t,))
        zt = np.where(np.isfinite(b) & (b > zt), b, zt)
    # running maxima outward: entry k covers the points i0-k..i0 (left), i0..i0+k (right)
    li = i0[:, None] - k
    ri = i0[:, None] + k
    left = np.where(li >= 0, zf.take(base + np.maximum(li, 0)), np.inf)
    right = np.where(ri < size[:, None], zf.take(base + np.minimum(ri, m - 1)), np.inf)
    left_max = np.maximum.accumulate(left, axis=1)
    right_max = np.maximum.accumulate(right, axis=1)

    dx = np.diff(x, axis=1)
    h = z - zt[:, None]
    cz = np.zeros((t, m))
    np.cumsum(0.5 * (h[:, 1:] + h[:, :-1]) * dx, axis=1, out=cz[:, 1:])
    cl = np.zeros((t, m))
    np.cumsum(np.hypot(dx, np.diff(z, axis=1)), axis=1, out=cl[:, 1:])
    return Profiles(x, z, size, i0, zt, left_max, right_max, cz, cl)


def count_below(sorted_rows, values):
    """Number of entries of each row of ``sorted_rows`` (t, m; ascending, +inf
    allowed) strictly below each of ``values`` (t, k): a branch-free binary search
    per (row, value), vectorised (the loop runs over the bits of m, not over data)."""
    t, m = sorted_rows.shape
    v = np.asarray(values, dtype=float)
    width = 1 << int(m).bit_length()               # a power of two > m, padded with +inf
    table = np.full((t, width), np.inf)
    table[:, :m] = sorted_rows
    flat = table.ravel()
    base = (np.arange(t) * width - 1).reshape((t,) + (1,) * (v.ndim - 1))
    pos = np.zeros(v.shape, dtype=np.intp)
    step = width >> 1
    while step:
        cand = pos + step
        pos = np.where(flat.take(base + cand) < v, cand, pos)
        step >>= 1
    return pos


@dataclass(frozen=True)
class Wet:
    """The wet interval of every (profile, stage): arrays of the stages' shape.

    stage, depth (stage − thalweg, ≥ 0); left_edge, right_edge: water-edge offsets
    (NaN where dry); spills_left / spills_right: the water reaches that end of the
    profile. area, wetted_perimeter, top_width of the whole connected section.
    Private: the running integrals at both edges, for subsections.
    """

    stage: np.ndarray
    depth: np.ndarray
    left_edge: np.ndarray
    right_edge: np.ndarray
    spills_left: np.ndarray
    spills_right: np.ndarray
    area: np.ndarray
    wetted_perimeter: np.ndarray
    top_width: np.ndarray
    _g: tuple  # (G(x_l), G(x_r)), running ∫(z − z₀) dx at the edges
    _l: tuple  # (L(x_l), L(x_r)), running ground length at the edges

    @property
    def hydraulic_radius(self):
        """R = A / P; 0 where dry."""
        return safe_ratio(self.area, self.wetted_perimeter)

    @property
    def hydraulic_depth(self):
        """D = A / T (Chow 1959, §2-7); 0 where dry."""
        return safe_ratio(self.area, self.top_width)

    @property
    def spills(self):
        return self.spills_left | self.spills_right


def safe_ratio(a, b):
    """a / b, 0 where b is 0 (a dry section has no hydraulic radius or depth)."""
    a = np.asarray(a, dtype=float)
    b = np.asarray(b, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(b > 0, a / np.where(b > 0, b, 1.0), 0.0)


def stage_grid(p: Profiles, stage) -> np.ndarray:
    """Stages as a (t, k) array: a scalar for every profile, (t,) one each, (t, k)."""
    s = np.asarray(stage, dtype=float)
    if s.ndim == 0:
        return np.full((p.count, 1), float(s))
    if s.ndim == 1:
        if s.size != p.count:
            raise ValueError(f"a 1-D stage needs one value per profile ({p.count}), got {s.size}")
        return s[:, None]
    if s.shape[0] != p.count:
        raise ValueError(f"stage rows ({s.shape[0]}) must match the profiles ({p.count})")
    return s


def wet(p: Profiles, stage) -> Wet:
    """The connected wet section of every profile at ``stage`` ((t, k), see
    :func:`stage_grid`). Invalid profiles (fewer than 3 points) are dry."""
    s = stage_grid(p, stage)
    t, m = p.z.shape
    i0 = p.i0[:, None]
    last = np.maximum(p.size - 1, 0)[:, None]
    zt = p.thalweg[:, None]
    is_wet = (s > zt) & p.valid[:, None]
    cl_ = count_below(p.left_max, s)        # points i0, i0-1, ... under water
    cr_ = count_below(p.right_max, s)
    spill_l = is_wet & (cl_ > i0)
    spill_r = is_wet & (cr_ > last - i0)
    base = np.arange(t)[:, None] * m
    xf, zf, czf, clf = p.x.ravel(), p.z.ravel(), p.cz.ravel(), p.cl.ravel()
    h = s - zt
    with np.errstate(all="ignore"):  # dry and spilled cells divide by 0; masked below
        # left edge: on the segment (j, j+1), j the first point out of the water
        j = base + np.clip(i0 - cl_, 0, np.maximum(last - 1, 0))
        zj, zj1 = zf.take(j), zf.take(j + 1)
        xj, xj1 = xf.take(j), xf.take(j + 1)
        c1 = clf.take(j + 1)
        u = (s - zj1) / (zj - zj1)                                 # wet share of the segment
        xl = np.where(spill_l, p.x[:, :1], xj1 - u * (xj1 - xj))
        gl = np.where(spill_l, 0.0, czf.take(j + 1) - 0.5 * (zj1 - zt + h) * (xj1 - xl))
        ll = np.where(spill_l, 0.0, c1 - u * (c1 - clf.take(j)))
        # right edge: on the segment (k-1, k), k the first point out of the water
        k = base + np.clip(i0 + cr_, np.minimum(1, last), last)
        zk, zk0 = zf.take(k), zf.take(k - 1)
        xk, xk0 = xf.take(k), xf.take(k - 1)
        c0 = clf.take(k - 1)
        v = (s - zk0) / (zk - zk0)
        end = base + last
        xr = np.where(spill_r, xf.take(end), xk0 + v * (xk - xk0))
        gr = np.where(spill_r, czf.take(end), czf.take(k - 1) + 0.5 * (zk0 - zt + h) * (xr - xk0))
        lr = np.where(spill_r, clf.take(end), c0 + v * (clf.take(k) - c0))
    width = np.where(is_wet, xr - xl, 0.0)
    area = np.where(is_wet, np.maximum(h * width - (gr - gl), 0.0), 0.0)
    perim = np.where(is_wet, lr - ll, 0.0)
    nan = np.nan
    return Wet(stage=s, depth=np.maximum(s - zt, 0.0),
               left_edge=np.where(is_wet, xl, nan), right_edge=np.where(is_wet, xr, nan),
               spills_left=spill_l, spills_right=spill_r, area=area, wetted_perimeter=perim,
               top_width=width, _g=(gl, gr), _l=(ll, lr))


def _at(p: Profiles, xq):
    """Running integrals G, L and the ground elevation at offsets ``xq`` (t, 1)
    (one per profile, clipped to the profile)."""
    rows = np.arange(p.count)[:, None]
    last = np.maximum(p.size - 1, 0)[:, None]
    xq = np.clip(xq, p.x[:, :1], p.x[rows, last])
    xs = np.where(np.arange(p.x.shape[1])[None, :] <= last, p.x, np.inf)
    j = np.clip(count_below(xs, xq) - 1, 0, np.maximum(last - 1, 0))
    x0, x1 = p.x[rows, j], p.x[rows, j + 1]
    z0, z1 = p.z[rows, j], p.z[rows, j + 1]
    with np.errstate(divide="ignore", invalid="ignore"):
        u = np.where(x1 > x0, (xq - x0) / (x1 - x0), 0.0)
    zq = z0 + u * (z1 - z0)
    zt = p.thalweg[:, None]
    g = p.cz[rows, j] + 0.5 * (z0 - zt + zq - zt) * (xq - x0)
    ln = p.cl[rows, j] + u * (p.cl[rows, j + 1] - p.cl[rows, j])
    return xq, g, ln


@dataclass(frozen=True)
class Parts:
    """Left overbank, main channel and right overbank: arrays (3,) + stages' shape."""

    area: np.ndarray
    wetted_perimeter: np.ndarray
    top_width: np.ndarray

    @property
    def hydraulic_radius(self):
        return safe_ratio(self.area, self.wetted_perimeter)


def parts(p: Profiles, w: Wet, banks) -> Parts:
    """Split the wet sections ``w`` at the bank offsets ``banks`` (t, 2: left,
    right) by vertical lines that are not wetted perimeter (Chow 1959, §6-9)."""
    bk = np.asarray(banks, dtype=float).reshape(p.count, 2)
    xa, ga, la = _at(p, bk[:, :1])
    xb, gb, lb = _at(p, bk[:, 1:])
    xl, xr = w.left_edge, w.right_edge
    gl, gr = w._g
    ll, lr = w._l
    s0 = w.depth  # (s − z₀)
    dry = ~(w.top_width > 0)

    def piece(u, gu, lu, v, gv, lv):
        width = np.where(dry | (v <= u), 0.0, v - u)
        area = np.where(width > 0, np.maximum(s0 * width - (gv - gu), 0.0), 0.0)
        return area, np.where(width > 0, lv - lu, 0.0), width

    # each cut point is a bank where the bank lies inside the water, else an edge
    a_in = xa < xr
    b_in = xb > xl
    left = piece(xl, gl, ll, np.where(a_in, xa, xr), np.where(a_in, ga, gr), np.where(a_in, la, lr))
    a_u = xa > xl
    b_v = xb < xr
    chan = piece(np.where(a_u, xa, xl), np.where(a_u, ga, gl), np.where(a_u, la, ll),
                 np.where(b_v, xb, xr), np.where(b_v, gb, gr), np.where(b_v, lb, lr))
    right = piece(np.where(b_in, xb, xl), np.where(b_in, gb, gl), np.where(b_in, lb, ll),
                  xr, gr, lr)
    return Parts(*(np.stack([left[i], chan[i], right[i]]) for i in range(3)))


def roughness_triple(n, t: int) -> np.ndarray:
    """Manning's n as (t, 3): (left overbank, channel, right overbank) per profile,
    from a scalar, a (3,) triple, (t,) one n per profile, or (t, 3)."""
    nn = np.asarray(manning.check_n(n), dtype=float)
    if nn.ndim == 1 and nn.size != 3:   # a 1-D triple is (left, channel, right) for all
        nn = nn.reshape(-1, 1)
    return np.broadcast_to(nn, (t, 3))


def whole_banks(p: Profiles) -> np.ndarray:
    """Bank offsets that make the whole section the channel (no overbanks)."""
    return np.column_stack([np.full(p.count, -np.inf), np.full(p.count, np.inf)])


@dataclass(frozen=True)
class Flow:
    """Manning discharge of every (profile, stage) by the divided-channel method.

    wet: the whole connected section; parts: its subsections; part_discharge (3,
    ...): discharge of each subsection; discharge: their sum (m³/s or ft³/s).
    """

    wet: Wet
    parts: Parts
    part_discharge: np.ndarray

    @property
    def discharge(self):
        return self.part_discharge.sum(axis=0)


def flow(p: Profiles, stage, slope, n, banks=None, units="si") -> Flow:
    """Divided-channel Manning discharge (Chow 1959, §6-9; Manning's equation,
    Chow 1959, Eq. 5-6): the sum over left overbank, channel and right overbank of
    (k/n_i) A_i R_i^(2/3) S^(1/2). ``slope`` scalar or (t,); ``n`` see
    :func:`roughness_triple`; ``banks`` (t, 2) offsets, or None for one section."""
    w = wet(p, stage)
    pt = parts(p, w, whole_banks(p) if banks is None else banks)
    nn = roughness_triple(n, p.count)
    sq = np.sqrt(np.broadcast_to(manning.check_slope(slope), (p.count,)))
    shape = (p.count,) + (1,) * (w.stage.ndim - 1)
    r = pt.hydraulic_radius
    q = np.stack([manning.conveyance(pt.area[i], r[i], nn[:, i].reshape(shape), units)
                  for i in range(3)]) * sq.reshape(shape)
    return Flow(w, pt, q)
