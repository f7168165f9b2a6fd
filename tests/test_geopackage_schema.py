"""The GeoPackage documents itself (issue 13): every layer's description in
``gpkg_contents`` and every schema field's title and meaning, with its unit, in
``gpkg_data_columns`` (the OGC GeoPackage schema extension, GeoPackage 1.2.1
§F.9, http://www.geopackage.org/spec121/#extension_schema), and each field kind
in its own storage type (booleans as BOOLEAN, counts as INTEGER: the column types
of GeoPackage 1.2.1 Table 1)."""

from __future__ import annotations

import sqlite3

import pytest

import terrain_fixtures as tf
from reachgauge import api
from reachgauge.results import schema
from reachgauge.results.layers import LAYERS

pytestmark = pytest.mark.filterwarnings("ignore::RuntimeWarning")


@pytest.fixture(scope="module")
def result(tmp_path_factory):
    d = tmp_path_factory.mktemp("schema")
    line = tf.straight_line(300.0)
    v = tf.make_valley_raster(d, line, res=1.0, noise=0.02, seed=3, margin=60.0)
    streams = tf.write_lines(d / "streams.gpkg", [line], fields={"rid": ["A"]})
    flows = d / "flows.csv"
    flows.write_text("# units: si\nreach_id,flow,discharge\nA,small,1.0\nA,huge,400\n")
    out = d / "r.gpkg"
    api.run(out, dem=v.path, streams=streams, id_field="rid", half_width=100.0,  # ft
            design_flows=flows, units="us")
    return sqlite3.connect(out)


def test_every_layer_has_its_description(result):
    got = dict(result.execute("select table_name, description from gpkg_contents"))
    for name in LAYERS:
        assert got[name] == schema.LAYER_NOTES[name]


def test_every_field_has_its_meaning_and_unit(result):
    rows = result.execute("select table_name, column_name, name, description "
                          "from gpkg_data_columns").fetchall()
    got = {(t, c): (n, d) for t, c, n, d in rows}
    for name, (fields, _geom) in LAYERS.items():
        for field, (kind, meaning) in fields.items():
            title, text = got[(name, field)]
            assert text.startswith(meaning)
            unit = schema.UNIT_LABELS["us"].get(kind)
            if unit:                        # the run is in US units: feet, ft³/s ...
                assert text.endswith(f"({unit})"), (name, field, text)
    # the extension is registered, as the standard asks
    ext = result.execute("select extension_name from gpkg_extensions "
                         "where table_name = 'gpkg_data_columns'").fetchall()
    assert ext == [("gpkg_schema",)]


def test_each_kind_has_its_storage_type(result):
    def types(table):
        return {r[1]: r[2] for r in result.execute(f'pragma table_info("{table}")')}

    design = types("design_checks")
    assert design["out_of_bank"] == design["over_profile"] == "BOOLEAN"
    assert design["station"] == "INTEGER"
    assert types("transects")["station"] == "INTEGER"
    assert types("rating_curves")["discharge"] == "REAL"
    assert types("transects")["reach_id"] == "TEXT"
    values = {v for (v,) in result.execute("select distinct over_profile from design_checks")}
    assert values <= {0, 1, None}
