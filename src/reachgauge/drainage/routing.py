"""Flow directions and D8 contributing area of a whole terrain array.

Depressions are filled by priority flood (Wang & Liu 2006, as implemented in
``pyflwdir.dem.fill_depressions``), and contributing area is accumulated along
the D8 directions by pyflwdir (``FlwdirRaster.accuflux``).

Why the directions are not pyflwdir's own: the D8 raster ``fill_depressions``
returns points each cell to the cell that reached it in the priority flood, not
to its steepest downslope neighbour; on a plane tilted due south it sends whole
columns south-west (measured in ``benchmarks/bench_drainage.py``). The D8 rule
(O'Callaghan & Mark 1984) is the steepest drop per distance to the eight
neighbours, so :func:`d8_directions` takes it on the filled surface and keeps
the flood's direction only where the filled surface has no lower neighbour
(the flats a fill leaves); such a cell on the raster's edge or beside nodata is
an outlet. That mix never loops: a steepest step
goes strictly down, a flood step stays level and goes to a cell the flood
reached earlier.

Arrays in, arrays out; elevations in any unit (only their order matters), cell
sizes in metres, areas in km².
"""

from __future__ import annotations

import numpy as np

NODATA = -9999.0
# pyflwdir's D8 codes (ESRI convention): (row step, column step) per code
D8_CODES = np.array([1, 2, 4, 8, 16, 32, 64, 128], dtype=np.uint8)
D8_STEPS = ((0, 1), (1, 1), (1, 0), (1, -1), (0, -1), (-1, -1), (-1, 0), (-1, 1))
PIT, D8_NODATA = np.uint8(0), np.uint8(247)


def d8_directions(z: np.ndarray, valid: np.ndarray, dx: float, dy: float) -> np.ndarray:
    """D8 codes (uint8, pyflwdir's convention; 0 an outlet, 247 nodata) of the
    terrain ``z`` (2-D) after its depressions are filled; ``valid``: cells with
    data; ``dx``, ``dy``: cell width and height (m)."""
    import pyflwdir

    elev = np.where(valid, z, NODATA).astype(np.float32)
    filled, flood = pyflwdir.dem.fill_depressions(elev, nodata=NODATA)
    del elev
    pad = np.pad(np.where(valid, filled, np.inf).astype(np.float32), 1, constant_values=np.inf)
    rows, cols = filled.shape
    best = np.zeros(filled.shape, np.float32)      # steepest drop per metre so far
    code = np.zeros(filled.shape, np.uint8)
    for c, (dr, dc) in zip(D8_CODES, D8_STEPS):
        dist = np.float32(np.hypot(dr * dy, dc * dx))
        drop = (filled - pad[1 + dr:1 + dr + rows, 1 + dc:1 + dc + cols]) / dist
        steeper = drop > best        # strictly downhill and steeper: ties keep the first
        best = np.where(steeper, drop, best)
        code = np.where(steeper, c, code)
        del drop, steeper
    # no lower neighbour: on the edge or beside nodata the water leaves the data
    # (an outlet); elsewhere a flat the fill left, drained along the flood's path
    out = np.where(best > 0, code, np.where(open_cells(valid), PIT, flood)).astype(np.uint8)
    out[~valid] = D8_NODATA
    return out


def contributing_area(d8: np.ndarray, cell_km2: float, open_cells: np.ndarray):
    """(area km², leaves) per cell for D8 codes ``d8``: the area of the cell and
    every cell upstream of it, and whether any of those is in ``open_cells``
    (bool: where water may enter from outside the data). float32, bool."""
    import pyflwdir

    flw = pyflwdir.from_array(d8, ftype="d8", check_ftype=False)
    area = flw.accuflux(np.full(d8.shape, cell_km2, np.float32), nodata=np.float32(np.nan))
    leaks = flw.accuflux(open_cells.astype(np.float32), nodata=np.float32(np.nan))
    valid = d8 != D8_NODATA
    return np.where(valid, area, np.nan).astype(np.float32), valid & (leaks > 0)


def open_cells(valid: np.ndarray) -> np.ndarray:
    """Cells through which water may enter from outside what the raster knows:
    those on the raster's edge or next to a nodata cell (8 neighbours)."""
    edge = np.zeros(valid.shape, bool)
    edge[0, :] = edge[-1, :] = edge[:, 0] = edge[:, -1] = True
    hole = np.pad(~valid, 1, constant_values=False)
    rows, cols = valid.shape
    for dr, dc in D8_STEPS:
        edge |= hole[1 + dr:1 + dr + rows, 1 + dc:1 + dc + cols]
    return edge & valid


def route(z: np.ndarray, valid: np.ndarray, dx: float, dy: float):
    """(area km², lower bound) per cell of terrain ``z``: contributing area by D8
    on the depression-filled surface, and True where the contributing cells
    reach the raster edge or nodata (the watershed may leave the raster, the
    area is then only a lower bound). ``dx``, ``dy``: cell size (m)."""
    d8 = d8_directions(z, valid, dx, dy)
    return contributing_area(d8, abs(dx * dy) * 1e-6, open_cells(valid))
