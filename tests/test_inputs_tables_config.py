"""CSV inputs and the run configuration: values read right, bad input rejected
with a message that names the file, line and fix."""

import numpy as np
import pytest

from reachgauge import config, settings
from reachgauge.inputs import tables
from reachgauge.errors import InputError
from reachgauge.manning import FOOT


def write(tmp_path, name, text):
    p = tmp_path / name
    p.write_text(text)
    return p


def test_design_flows_long_format_and_us_conversion(tmp_path):
    p = write(tmp_path, "f.csv", "reach_id,flow,discharge\nA,q2,10\nA,q100,40\nB,q2,3.5\n")
    assert tables.read_design_flows(p) == {"A": {"q2": 10.0, "q100": 40.0}, "B": {"q2": 3.5}}
    # a file in ft³/s says so (tables.py's '# units:' line), whatever the run's units
    q = write(tmp_path, "q.csv", "# units: us\nreach_id,flow,discharge\nA,q2,10\n")
    for run_units in ("si", "us"):
        us = tables.read_design_flows(q, units=run_units)
        assert us["A"]["q2"] == pytest.approx(10 * FOOT ** 3)  # ft³/s → m³/s, 1 ft = 0.3048 m exactly
    with pytest.raises(InputError, match="does not state the unit"):
        tables.read_design_flows(p, units="us")


@pytest.mark.parametrize("text,msg", [
    ("reach,flow,discharge\nA,q2,1\n", r"lacks column\(s\) reach_id"),
    ("reach_id,flow,discharge\nA,q2,-1\n", "line 2"),
    ("reach_id,flow,discharge\nA,q2,abc\n", "not a number"),
    ("reach_id,flow,discharge\nA,q2,1\nA,q2,2\n", "given twice"),
])
def test_design_flow_errors(tmp_path, text, msg):
    with pytest.raises(InputError, match=msg):
        tables.read_design_flows(write(tmp_path, "f.csv", text))


def test_observations(tmp_path):
    p = write(tmp_path, "o.csv", "reach_id,chainage,depth,discharge\nA,100,0.5,2.0\n")
    obs = tables.read_observations(p)
    assert obs.loc[0, "chainage"] == 100 and obs.loc[0, "depth"] == 0.5 and np.isnan(obs.loc[0, "x"])
    with pytest.raises(InputError, match="chainage column or x and y"):
        tables.read_observations(write(tmp_path, "b.csv", "reach_id,depth,discharge\nA,1,1\n"))
    with pytest.raises(InputError, match="stage or a depth"):
        tables.read_observations(write(tmp_path, "c.csv", "reach_id,chainage,discharge\nA,1,1\n"))
    with pytest.raises(InputError, match="line 2"):
        tables.read_observations(write(tmp_path, "d.csv", "reach_id,chainage,depth,discharge\nA,1,1,0\n"))


def test_class_table(tmp_path):
    p = write(tmp_path, "n.csv", "class,name,n\n1,channel,0.04\n2,pasture,0.03\n")
    assert tables.read_class_table(p) == {1: 0.04, 2: 0.03}
    with pytest.raises(InputError, match="listed twice"):
        tables.read_class_table(write(tmp_path, "m.csv", "class,n\n1,0.04\n1,0.03\n"))
    with pytest.raises(InputError, match="does not exist"):
        tables.read_class_table(tmp_path / "missing.csv")


def test_config_from_mapping_converts_feet_and_rejects_unknown():
    cfg = settings.from_mapping({"spacing": 50.0, "half_width": 100.0, "units": "us"})
    assert cfg.spacing == pytest.approx(50 * FOOT) and cfg.half_width == pytest.approx(100 * FOOT)
    with pytest.raises(InputError, match="unknown setting"):
        settings.from_mapping({"spaceing": 10})
    with pytest.raises(InputError, match="bankfull_method must be one of"):
        settings.from_mapping({"bankfull_method": "eyeball"})
    with pytest.raises(InputError, match="snap-distance"):
        settings.from_mapping({"snap_distance": 50, "half_width": 20})
    with pytest.raises(InputError, match="fixed-depth needs"):
        settings.from_mapping({"bankfull_method": "fixed-depth"})


def test_toml_tables_flatten_and_paths_are_relative_to_the_file(tmp_path):
    p = write(tmp_path, "run.toml", '[inputs]\ndem = "terrain.tif"\n[transects]\nspacing = 15.0\n')
    flat = config.read_toml(p)
    assert flat["spacing"] == 15.0 and flat["dem"] == str(tmp_path / "terrain.tif")
    with pytest.raises(InputError, match="not valid TOML"):
        config.read_toml(write(tmp_path, "bad.toml", "spacing = = 3\n"))
