"""Where one flow goes on one reach: water surface, depth grid and footprint.

The water-surface elevation of a flow is known at the reach's transects (the
normal-depth stage of the design checks, :mod:`reachgauge.hydraulics.capacity`).
Between them it is interpolated linearly in chainage, each cell of the corridor
taking the surface at the chainage of its nearest point on the centreline
(:mod:`reachgauge.flood.corridor`), measured along the centreline smoothed over
the mapped half-width (:func:`~reachgauge.flood.corridor.valley_line`: far from a
meandering channel the nearest point of the channel itself jumps from loop to
loop, and the surface would step with it), and held level beyond the first and
last transect. Depth is that surface minus the terrain; the footprint is the wet cells
(depth > 0) connected, through cells sharing an edge, to the channel: the cells of
the transects' thalweg points (``scipy.ndimage.label``). A low field behind a bank
the surface does not reach over is not part of it, the same rule the sections
follow (the wet region is the one connected to the thalweg).

Out of bank: the wet cells outside the channel, the band between the bank offsets
of the transects interpolated along the reach (:func:`channel_cells`). The banks'
band, not the bankfull stage mapped like a flow: a bankfull stage a hair above a
flat floodplain (as a pick at the bank top is) would flood all of it.

This is a screening map: one-dimensional normal-depth stages, terrain as flown
(no channel bed under the water, no bridges or culverts), no storage or timing.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import shapely
from rasterio import features
from scipy import ndimage

from reachgauge.flood.corridor import Corridor


@dataclass(frozen=True)
class FlowMap:
    """One flow on one reach. ``depth`` (h, w) m, NaN where dry or outside the
    footprint; ``wet`` the footprint's cells; ``out_of_bank`` the footprint's cells
    outside the bankfull footprint (all False where no bankfull surface is known);
    areas in m², depths in m; ``cut_*``: where the footprint reaches the corridor's
    outer edge (the width limit), chainage m, NaN when it does not."""

    depth: np.ndarray
    wet: np.ndarray
    out_of_bank: np.ndarray
    wet_area: float
    out_of_bank_area: float
    mean_depth: float
    max_depth: float
    cut_from: float
    cut_to: float
    cut_length: float
    cut_sides: str


def surface(cor: Corridor, chainage, stage) -> np.ndarray:
    """Water-surface elevation (m) on every corridor cell: ``stage`` (t,) at the
    transects' positions ``chainage`` (t,) along the valley line interpolated at
    each cell's position along it (NaN stages skipped; all NaN outside the
    corridor or when no stage is known)."""
    ch = np.asarray(chainage, dtype=float)
    st = np.asarray(stage, dtype=float)
    keep = np.isfinite(ch) & np.isfinite(st)
    if not keep.any():
        return np.full(cor.inside.shape, np.nan)
    order = np.argsort(ch[keep], kind="stable")
    s = np.where(cor.inside, cor.along, 0.0)
    return np.where(cor.inside, np.interp(s, ch[keep][order], st[keep][order]), np.nan)


def connected_wet(depth, own, seeds) -> np.ndarray:
    """Cells with depth > 0 among ``own`` connected (4-neighbour: water does not
    pass between two cells touching only at a corner) to any ``seeds`` cell (k, 2)
    rows and columns; a seed's 3 × 3 neighbourhood counts, so a thalweg point on
    the edge of its pixel still finds the channel."""
    wet = own & (np.nan_to_num(depth, nan=-1.0) > 0)
    lab, count = ndimage.label(wet)
    if count == 0 or len(seeds) == 0:
        return np.zeros_like(wet)
    h, w = wet.shape
    r = np.clip(np.asarray(seeds)[:, 0, None] + np.array([-1, -1, -1, 0, 0, 0, 1, 1, 1]), 0, h - 1)
    c = np.clip(np.asarray(seeds)[:, 1, None] + np.array([-1, 0, 1, -1, 0, 1, -1, 0, 1]), 0, w - 1)
    hit = np.unique(lab[r, c])
    return np.isin(lab, hit[hit > 0])


def seed_cells(transform, shape, xy) -> np.ndarray:
    """(k, 2) row and column of the points ``xy`` (k, 2) that fall in the grid."""
    xy = np.asarray(xy, dtype=float).reshape(-1, 2)
    xy = xy[np.isfinite(xy).all(axis=1)]
    inv = ~transform
    c = np.floor(inv.a * xy[:, 0] + inv.b * xy[:, 1] + inv.c).astype(int)
    r = np.floor(inv.d * xy[:, 0] + inv.e * xy[:, 1] + inv.f).astype(int)
    ok = (r >= 0) & (r < shape[0]) & (c >= 0) & (c < shape[1])
    return np.column_stack([r[ok], c[ok]])


def channel_cells(cor: Corridor, chainage, left, right) -> np.ndarray | None:
    """The channel between the banks: cells whose signed offset from the centreline
    (m, + to the right looking downstream) lies between the left and right bank
    offsets ``left``, ``right`` (t,) at the transects' ``chainage`` (t,) along the
    centreline, interpolated linearly between transects and held beyond the first
    and last. NaN banks (no published bankfull stage) are skipped; None when no
    transect has banks. Offsets, not a bankfull water surface: a surface a hair
    above a flat floodplain would cover all of it."""
    ch = np.asarray(chainage, float)
    lo, hi = np.asarray(left, float), np.asarray(right, float)
    keep = np.isfinite(ch) & np.isfinite(lo) & np.isfinite(hi)
    if not keep.any():
        return None
    order = np.argsort(ch[keep], kind="stable")
    s = np.where(cor.inside, cor.chainage, 0.0)
    a = np.interp(s, ch[keep][order], lo[keep][order])
    b = np.interp(s, ch[keep][order], hi[keep][order])
    u = np.where(cor.inside, -cor.side * np.nan_to_num(cor.distance), np.nan)
    return cor.inside & (u >= a) & (u <= b)


def map_flow(z, cor: Corridor, seeds, along, stage, channel) -> FlowMap:
    """Depth and footprint of one flow: terrain ``z`` (h, w) m (NaN no data), the
    reach's corridor, thalweg cells ``seeds``, the flow's stage (t,) at the
    transects' positions ``along`` (t,) the valley line (m,
    :meth:`~reachgauge.flood.corridor.Corridor.valley_position`), and the channel's
    cells (:func:`channel_cells`, None when unknown)."""
    depth = surface(cor, along, stage) - z
    wet = connected_wet(depth, cor.own, seeds)
    oob = wet & ~channel if channel is not None else np.zeros_like(wet)
    d = depth[wet]
    # cells in the corridor's outermost pixel ring: the footprint meets the width limit
    edge = wet & (cor.distance >= cor.half - cor.cell_size)
    ce = cor.chainage[edge]
    sides = sorted({"left" if s > 0 else "right" for s in cor.side[edge] if s != 0})
    cut_len = float(np.unique(np.floor(ce / cor.cell_size)).size * cor.cell_size) if ce.size else 0.0
    return FlowMap(
        depth=np.where(wet, depth, np.nan), wet=wet, out_of_bank=oob,
        wet_area=float(wet.sum() * cor.cell_area),
        out_of_bank_area=float(oob.sum() * cor.cell_area) if channel is not None else np.nan,
        mean_depth=float(d.mean()) if d.size else np.nan,
        max_depth=float(d.max()) if d.size else np.nan,
        cut_from=float(ce.min()) if ce.size else np.nan,
        cut_to=float(ce.max()) if ce.size else np.nan,
        cut_length=cut_len, cut_sides=" and ".join(sides))


def polygons(mask, transform):
    """The cells of ``mask`` as one MultiPolygon (work CRS), through
    ``rasterio.features.shapes`` with the same 4-neighbour connectivity as the
    footprint; None when the mask is empty."""
    if not mask.any():
        return None
    geoms = [shapely.geometry.shape(g) for g, _v in
             features.shapes(mask.astype(np.uint8), mask=mask, transform=transform,
                             connectivity=4)]
    return shapely.multipolygons(geoms)
