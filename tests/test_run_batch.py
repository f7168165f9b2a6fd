"""`reachgauge run` end to end on a synthetic valley: the GeoPackage (checked with
GDAL through pyogrio and with SQLite against the GeoPackage standard, OGC 12-128r18),
its CRS, safe writes, exit codes, units, config precedence and executors.

Truth: a trapezoidal channel of known shape cut into a valley of known slope
(tests/terrain_fixtures.py; closed-form area (b + z y) y).
"""

import sqlite3
import subprocess
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pyogrio
import pytest
import shapely

import terrain_fixtures as tf
from reachgauge.results import schema
from reachgauge.cli.entry import main
from reachgauge.manning import FOOT

pytestmark = pytest.mark.filterwarnings("ignore::RuntimeWarning")


@pytest.fixture(scope="module")
def valley(tmp_path_factory):
    d = tmp_path_factory.mktemp("valley")
    a = tf.straight_line(300.0)
    b = shapely.LineString([(a.coords[-1][0] + 200.0, a.coords[0][1] + 200.0),
                            (a.coords[-1][0] + 200.0, a.coords[0][1] + 450.0)])
    v = tf.make_valley_raster(d, a, res=1.0, noise=0.02, seed=3, margin=80.0)
    streams = tf.write_lines(d / "streams.gpkg", [a, None], fields={"rid": ["A", "B"]})
    flows = d / "flows.csv"
    flows.write_text("reach_id,flow,discharge\nA,small,1.0\nA,huge,400\n")
    return v, streams, flows, b


def run(args, capsys=None):
    code = main([str(a) for a in args])
    if capsys is not None:
        out, err = capsys.readouterr()
        return code, out, err
    return code


def base_args(valley, out):
    v, streams, flows, _ = valley
    return ["run", "--dem", v.path, "--streams", streams, "--id-field", "rid", "--half-width", 30,
            "--design-flows", flows, "--out", out, "--quiet"]


def test_geopackage_layers_valid_and_in_the_rasters_crs(valley, tmp_path):
    out = tmp_path / "r.gpkg"
    assert run(base_args(valley, out)) == 0
    layers = dict(pyogrio.list_layers(out))
    for name in ("transects", "reaches", "thalweg_points", "rating_curves", "design_checks",
                 "profile", "run_info", "sample_sections"):
        assert name in layers
    assert layers["transects"] == "LineString" and layers["thalweg_points"] == "Point"
    # GDAL opens every layer and reads its schema (pyogrio.read_info)
    for name in layers:
        info = pyogrio.read_info(out, layer=name)
        assert info["features"] >= 0
    assert pyogrio.read_info(out, layer="transects")["crs"] == "EPSG:32633"
    # the GeoPackage standard: application_id 'GPKG', a sound SQLite file, the SRS registered
    con = sqlite3.connect(out)
    try:
        assert con.execute("PRAGMA application_id").fetchone()[0] == 0x47504B47
        assert con.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
        srs = {r[0] for r in con.execute("SELECT srs_id FROM gpkg_spatial_ref_sys")}
        assert 32633 in srs
        geo = {r[0] for r in con.execute("SELECT table_name FROM gpkg_geometry_columns")}
        assert {"transects", "reaches", "thalweg_points"} <= geo
    finally:
        con.close()
    # every documented field is written
    tr = pyogrio.read_dataframe(out, layer="transects")
    assert set(schema.TRANSECT_FIELDS) <= set(tr.columns)
    reaches = pyogrio.read_dataframe(out, layer="reaches")
    assert list(reaches.reach_id) == ["A", "B"]
    assert reaches.set_index("reach_id").loc["B", "status"] == "empty-geometry"


def test_figures_against_the_known_channel(valley, tmp_path):
    v = valley[0]
    out = tmp_path / "r.gpkg"
    assert run(base_args(valley, out)) == 0
    tr = pyogrio.read_dataframe(out, layer="transects")
    ok = tr[tr.status == "ok"]
    assert len(ok) >= 10
    # bankfull depth at the known bank height: the pick is within its noise scale
    # (break rise max(5 cm, 3 sigma) with sigma = 2 cm) plus a pixel-rounding allowance
    assert np.median(ok.bankfull_depth) == pytest.approx(v.bank_height, abs=0.08)
    # channel area at the picked depth: closed form, within 5 % (1 m pixels round corners)
    y = ok.bankfull_depth.to_numpy()
    assert np.median(ok.flow_area / v.area(y)) == pytest.approx(1.0, abs=0.05)
    reach = pyogrio.read_dataframe(out, layer="reaches").iloc[0]
    assert reach.slope == pytest.approx(v.channel_slope, rel=0.05)
    d = pyogrio.read_dataframe(out, layer="design_checks")
    assert bool(d[(d.station == -1) & (d.flow == "huge")].out_of_bank.iloc[0])
    assert not bool(d[(d.station == -1) & (d.flow == "small")].out_of_bank.iloc[0])


def test_existing_output_is_never_overwritten_without_flag(valley, tmp_path, capsys):
    out = tmp_path / "r.gpkg"
    out.write_bytes(b"precious")
    code, _, err = run(base_args(valley, out), capsys)
    assert code == 2 and "already exists" in err and "--overwrite" in err
    assert out.read_bytes() == b"precious"
    assert run(base_args(valley, out) + ["--overwrite"]) == 0
    assert "transects" in dict(pyogrio.list_layers(out))


def test_a_failed_write_leaves_no_file(valley, tmp_path, monkeypatch):
    out = tmp_path / "r.gpkg"
    calls = {"n": 0}

    def failing(real):
        def write(*a, **k):
            calls["n"] += 1
            if calls["n"] == 3:
                raise KeyboardInterrupt  # the user pressed Ctrl-C mid-write
            return real(*a, **k)
        return write

    # a layer is created by write_arrow (with its field descriptions), appended to
    # by write_dataframe: the third write of either kind is interrupted
    for fn in ("write_dataframe", "write_arrow"):
        monkeypatch.setattr(pyogrio, fn, failing(getattr(pyogrio, fn)))
    code = run(base_args(valley, out))
    assert code == 130
    assert not out.exists()
    # no temporary file left behind; the finished reaches are kept for --resume
    assert [p.name for p in tmp_path.iterdir()] == ["r.gpkg.checkpoint"]
    assert not list((tmp_path / "r.gpkg.checkpoint").glob(".reachgauge-*"))


@pytest.mark.parametrize("change,msg", [
    (lambda a: a.__setitem__(a.index("--dem") + 1, "missing.tif"), "does not exist"),
    (lambda a: a.__setitem__(a.index("--id-field") + 1, "nope"), "nope"),
    (lambda a: a.__setitem__(a.index("--half-width") + 1, "-5"), "half-width"),
    (lambda a: a.extend(["--bankfull-method", "eyeball"]), "invalid choice"),
    (lambda a: a.extend(["--units", "metric"]), "invalid choice"),
])
def test_bad_input_is_one_error_line_exit_2(valley, tmp_path, capsys, change, msg):
    args = base_args(valley, tmp_path / "r.gpkg")
    change(args)
    code, _, err = run(args, capsys)
    assert code == 2, err
    assert err.startswith("error: ") and msg in err and "Traceback" not in err
    assert not (tmp_path / "r.gpkg").exists()


def test_bad_vector_file_is_a_clear_error(valley, tmp_path, capsys):
    bad = tmp_path / "streams.gpkg"
    bad.write_text("not a geopackage")
    args = base_args(valley, tmp_path / "r.gpkg")
    args[args.index("--streams") + 1] = bad
    code, _, err = run(args, capsys)
    assert code == 2 and err.startswith("error: ") and err.count("\n") == 1


def test_config_file_and_command_line_precedence(valley, tmp_path):
    v, streams, flows, _ = valley
    cfg = tmp_path / "run.toml"
    cfg.write_text(f'[inputs]\ndem = "{v.path}"\nstreams = "{streams}"\nid_field = "rid"\n'
                   '[transects]\nspacing = 50.0\nhalf_width = 30.0\n')
    assert run(["run", "--config", cfg, "--out", tmp_path / "a.gpkg", "--quiet"]) == 0
    assert run(["run", "--config", cfg, "--spacing", "25", "--out", tmp_path / "b.gpkg",
                "--quiet"]) == 0
    na = len(pyogrio.read_dataframe(tmp_path / "a.gpkg", layer="transects"))
    nb = len(pyogrio.read_dataframe(tmp_path / "b.gpkg", layer="transects"))
    assert nb > 1.8 * na   # the command line's spacing won
    info = pyogrio.read_dataframe(tmp_path / "b.gpkg", layer="run_info", read_geometry=False)
    assert info.set_index("key").loc["param.spacing", "value"] == "25.0"


def test_us_units_are_si_converted(valley, tmp_path):
    si = tmp_path / "si.gpkg"
    us = tmp_path / "us.gpkg"
    assert run(base_args(valley, si)) == 0
    args = base_args(valley, us)
    args[args.index("--half-width") + 1] = 30 / FOOT   # the same 30 m, given in feet
    flows_si = tmp_path / "flows_si.csv"   # a CSV states its units in a US run (tables.py)
    flows_si.write_text("# units: si\n" + Path(valley[2]).read_text())
    args[args.index("--design-flows") + 1] = flows_si
    assert run(args + ["--units", "us"]) == 0
    a = pyogrio.read_dataframe(si, layer="transects")
    b = pyogrio.read_dataframe(us, layer="transects")
    ok = a.status == "ok"
    # 1 ft = 0.3048 m exactly; discharge in ft³/s, depth in ft
    np.testing.assert_allclose(b.discharge[ok] * FOOT ** 3, a.discharge[ok], rtol=1e-6)
    np.testing.assert_allclose(b.bankfull_depth[ok] * FOOT, a.bankfull_depth[ok], rtol=1e-6)
    np.testing.assert_allclose(b.slope[ok], a.slope[ok], rtol=1e-9)   # dimensionless
    info = pyogrio.read_dataframe(us, layer="run_info", read_geometry=False).set_index("key")
    assert info.loc["units", "value"] == "us"


def test_process_pool_and_dask_give_the_serial_answer(valley, tmp_path):
    distributed = pytest.importorskip("dask.distributed")
    serial = tmp_path / "s.gpkg"
    assert run(base_args(valley, serial)) == 0
    pool = tmp_path / "p.gpkg"
    assert run(base_args(valley, pool) + ["--jobs", "2"]) == 0
    with distributed.LocalCluster(n_workers=1, processes=False, dashboard_address=None) as cl:
        dask_out = tmp_path / "d.gpkg"
        assert run(base_args(valley, dask_out) + ["--scheduler", cl.scheduler_address]) == 0
    ref = pyogrio.read_dataframe(serial, layer="transects")
    for other in (pool, dask_out):
        got = pyogrio.read_dataframe(other, layer="transects")
        pd.testing.assert_series_equal(got.discharge, ref.discharge)


def test_unreachable_scheduler_is_a_clear_error(valley, tmp_path, capsys):
    pytest.importorskip("dask.distributed")
    code, _, err = run(base_args(valley, tmp_path / "r.gpkg")
                       + ["--scheduler", "tcp://127.0.0.1:9"], capsys)
    assert code == 2 and "Dask scheduler" in err


def test_csv_export(valley, tmp_path):
    out = tmp_path / "r.gpkg"
    assert run(base_args(valley, out) + ["--csv", tmp_path / "csv"]) == 0
    names = {p.stem for p in (tmp_path / "csv").glob("*.csv")}
    assert {"transects", "reaches", "rating_curves", "run_info"} <= names
    tr = pd.read_csv(tmp_path / "csv" / "transects.csv")
    assert tr.geometry.str.startswith("LINESTRING").all()


def test_geographic_raster_and_reprojected_streams(valley, tmp_path):
    v, streams, flows, _ = valley
    geo = tf.warp_raster(v.path, tmp_path / "geo.tif", "EPSG:4326")
    st = tmp_path / "streams_3857.gpkg"
    g = pyogrio.read_dataframe(streams).to_crs("EPSG:3857")
    pyogrio.write_dataframe(g, st)
    out = tmp_path / "g.gpkg"
    assert run(["run", "--dem", geo, "--streams", st, "--id-field", "rid", "--half-width", 30,
                "--out", out, "--quiet"]) == 0
    # the output keeps the terrain raster's own CRS
    assert pyogrio.read_info(out, layer="transects")["crs"] == "EPSG:4326"
    ref = tmp_path / "p.gpkg"
    assert run(base_args(valley, ref)) == 0
    a = pyogrio.read_dataframe(ref, layer="reaches").iloc[0]
    b = pyogrio.read_dataframe(out, layer="reaches").iloc[0]
    # resampled twice (warp, then the working view): within a few per cent
    assert b.slope == pytest.approx(a.slope, rel=0.03)
    assert b.bankfull_depth == pytest.approx(a.bankfull_depth, abs=0.1)
    info = pyogrio.read_dataframe(out, layer="run_info", read_geometry=False)
    assert (info.key == "warning").any()


def test_console_script_help_is_grouped_with_defaults():
    exe = Path(sys.executable).with_name("reachgauge")
    r = subprocess.run([str(exe), "run", "--help"], capture_output=True, text=True)
    assert r.returncode == 0
    for title in ("inputs and units", "transects and thalweg", "bankfull stage", "Manning's n",
                  "stages, rating curves and design flows", "examples:", "licensed"):
        assert title in r.stdout
    assert "(default: 20 m)" in r.stdout


def test_readme_documents_every_option_and_field():
    from reachgauge import config

    readme = (Path(__file__).resolve().parents[1] / "README.md").read_text()
    hint = "README tables are stale: run .venv/bin/python tests/update_readme.py"
    assert schema.markdown() in readme, hint
    assert config.markdown() in readme, hint


def test_readme_documents_every_code():
    from reachgauge import flags

    readme = (Path(__file__).resolve().parents[1] / "README.md").read_text()
    assert flags.markdown() in readme, "README tables are stale: run tests/update_readme.py"


def test_n_outside_published_range_is_refused_unless_forced(valley, tmp_path, capsys):
    # 0.3 lies outside every row of Chow (1959) Table 5-6 (max 0.200) and the hard limit 0.25
    code, _, err = run(base_args(valley, tmp_path / "a.gpkg") + ["--n", "0.3"], capsys)
    assert code == 2 and "--force-n" in err
    code, _, err = run(base_args(valley, tmp_path / "b.gpkg") + ["--n", "0.3", "--force-n"], capsys)
    assert code == 0 and "warning:" in err
    tr = pyogrio.read_dataframe(tmp_path / "b.gpkg", layer="transects")
    assert "n-unusual" in ";".join(tr["flags"])


@pytest.mark.parametrize("extra,msg", [
    (["--n-field", "manning"], "n-field 'manning' is not a field"),
    (["--landcover", "missing.tif", "--landcover-table", "missing.csv"], "does not exist"),
])
def test_run_level_input_errors_stop_before_the_work(valley, tmp_path, capsys, extra, msg):
    code, _, err = run(base_args(valley, tmp_path / "r.gpkg") + extra, capsys)
    assert code == 2 and msg in err and not (tmp_path / "r.gpkg").exists()


def test_an_internal_error_in_one_reach_exits_1_and_keeps_the_rest(valley, tmp_path, capsys,
                                                                   monkeypatch):
    from reachgauge.hydraulics import reach as hydraulics

    real = hydraulics.analyse_reach

    def broken(rs, cfg, inputs=None):
        if rs.reach.reach_id == "A":
            raise RuntimeError("simulated bug")
        return real(rs, cfg, inputs)

    monkeypatch.setattr(hydraulics, "analyse_reach", broken)
    out = tmp_path / "r.gpkg"
    code, _, err = run(base_args(valley, out), capsys)
    assert code == 1 and "internal error" in err
    reaches = pyogrio.read_dataframe(out, layer="reaches").set_index("reach_id")
    assert reaches.loc["A", "status"] == "failed" and "simulated bug" in reaches.loc["A", "message"]
