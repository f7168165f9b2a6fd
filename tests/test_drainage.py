"""Drainage area (issue 12): routing against closed-form catchments and an
independent D8 count on a real DEM, the lower-bound flag, a user accumulation
raster, an end-to-end run, and bad inputs.

Closed forms are exact for D8 (O'Callaghan & Mark 1984): each cell drains to its
steepest neighbour, so on these surfaces the upslope cells can be counted by hand.
Areas are float32 sums: relative tolerance 1e-5 (float32 rounding of the sums).
"""

from __future__ import annotations

import numpy as np
import pytest

pytest.importorskip("pyflwdir")

from reachgauge.drainage import routing  # noqa: E402
from reachgauge.errors import InputError  # noqa: E402

CELL = 10.0
KM2 = CELL * CELL * 1e-6          # km² per cell


def _cells(z, valid=None):
    valid = np.ones(z.shape, bool) if valid is None else valid
    area, lower = routing.route(z, valid, CELL, CELL)
    return area / KM2, lower


def test_tilted_plane_area_is_the_cells_upslope_in_the_column():
    # closed form: z falls due south, every cell drains south; area at row r = r + 1 cells
    n = 40
    y = np.mgrid[0:n, 0:n][0].astype(float)
    area, _ = _cells((n - y) * 0.1)
    np.testing.assert_allclose(area, (np.arange(n)[:, None] + 1) * np.ones((1, n)), rtol=1e-5)


def test_v_valley_area_grows_linearly_along_the_thalweg():
    # closed form: side slope 0.3 > (√2 − 1) × down-valley 0.1, so the sides drain
    # straight across; the thalweg at row r gathers (r + 1) whole rows of n cells
    n = 41
    y, x = np.mgrid[0:n, 0:n].astype(float)
    area, _ = _cells(np.abs(x - 20) * 0.3 + (n - y) * 0.1)
    np.testing.assert_allclose(area[:, 20], (np.arange(n) + 1) * n, rtol=1e-5)


def test_cone_radial_flow_along_the_axes_and_diagonals():
    # closed form: on a cone (z = −r) the cells on the rays of the axes and diagonals
    # drain outward along the ray and take no cell from beside it (those flow parallel),
    # so k cells out the area is k cells, plus the apex where it drains down that ray
    n, c = 41, 20
    y, x = np.mgrid[0:n, 0:n].astype(float)
    area, _ = _cells(-np.hypot(x - c, y - c))
    k = np.arange(1, 15)
    for dr, dc in ((0, 1), (1, 0), (0, -1), (-1, 0), (1, 1), (-1, -1), (1, -1), (-1, 1)):
        got = area[c + dr * k, c + dc * k]
        near = lambda v: np.isclose(got, v, rtol=1e-5)  # noqa: E731 - float32 sums
        assert np.all(near(k) | near(k + 1)), (dr, dc, got)
    assert area[c, c] == pytest.approx(1, rel=1e-5)     # the summit drains nothing


def _valley_with_rim(n=41, closed=True):
    y, x = np.mgrid[0:n, 0:n].astype(float)
    z = np.abs(x - 20) * 0.3 + (n - y) * 0.1
    if closed:   # the edge cells sit 5 m lower: the rim inside them is a divide
        edge = np.zeros(z.shape, bool)
        edge[0], edge[:, 0], edge[:, -1], edge[-1] = True, True, True, True
        z = np.where(edge, z - 5.0, z)
    return z


def test_lower_bound_where_the_valley_is_cut_by_the_raster_edge():
    # cut: the raster's top row drains into the valley, water may come from beyond it
    _, lower = _cells(_valley_with_rim(closed=False))
    assert lower[1:-1, 20].all()
    # closed by a divide inside the raster: the thalweg's watershed is whole
    area, lower = _cells(_valley_with_rim(closed=True))
    assert not lower[2:-2, 20].any()
    assert lower[-1, 20]                                  # the outlet on the edge itself
    # the valley behind a nodata hole: the cells downstream of it are lower bounds
    z = _valley_with_rim(closed=True)
    valid = np.ones(z.shape, bool)
    valid[5:8, 18:23] = False
    _, lower = _cells(np.where(valid, z, np.nan), valid)
    assert lower[10:-2, 20].all() and not lower[2:4, 20].any()


def _own_d8_count(z, dx, dy):
    """The test's own count: D8 steepest descent (first of E, SE, S, SW, W, NW, N,
    NE on ties) and upstream cells by following every cell down to its end."""
    rows, cols = z.shape
    steps = ((0, 1), (1, 1), (1, 0), (1, -1), (0, -1), (-1, -1), (-1, 0), (-1, 1))
    down = {}
    for r in range(rows):
        for c in range(cols):
            best, to = 0.0, None
            for dr, dc in steps:
                rr, cc = r + dr, c + dc
                if 0 <= rr < rows and 0 <= cc < cols:
                    s = (z[r, c] - z[rr, cc]) / np.hypot(dr * dy, dc * dx)
                    if s > best:
                        best, to = s, (rr, cc)
            down[(r, c)] = to
    count = np.zeros(z.shape)
    for start in down:
        cell = start
        while cell is not None:
            count[cell] += 1
            cell = down[cell]
    return count, down


def test_real_dem_matches_an_independent_d8_count():
    """Real terrain: matplotlib's sample ``jacksboro_fault_dem.npz`` (3 arc-second
    DEM, shipped in the matplotlib package from PyPI), a 60 × 60 crop treated as a
    grid of its stated spacing (0.000833° ≈ 74.4 m east × 92.8 m north at 36.6° N:
    111.32 km per degree of latitude, × cos(latitude) for longitude). Compared
    where the library's fill changed nothing (the count here has no fill) on
    cells whose catchment holds no flat or pit and no cell next to a filled one."""
    import matplotlib.cbook as cbook
    import pyflwdir

    dem = cbook.get_sample_data("jacksboro_fault_dem.npz")
    z = dem["elevation"][100:160, 200:260].astype(np.float64)
    dx, dy = 0.000833333 * 111_320 * np.cos(np.radians(36.6)), 0.000833333 * 111_320
    area = routing.route(z, np.ones(z.shape, bool), dx, dy)[0] / (dx * dy * 1e-6)
    own, down = _own_d8_count(z, dx, dy)
    filled = pyflwdir.dem.fill_depressions(z.astype(np.float32), nodata=-9999.0)[0]
    changed = np.abs(filled - z) > 0
    from scipy.ndimage import binary_dilation

    interior = np.zeros(z.shape, bool)
    interior[1:-1, 1:-1] = True
    flat = interior & np.array([[down[(r, c)] is None for c in range(z.shape[1])]
                                for r in range(z.shape[0])])
    # a filled or flat cell drains where the fill's flood says: into a neighbour
    unsure = binary_dilation(changed | flat, np.ones((3, 3), bool))
    # a cell is comparable when no cell upstream of it is unsure, by either count's
    # directions (an unsure cell may drain elsewhere in the library's)
    d8 = routing.d8_directions(z, np.ones(z.shape, bool), dx, dy)
    step = dict(zip(routing.D8_CODES.tolist(), routing.D8_STEPS))
    bad = np.zeros(z.shape, bool)
    todo = list(zip(*np.nonzero(unsure)))
    while todo:
        cell = todo.pop()
        if bad[cell]:
            continue
        bad[cell] = True
        code = int(d8[cell])
        todo += [c for c in (down[cell], (cell[0] + step[code][0], cell[1] + step[code][1])
                             if code in step else None) if c is not None]
    ok = ~bad
    assert ok.sum() > 1000 and (own[ok] > 20).any()      # enough of the crop is compared
    np.testing.assert_allclose(area[ok], own[ok], rtol=1e-5)


BASIN = __import__("pathlib").Path(__file__).resolve().parent.parent / "sample_data" / "basin"


@pytest.fixture(scope="module")
def terrain_run(tmp_path_factory):
    """The demo basin (invented) run end to end with --drainage-area terrain."""
    import geopandas as gpd

    import reachgauge

    out = tmp_path_factory.mktemp("da") / "o.gpkg"
    reachgauge.run(out, config=BASIN / "config.toml", drainage_area="terrain")
    return gpd.read_file(out, layer="transects"), gpd.read_file(out, layer="reaches")


def test_run_writes_drainage_fields(terrain_run):
    tr, re = terrain_run
    assert {"drainage_area", "drainage_snap"} <= set(tr.columns)
    assert {"drainage_area", "drainage_source", "drainage_flags"} <= set(re.columns)
    assert (re["drainage_source"] == "terrain").all()
    # the raster is 2400 m × 1600 m: no area beyond 3.84 km²; the snap within 10 m
    assert (re["drainage_area"] > 0).all() and (re["drainage_area"] <= 3.84).all()
    assert (tr["drainage_snap"].dropna() <= 10.0 + 1e-9).all()
    # the reach's area is its largest transect's
    top = tr.groupby("reach_id")["drainage_area"].max()
    np.testing.assert_allclose(re.set_index("reach_id")["drainage_area"], top.loc[re.reach_id])


def test_user_accumulation_raster_gives_the_terrain_areas(tmp_path, terrain_run):
    """A cell-count raster made from the terrain routing (area / cell area) read
    as --drainage-area <raster> gives the same transect areas (float32: 1e-5)."""
    import geopandas as gpd
    import rasterio

    import reachgauge
    from reachgauge import api
    from reachgauge.drainage import prepare
    from reachgauge.inputs import network

    cfg = api.configure(BASIN / "config.toml", drainage_area="terrain")
    src = prepare(cfg, network.load_network(cfg).raster, tmp_path)
    with rasterio.open(src.path) as ds:
        prof, area = ds.profile, ds.read(1)
        cell_km2 = abs(ds.transform.a * ds.transform.e) * 1e-6
    prof.update(count=1)
    with rasterio.open(tmp_path / "acc.tif", "w", **prof) as dst:
        dst.write((area / cell_km2).astype(np.float32), 1)
    out = tmp_path / "u.gpkg"
    reachgauge.run(out, config=BASIN / "config.toml", drainage_area=str(tmp_path / "acc.tif"))
    tr = gpd.read_file(out, layer="transects")
    np.testing.assert_allclose(tr["drainage_area"], terrain_run[0]["drainage_area"], rtol=1e-5)
    assert not tr["flags"].str.contains("area-lower-bound").any()   # a user raster says nothing


@pytest.mark.parametrize("change, words", [("crs", "not the terrain's"),
                                           ("grid", "not on the terrain's grid"),
                                           ("negative", "negative values")])
def test_bad_accumulation_raster_is_a_clear_input_error(tmp_path, change, words):
    import rasterio
    from rasterio.transform import from_origin

    from reachgauge import api
    from reachgauge.drainage.grid import check_user_raster
    from reachgauge.inputs import network

    raster = network.load_network(api.configure(BASIN / "config.toml")).raster
    t = raster.transform
    crs, transform = raster.crs.to_wkt(), t
    data = np.ones((20, 20), np.float32)
    if change == "crs":
        crs = "EPSG:3857"
    elif change == "grid":
        transform = from_origin(t.c + 0.5, t.f, t.a, -t.e)
    else:
        data[3, 3] = -2
    with rasterio.open(tmp_path / "a.tif", "w", driver="GTiff", width=20, height=20, count=1,
                       dtype="float32", crs=crs, transform=transform) as dst:
        dst.write(data, 1)
    with pytest.raises(InputError, match=words):
        check_user_raster(tmp_path / "a.tif", raster, "cells")
