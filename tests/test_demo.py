"""`reachgauge demo` on the bundled basin: the whole job, and the figures the README
quotes against the generator's truth (sample_data/basin/truth.json).

The truth is our own invented channel geometry, so this is a regression check of
the demo and of the README's claims, not an external reference.
"""

import json
import re
from pathlib import Path

import numpy as np
import pyogrio
import pytest

from reachgauge.cli.entry import main

BASIN = Path(__file__).resolve().parents[1] / "sample_data" / "basin"
pytestmark = [pytest.mark.slow, pytest.mark.filterwarnings("ignore::RuntimeWarning")]


def _blank(v):
    """An empty text field as GDAL returns it: '' or null."""
    return v is None or v == "" or (isinstance(v, float) and np.isnan(v))


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    out = tmp_path_factory.mktemp("demo")
    assert main(["demo", "--out", str(out), "--quiet"]) == 0
    return out


def test_demo_writes_result_and_report(demo):
    gpkg, html = demo / "demo_result.gpkg", demo / "demo_report.html"
    assert gpkg.is_file() and html.is_file()
    reaches = pyogrio.read_dataframe(gpkg, layer="reaches")
    assert sorted(reaches.reach_id) == ["M1", "M2", "M3", "N1", "S1"]
    assert (reaches.status == "ok").all()
    text = html.read_text()
    for rid in reaches.reach_id:
        assert f">{rid}<" in text
    # each reach's drainage area, from the streams' field (make_basin.py writes it)
    for a in reaches.drainage_area:
        assert f"<dt>Drainage area</dt><dd>{a:g} km² (from the field)" in text
    # the uncertainty bands the demo asks for (sample_data/basin/config.toml)
    assert (reaches.discharge_p10 < reaches.discharge).all()
    assert (reaches.discharge < reaches.discharge_p90).all()
    assert "uncertainty p10–p90" in text
    # the drawn bankfull stages bracket the pick where a stage is published (the
    # long profile draws this band)
    tr = pyogrio.read_dataframe(gpkg, layer="transects", read_geometry=False)
    pub = tr.bankfull_stage.notna()
    assert pub.any() and tr.bankfull_stage_p10[~pub].isna().all()
    assert (tr.bankfull_stage_p10[pub] <= tr.bankfull_stage[pub] + 1e-9).all()
    assert (tr.bankfull_stage[pub] <= tr.bankfull_stage_p90[pub] + 1e-9).all()
    assert not re.search(r"(src|href)\s*=\s*[\"']?(https?:)?//", text)


def test_demo_matches_the_truth_the_readme_quotes(demo):
    truth = json.loads((BASIN / "truth.json").read_text())["reaches"]
    r = pyogrio.read_dataframe(demo / "demo_result.gpkg", layer="reaches").set_index("reach_id")
    # Tolerances from the basin's pixel (2 m) and noise (3-5 cm on open ground,
    # make_basin.py), for reach medians of about 40 transects:
    # depth: the pick's stage step, a fifth of the break rise 3σ (≈ 2.4 cm at σ 4 cm),
    # plus the bed level's error on the basin's dished beds (kernel.bed corrects the
    # lowest sample for noise as if the bed were level: up to 1.5σ, about 3 cm)
    depth_tol = 0.05
    width_tol = 2.0    # one pixel (the banks are located to sub-pixel accuracy)
    blur = 0.03        # share of the channel area the 2 m raster's blur moves past the banks
    #                    (bench_banks.py, synthetic channels at 2 m pixels: -2 to -3 %)
    for rid, t in truth.items():
        mean_depth = t["bankfull_area"] / t["bankfull_width"]
        assert r.loc[rid, "bankfull_depth"] == pytest.approx(t["bank_height"], abs=depth_tol)
        # a stage off by the stage step (3 cm) moves the area by width × 3 cm, plus the blur
        assert r.loc[rid, "flow_area"] == pytest.approx(
            t["bankfull_area"], rel=0.03 / mean_depth + blur)
        assert abs(r.loc[rid, "top_width"] - t["bankfull_width"]) < width_tol
        # chainage along digitised lines (offsets to 4 m, 1 m jitter) runs a few % long,
        # and M2's embankment is conditioned out: 10 %
        assert r.loc[rid, "slope"] == pytest.approx(t["channel_slope"], rel=0.1)
    # the designed story: the main stem's q10 and q100 leave the channel, q2 stays in;
    # the tributaries carry every design flow in bank
    for rid in ("M1", "M2", "M3"):
        assert r.loc[rid, "flows_out"] == "q10;q100"
    for rid in ("N1", "S1"):
        assert _blank(r.loc[rid, "flows_out"])
    cal = pyogrio.read_dataframe(demo / "demo_result.gpkg", layer="calibration")
    n_true = json.loads((BASIN / "truth.json").read_text())["n_observations"]
    assert np.all(np.abs(cal.n_back / n_true - 1) < 0.2)


def test_demo_fits_the_generators_regional_width_curve(demo):
    """The demo's five reaches give a regional fit of each variable; the width's
    exponent is the generator's W = 2.70 A^0.352 (make_basin.py) within what one pixel
    per reach allows: a width within 2 m of its truth moves ln W by at most
    ln(1 + 2/W), and the least-squares slope by at most that times Σ|x − m| / S over
    the five ln A (closed form of the OLS slope, a weighted sum of the y)."""
    truth = json.loads((BASIN / "truth.json").read_text())["reaches"]
    fits = pyogrio.read_dataframe(demo / "demo_result.gpkg", layer="regional_fits",
                                  read_geometry=False)
    own = fits[fits.source == "run"].set_index("variable")
    assert (own.status == "fitted").all() and (own.n_reaches == 5).all()
    x = np.log([t["drainage_km2"] for t in truth.values()])
    w = np.array([t["bankfull_width"] for t in truth.values()])
    bound = np.abs(x - x.mean()).sum() / ((x - x.mean()) ** 2).sum() * np.log1p(2.0 / w).max()
    assert abs(own.loc["width", "exponent"] - 0.352) <= bound
    assert set(fits[fits.source == "published"].curve) == {"invented-valley-A",
                                                           "invented-uplands-B"}
    assert 'id="regional"' in (demo / "demo_report.html").read_text()
