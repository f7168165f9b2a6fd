"""Every bad input a clear answer: one table of cases run through the command
line (issue 10 and the earlier ones). For each: the exit code, exactly one
``error:`` line naming the problem, no traceback, and no file in the output
folder changed or left behind (an earlier result sits there, and every case may
replace it with --overwrite).

Truth: the synthetic valley of tests/terrain_fixtures.py (a 300 m reach, 1 m
pixels, channel bed near 100 m); lengths in feet use 1 ft = 0.3048 m exactly.
"""

from __future__ import annotations

import hashlib
from pathlib import Path

import numpy as np
import pyogrio
import pytest
import rasterio
import shapely

import terrain_fixtures as tf
from reachgauge.cli.entry import main

pytestmark = pytest.mark.filterwarnings("ignore::RuntimeWarning")
EARLIER = b"an earlier result that must survive every failed run"


def corrupt_copy(src, dst):
    """A tiled, compressed copy of ``src`` with the data of every tile damaged
    and the header intact (GDAL opens it; reading any tile fails)."""
    with rasterio.open(src) as s:
        prof, data = s.profile, s.read(1)
    prof.update(tiled=True, blockxsize=64, blockysize=64, compress="deflate")
    tiled = Path(dst).with_suffix(".tiled.tif")
    with rasterio.open(tiled, "w", **prof) as d:
        d.write(data, 1)
    with rasterio.open(tiled) as d:
        offsets = [int(d.get_tag_item(f"BLOCK_OFFSET_{j}_{i}", "TIFF", bidx=1))
                   for i in range(-(-d.height // 64)) for j in range(-(-d.width // 64))]
    raw = bytearray(tiled.read_bytes())
    for o in offsets:
        raw[o:o + 64] = bytes(64)
    Path(dst).write_bytes(bytes(raw))
    return Path(dst)


@pytest.fixture(scope="module")
def world(tmp_path_factory):
    d = tmp_path_factory.mktemp("world")
    line = tf.straight_line(300.0)
    v = tf.make_valley_raster(d, line, res=1.0, noise=0.02, seed=3, margin=80.0)
    w = {"dir": d, "valley": v, "dem": v.path,
         "streams": tf.write_lines(d / "streams.gpkg", [line, None], fields={"rid": ["A", "B"]})}
    far = shapely.affinity.translate(line, 50_000.0, 0.0)
    w["far"] = tf.write_lines(d / "far.gpkg", [far], fields={"rid": ["A"]})
    w["points"] = tf.write_lines(d / "points.gpkg", [shapely.Point(*line.coords[0])],
                                 fields={"rid": ["A"]})
    w["dups"] = tf.write_lines(d / "dups.gpkg", [line, line], fields={"rid": ["A", "A"]})
    with tf._quiet():
        w["nocrs_streams"] = tf.write_lines(d / "nocrs.shp", [line], crs=None,
                                            fields={"rid": ["A"]})
    w["nocrs_dem"] = tf.make_valley_raster(d, line, crs=None, name="nocrs.tif").path
    x0, y0, x1, y1 = line.bounds
    w["holes"] = tf.make_valley_raster(d, line, name="hole.tif",
                                       nodata_box=(x0 - 60, y0 - 60, x1 + 60, y1 + 60)).path
    same = dict(res=1.0, noise=0.02, seed=3, margin=80.0, dtype="float64")
    w["m64"] = tf.make_valley_raster(d, line, name="m64.tif", **same).path
    ft = tf.make_valley_raster(d, line, vertical_units="ft", name="ft.tif", **same)
    with rasterio.open(ft.path, "r+") as ds:
        ds.set_band_unit(1, "ft")
    w["ft_tagged"] = ft.path
    w["corrupt"] = corrupt_copy(v.path, d / "corrupt.tif")
    return w


def write(folder, name, text):
    p = Path(folder) / name
    p.write_text(text)
    return p


def snapshot(folder):
    return {p.relative_to(folder).as_posix(): hashlib.sha256(p.read_bytes()).hexdigest()
            if p.is_file() else "dir" for p in sorted(Path(folder).rglob("*"))}


def base(w, out):
    return ["run", "--dem", w["dem"], "--streams", w["streams"], "--id-field", "rid",
            "--half-width", "30", "--out", out, "--overwrite", "--quiet"]


def toml(w, tmp, text, **paths):
    dem = paths.get("dem", f'"{w["dem"]}"')
    return write(tmp, "run.toml", f'dem = {dem}\nstreams = "{w["streams"]}"\nid_field = "rid"\n'
                 + text)


def with_config(text, extra=(), **paths):
    def make(w, tmp, out):
        return ["run", "--config", toml(w, tmp, text, **paths), "--out", out, "--overwrite",
                "--quiet", *extra]
    return make


def plus(*extra):
    return lambda w, tmp, out: base(w, out) + list(extra)


def swap(option, key):
    def make(w, tmp, out):
        a = base(w, out)
        a[a.index(option) + 1] = w[key]
        return a
    return make


def obs(text):
    return lambda w, tmp, out: base(w, out) + ["--observations", write(tmp, "obs.csv", text)]


def flows(text, *extra):
    return lambda w, tmp, out: base(w, out) + ["--design-flows", write(tmp, "f.csv", text),
                                               *extra]


def config_dir(w, tmp, out):
    (tmp / "conf.d").mkdir()
    return base(w, out) + ["--config", tmp / "conf.d"]


def csv_holding_a_table(w, tmp, out):
    (tmp / "tables").mkdir()
    (tmp / "tables" / "transects.csv").write_text("precious\n")
    a = base(w, out.with_name("new.gpkg"))   # a new result: only the CSV target clashes
    a.remove("--overwrite")
    return a + ["--csv", tmp / "tables"]


def csv_is_a_file(w, tmp, out):
    return base(w, out) + ["--csv", write(tmp, "tables", "a file")]


PROFILE = Path(__file__).resolve().parents[1] / "sample_data" / "gauged_section.csv"


def section(*extra):
    return ["section", PROFILE, "--stage", "100.9", "--slope", "0.0021", "--n", "0.035", *extra]


# (id, arguments, exit code, text that must be in the error line)
CASES = [
    # -- the config file: every key against RunConfig's type
    ("toml-number-as-text", with_config('spacing = "ten"\n'), 2, 'spacing = "ten" is text'),
    ("toml-path-as-number", with_config("", dem="5"), 2, "dem = 5 is a number"),
    ("toml-bool-as-text", with_config('carve = "false"\n'), 2, "write carve = false"),
    ("toml-bool-as-number", with_config("spacing = true\n"), 2, "spacing takes a number"),
    ("toml-scalar-for-list", with_config("depths = 0.5\n"), 2, "write depths = [0.5]"),
    ("toml-key-twice", with_config("spacing = 20.0\n[transects]\nspacing = 10.0\n"), 2,
     "set twice"),
    ("toml-config-is-a-folder", config_dir, 2, "is a folder, not a file"),
    # -- parameters out of range, before any work
    ("depths-negative", plus("--depths", "-1"), 2, "--depths -1 m is outside the allowed range"),
    ("rating-step-1e-9", plus("--rating-step", "1e-9"), 2, "at least 0.01 m"),
    ("rating-step-1e-7", plus("--rating-step", "1e-7"), 2, "--rating-step 1e-07 m is outside"),
    ("spacing-1e9", plus("--spacing", "1e9"), 2, "at most 10000 m"),
    ("scheduler-not-an-address", plus("--scheduler", "notaurl"), 2,
     "is not a Dask scheduler address"),
    ("n-zero-says-n-not-length", plus("--n", "0"), 2, "Manning's n of the channel"),
    ("min-slope-zero", plus("--min-slope", "0"), 2, "--min-slope 0 is outside"),
    ("split-shorter-than-spacing", plus("--split-length", "10"), 2,
     "every piece would be too short"),
    # -- long options only in full
    ("abbreviation-of-a-future-option", plus("--drainage-area-f", "da"), 2,
     "unrecognized arguments: --drainage-area-f"),
    ("abbreviation-of-an-option", plus("--spac", "10"), 2, "unrecognized arguments: --spac"),
    # -- measured flows that cannot be matched truthfully
    ("observation-stage-below-ground", obs("reach_id,chainage,stage,discharge\nA,150,-17.0,2\n"),
     2, "obs.csv line 2: stage -17 m at reach A"),
    ("observation-beyond-reach-end", obs("reach_id,chainage,depth,discharge\nA,5000,0.5,2\n"), 2,
     "beyond the end of reach A"),
    ("observation-point-far-away",
     obs(f"reach_id,x,y,depth,discharge\nA,{tf.ORIGIN[0] + 150},{tf.ORIGIN[1] + 900},0.5,2\n"), 2,
     "farther than its half-width"),
    # -- units stated in files
    ("toml-lengths-without-units-in-a-us-run", with_config("spacing = 20.0\n", ["--units", "us"]),
     2, 'add the line units = "si"'),
    ("flows-csv-without-units-in-a-us-run",
     flows("reach_id,flow,discharge\nA,q2,1.0\n", "--units", "us", "--half-width", "98"), 2,
     "f.csv does not state the unit of its discharges"),
    ("csv-with-unknown-units", flows("# units: metric\nreach_id,flow,discharge\nA,q2,1.0\n"), 2,
     "states units 'metric'"),
    ("raster-tag-contradicts-option", lambda w, tmp, out: swap("--dem", "ft_tagged")(w, tmp, out)
     + ["--vertical-units", "m"], 2, "band unit tag"),
    # -- output targets, checked before the work
    ("out-shapefile-refused", lambda w, tmp, out: base(w, tmp / "out" / "r.shp"), 2,
     "does not end in .gpkg"),
    ("report-not-html", lambda w, tmp, out: base(w, out) + ["--report", tmp / "report.pdf"], 2,
     "does not end in .html"),
    ("out-folder-missing", lambda w, tmp, out: base(w, tmp / "nowhere" / "r.gpkg"), 2,
     "does not exist"),
    ("csv-folder-holds-a-table", csv_holding_a_table, 2, "transects.csv' already exists"),
    ("csv-is-a-file", csv_is_a_file, 2, "is a file, not a folder"),
    # -- every reach fails for one input cause
    ("all-streams-outside-raster", swap("--streams", "far"), 2, "lies outside the terrain raster"),
    ("spacing-longer-than-every-reach", plus("--spacing", "5000"), 2,
     "shorter than the transect spacing"),
    ("all-nodata-under-the-streams", swap("--dem", "holes"), 2, "nodata value"),
    ("corrupt-geotiff-tiles", swap("--dem", "corrupt"), 2, "cannot be read in rows"),
    # -- the section command
    ("section-rating-step-tiny", lambda w, tmp, out: section("--rating", tmp / "rating.csv",
                                                             "--rating-step", "1e-9"), 2,
     "more than 2000"),
    ("section-profile-without-units-in-us", lambda w, tmp, out: section("--units", "us"), 2,
     "gauged_section.csv does not state the unit"),
    # -- the earlier cases
    ("missing-raster", lambda w, tmp, out: base(w, out)[:2] + [tmp / "none.tif"]
     + base(w, out)[3:], 2, "does not exist; check the --dem path"),
    ("missing-streams", lambda w, tmp, out: base(w, out)[:4] + [tmp / "none.gpkg"]
     + base(w, out)[5:], 2, "does not exist; check the --streams path"),
    ("raster-without-crs", swap("--dem", "nocrs_dem"), 2, "state it with --dem-crs"),
    ("streams-without-crs", swap("--streams", "nocrs_streams"), 2, "state it with --streams-crs"),
    ("wrong-geometry-type", swap("--streams", "points"), 2, "no line features"),
    ("duplicate-ids", swap("--streams", "dups"), 2, "are not unique"),
    ("number-shown-plainly", flows("reach_id,flow,discharge\nA,q2,-5.3\n"), 2,
     "discharge -5.3 is not a number of 0 or more"),
]


@pytest.mark.parametrize("case,make,code,text", CASES, ids=[c[0] for c in CASES])
def test_bad_input_is_one_clear_error_and_changes_nothing(world, tmp_path, capsys, case, make,
                                                          code, text):
    out_dir = tmp_path / "out"
    out_dir.mkdir()
    out = out_dir / "r.gpkg"
    out.write_bytes(EARLIER)
    args = [str(a) for a in make(world, tmp_path, out)]
    before_out, before_inputs = snapshot(out_dir), snapshot(world["dir"])
    before_tmp = snapshot(tmp_path)
    got = main(args)
    _, err = capsys.readouterr()
    assert got == code, err
    errors = [ln for ln in err.splitlines() if ln.startswith("error:")]
    assert len(errors) == 1, err
    assert text in errors[0], err
    assert "Traceback" not in err and "np.float64" not in err
    assert all(ln.startswith(("error:", "warning:")) for ln in err.splitlines() if ln.strip()), err
    assert snapshot(out_dir) == before_out        # the earlier result intact, nothing left
    assert snapshot(world["dir"]) == before_inputs  # inputs untouched
    assert snapshot(tmp_path) == before_tmp        # no stray file anywhere around


def test_every_parser_takes_long_options_only_in_full():
    import argparse

    from reachgauge.cli.entry import build_parser

    parser = build_parser()
    subs = [a for a in parser._actions if isinstance(a, argparse._SubParsersAction)][0]
    assert parser.allow_abbrev is False
    assert all(p.allow_abbrev is False for p in subs.choices.values())


def test_hostile_text_is_stored_verbatim_and_escaped_in_the_report(world, tmp_path, capsys):
    name = 'Mill <script>alert("x")</script> & "Sons"\n; DROP TABLE reaches'
    streams = tf.write_lines(tmp_path / "s.gpkg", [tf.straight_line(300.0)],
                             fields={"rid": ["A&<1>"], "label": [name]})
    out, html = tmp_path / "r.gpkg", tmp_path / "r.html"
    args = ["run", "--dem", world["dem"], "--streams", streams, "--id-field", "rid",
            "--name-field", "label", "--half-width", "30", "--out", out, "--report", html]
    assert main([str(a) for a in args]) == 0
    _, err = capsys.readouterr()
    reaches = pyogrio.read_dataframe(out, layer="reaches")
    assert reaches.loc[0, "name"] == name and reaches.loc[0, "reach_id"] == "A&<1>"
    page = html.read_text(encoding="utf-8")
    assert "<script>alert" not in page and "&lt;script&gt;alert" in page
    # library warnings (matplotlib glyphs, numpy) never reach the user raw
    assert "site-packages" not in err and "Warning:" not in err and "Traceback" not in err


# ------------------------------------------------ units: read as the files state
def _info(path):
    df = pyogrio.read_dataframe(path, layer="run_info", read_geometry=False)
    return df.set_index("key")["value"]


def test_a_metric_config_in_a_us_run_keeps_its_metres(world, tmp_path):
    cfg = toml(world, tmp_path, 'units = "si"\nspacing = 50.0\nhalf_width = 30.0\n')
    assert main(["run", "--config", str(cfg), "--units", "us", "--out", str(tmp_path / "us.gpkg"),
                 "--quiet"]) == 0
    info = _info(tmp_path / "us.gpkg")
    # 50 m reported in the run's unit: 50 / 0.3048 ft (exact definition of the foot)
    assert float(info["param.spacing"]) == pytest.approx(50 / 0.3048, rel=1e-12)
    assert info["units"] == "us"
    si = tmp_path / "si.gpkg"
    assert main(["run", "--config", str(cfg), "--out", str(si), "--quiet"]) == 0
    n_us = len(pyogrio.read_dataframe(tmp_path / "us.gpkg", layer="transects"))
    assert n_us == len(pyogrio.read_dataframe(si, layer="transects"))


def test_a_metric_design_flow_file_in_a_us_run_keeps_its_cubic_metres(world, tmp_path):
    f = write(tmp_path, "f.csv", "# units: si\nreach_id,flow,discharge\nA,small,1.0\nA,huge,400\n")
    common = ["--design-flows", str(f), "--quiet"]
    si, us = tmp_path / "si.gpkg", tmp_path / "us.gpkg"
    assert main([str(a) for a in base(world, si)] + common) == 0
    args = [str(a) for a in base(world, us)]
    args[args.index("--half-width") + 1] = str(30 / 0.3048)
    assert main(args + common + ["--units", "us"]) == 0
    a = pyogrio.read_dataframe(si, layer="design_checks", read_geometry=False)
    b = pyogrio.read_dataframe(us, layer="design_checks", read_geometry=False)
    assert list(a.out_of_bank) == list(b.out_of_bank)
    assert a.out_of_bank.any() and not a.out_of_bank.all()   # 1 m³/s fits, 400 m³/s does not


def test_a_raster_tagged_in_feet_is_read_in_feet(world, tmp_path):
    m, ft = tmp_path / "m.gpkg", tmp_path / "ft.gpkg"
    args = [str(a) for a in base(world, m)]
    args[args.index("--dem") + 1] = str(world["m64"])
    assert main(args) == 0
    args = [str(a) for a in base(world, ft)]
    args[args.index("--dem") + 1] = str(world["ft_tagged"])
    assert main(args) == 0
    a = pyogrio.read_dataframe(m, layer="transects")
    b = pyogrio.read_dataframe(ft, layer="transects")
    ok = (a.status == "ok") & (b.status == "ok")
    assert ok.sum() >= 10
    # the same terrain stored in feet (float64, divided by 0.3048): the same discharges,
    # up to the rounding of the division (relative 1e-16 on elevations of ~100 m)
    np.testing.assert_allclose(b.discharge[ok], a.discharge[ok], rtol=1e-6)
    info = _info(ft)
    assert info["vertical_units"] == "ft" and "band unit tag 'ft'" in info["vertical_units_source"]
    assert "states no unit" in _info(m)["vertical_units_source"]


def test_library_warnings_reach_the_user_as_one_plain_line(tmp_path, capsys, monkeypatch):
    """A library's warning is one line naming the library, without source paths,
    once; known noise (font glyphs in the report's figures) not at all."""
    import warnings

    from reachgauge.results import report

    def noisy(result, out, **kw):
        warnings.warn_explicit("Glyph 8722 (\\N{MINUS SIGN}) missing from font(s) DejaVu Sans.",
                               UserWarning, "/v/site-packages/matplotlib/backend_agg.py", 10)
        for _ in range(2):
            warnings.warn_explicit("a layer option was ignored", UserWarning,
                                   "/v/site-packages/pyogrio/raw.py", 20)
        return Path(out)

    monkeypatch.setattr(report, "write_report", noisy)
    assert main(["report", str(tmp_path / "r.gpkg"), "--out", str(tmp_path / "r.html")]) == 0
    assert capsys.readouterr()[1].splitlines() == [
        "warning: (pyogrio) a layer option was ignored"]


def test_the_demo_config_in_a_us_run_keeps_its_metric_meaning(tmp_path):
    """The case of issue 10: the demo's config and CSVs state 'si', so a run with
    --units us flags the same transects out of bank as the SI run (127 of 199 on
    the committed basin), instead of re-reading metres as feet."""
    config = Path(__file__).resolve().parents[1] / "sample_data" / "basin" / "config.toml"
    out = {}
    for units in ("si", "us"):
        out[units] = tmp_path / f"{units}.gpkg"
        assert main(["run", "--config", str(config), "--units", units, "--out", str(out[units]),
                     "--quiet"]) == 0
    a, b = (pyogrio.read_dataframe(out[u], layer="transects", read_geometry=False)
            for u in ("si", "us"))
    assert (a.flows_out != "").sum() > 0
    assert list(a.flows_out) == list(b.flows_out)
    assert _info(out["us"])["units"] == "us"


@pytest.mark.parametrize("extra,warning,flagged", [
    # slope 2 on the gauged section: V 31.8 m/s, Froude 11.8 (issue 10)
    (["--slope", "2", "--n", "0.035"], "slope 2 lies outside 1e-05–0.1",
     ["velocity", "discharge", "Froude number"]),
    # 620 m³/s through a 5.5 m² section: n 0.0003, below the published 0.010
    (["--slope", "0.0021", "--discharge", "620"], "back-calculated n 0.0003224 lies outside",
     ["Manning's n", "velocity", "Froude number"]),
])
def test_implausible_section_figures_are_warned_and_flagged(capsys, extra, warning, flagged):
    code = main([str(a) for a in ["section", PROFILE, "--stage", "100.9", *extra]])
    out, err = capsys.readouterr()
    assert code == 0 and warning in err
    marked = [ln.split("  ")[0].strip() for ln in out.splitlines() if "[implausible" in ln]
    assert set(flagged) <= set(marked)
    assert "area" not in marked   # geometry does not depend on slope or n
