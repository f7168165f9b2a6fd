"""Offsets in the results are measured along the transect line as written.

A transect cut back where it would cross a neighbour starts at its cut end; its bank
offsets must be measured from there. Check: the thalweg point (thalweg_points layer)
projected onto the written line lies between the two banks, and the ground at the
bank points (bilinear from the raster, rasterio's own sampling) stands near the
bankfull stage. Terrain: a synthetic trapezoidal channel (bottom 6 m, banks 1.5 m
high at 1:2, so 12 m wide at the top; tests/terrain_fixtures.py) along a meander
tighter than the half-width, so that transects on the inside of bends are cut.
"""

import geopandas as gpd
import numpy as np
import rasterio

import reachgauge
from terrain_fixtures import make_valley_raster, meander_line, write_lines


def test_bank_offsets_of_shortened_transects_are_along_the_written_line(tmp_path):
    line = meander_line(400, 40.0, 200.0, step=2.0)
    v = make_valley_raster(tmp_path, line, res=1.0, margin=50)
    streams = write_lines(tmp_path / "s.gpkg", [line], vertex_spacing=5.0)
    out = tmp_path / "r.gpkg"
    reachgauge.run(out, dem=v.path, streams=streams, half_width=40.0, snap_distance=5.0,
                   spacing=10.0)
    tr = gpd.read_file(out, layer="transects")
    pts = gpd.read_file(out, layer="thalweg_points")
    ok = tr[(tr.status == "ok") & tr["flags"].str.contains("shortened")]
    assert len(ok) >= 5
    pts = pts.set_index("station").loc[ok.station]
    d = np.array([g.project(p) for g, p in zip(ok.geometry, pts.geometry)])
    assert np.all(ok.bank_left.to_numpy() < d) and np.all(d < ok.bank_right.to_numpy())
    # the ground at the banks: within 0.3 m of the bankfull stage (a bank rises 1.5 m
    # over 3 m, so 0.3 m is 0.6 m of offset — two pixels; an offset off by the cut
    # length, several metres, lands on the floodplain or the bed)
    with rasterio.open(v.path) as ds:
        for side in ("bank_left", "bank_right"):
            xy = [g.interpolate(o).coords[0] for g, o in zip(ok.geometry, ok[side])]
            z = np.array([s[0] for s in ds.sample(xy)])
            assert np.all(np.abs(z - ok.bankfull_stage.to_numpy()) < 0.3), side


def test_the_long_profile_and_the_sections_share_one_thalweg(tmp_path):
    # one thalweg elevation per station: the profile's z_raw is the elevation the
    # sections' depths are measured from (transects.thalweg_z), on noisy terrain where
    # the middle sample and the lowest nearby sample differ by centimetres
    line = meander_line(300, 20.0, 150.0, step=2.0)
    v = make_valley_raster(tmp_path, line, res=1.0, margin=50, noise=0.03, seed=3)
    streams = write_lines(tmp_path / "s.gpkg", [line], vertex_spacing=5.0)
    out = tmp_path / "r.gpkg"
    reachgauge.run(out, dem=v.path, streams=streams, half_width=30.0, snap_distance=5.0,
                   spacing=10.0)
    tr = gpd.read_file(out, layer="transects").set_index("station")
    prof = gpd.read_file(out, layer="profile").set_index("station")
    ok = tr.index[tr.status == "ok"]
    assert len(ok) > 20
    np.testing.assert_allclose(tr.loc[ok, "thalweg_z"], prof.loc[ok, "z_raw"], atol=1e-9)
