"""Regional curves (issue 12): log-log power-law fits across a run's reaches, their
95 % bands, the reaches outside the prediction band, the published curves and the
run end to end.

Sources beside each check: NIST Statistical Reference Datasets (StRD), linear
least squares, dataset "Norris" (certified values, https://www.itl.nist.gov/div898/
strd/lls/data/Norris.shtml); statsmodels' own ``get_prediction().summary_frame``;
the binomial distribution for the coverage over many seeds; exact unit definitions
(1 ft = 0.3048 m, 1 mi = 1609.344 m) for the conversions.
"""

import math

import numpy as np
import pandas as pd
import pyogrio
import pytest
import shapely
from scipy import stats

import reachgauge
import terrain_fixtures as tf
from reachgauge import flags
from reachgauge.errors import InputError
from reachgauge.regional import curves as C
from reachgauge.regional.published import read_curves
from reachgauge.regional.run import regional_curves

pytestmark = pytest.mark.filterwarnings("ignore::RuntimeWarning")

FOOT, SQ_MILE_KM2 = 0.3048, 1.609344 ** 2     # exact definitions

# NIST StRD "Norris": 36 (x, y) pairs and certified values
NORRIS_Y = [0.1, 338.8, 118.1, 888.0, 9.2, 228.1, 668.5, 998.5, 449.1, 778.9, 559.2, 0.3, 0.1,
            778.1, 668.8, 339.3, 448.9, 10.8, 557.7, 228.3, 998.0, 888.8, 119.6, 0.3, 0.6,
            557.6, 339.3, 888.0, 998.5, 778.9, 10.2, 117.6, 228.9, 668.4, 449.2, 0.2]
NORRIS_X = [0.2, 337.4, 118.2, 884.6, 10.1, 226.5, 666.3, 996.3, 448.6, 777.0, 558.2, 0.4, 0.6,
            775.5, 666.9, 338.0, 447.5, 11.6, 556.0, 228.1, 995.8, 887.6, 120.2, 0.3, 0.3,
            556.8, 339.1, 887.2, 999.0, 779.0, 11.1, 118.3, 229.2, 669.1, 448.9, 0.5]


def test_formulas_against_nist_norris_certified_values():
    f = C.fit_line(NORRIS_X, NORRIS_Y)
    # NIST StRD Norris certified values (15 significant digits); rtol 1e-9 leaves room
    # for the summation order of double precision, far below any formula slip
    assert f.intercept == pytest.approx(-0.262323073774029, rel=1e-9)
    assert f.slope == pytest.approx(1.00211681802045, rel=1e-9)
    assert f.se_intercept == pytest.approx(0.232818234301152, rel=1e-9)
    assert f.se_slope == pytest.approx(0.429796848199937e-03, rel=1e-9)
    assert f.std_error == pytest.approx(0.884796396144373, rel=1e-9)
    assert f.r_squared == pytest.approx(0.999993745883712, rel=1e-12)
    # the band's closed form at x = 0 is t·se(intercept), at the mean of x t·s/√n
    # (both from the certified values; t from scipy, 34 degrees of freedom)
    t = stats.t.ppf(0.975, 34)
    _c, lo, hi = f.band([0.0, f.x_mean])
    np.testing.assert_allclose((hi - lo) / 2, [t * 0.232818234301152,
                                               t * 0.884796396144373 / 6.0], rtol=1e-9)
    _c, lo, hi = f.band([0.0], "obs")
    np.testing.assert_allclose((hi - lo) / 2,
                               t * math.hypot(0.884796396144373, 0.232818234301152), rtol=1e-9)


def test_bands_match_statsmodels_summary_frame():
    rng = np.random.default_rng(5)
    x = np.log(np.geomspace(3.0, 400.0, 9))
    y = 0.8 + 0.4 * x + rng.normal(0, 0.2, x.size)
    at = np.log([1.0, 20.0, 900.0])
    f = C.fit_line(x, y)
    ref = C.prediction_frame(x, y, at)      # statsmodels get_prediction().summary_frame(0.05)
    for which, lo_col, hi_col in (("mean", "mean_ci_lower", "mean_ci_upper"),
                                  ("obs", "obs_ci_lower", "obs_ci_upper")):
        c, lo, hi = f.band(at, which)
        np.testing.assert_allclose(c, ref["mean"], rtol=1e-10)
        np.testing.assert_allclose(lo, ref[lo_col], rtol=1e-10)
        np.testing.assert_allclose(hi, ref[hi_col], rtol=1e-10)


def _synthetic(seed, n=40, a=2.7, b=0.35, sigma=0.1, areas=None):
    rng = np.random.default_rng(seed)
    area = np.geomspace(1.0, 500.0, n) if areas is None else areas
    return area, a * area ** b * np.exp(rng.normal(0.0, sigma, area.size))


def test_recovers_known_coefficients():
    area, y = _synthetic(11)
    fit = C.fit_power("width", area, y, np.full(area.size, "ok"))
    # the standard errors of a log-log fit with known noise sigma = 0.1 over this design
    # (sigma / sqrt(S), sigma·sqrt(1/n + m²/S)): 4 of them is a miss of about 1 in 16 000
    x = np.log(area)
    s_xx = ((x - x.mean()) ** 2).sum()
    se_b = 0.1 / math.sqrt(s_xx)
    se_lna = 0.1 * math.sqrt(1 / x.size + x.mean() ** 2 / s_xx)
    assert abs(fit.exponent - 0.35) < 4 * se_b
    assert abs(math.log(fit.coefficient) - math.log(2.7)) < 4 * se_lna
    assert fit.n_reaches == 40 and fit.left_out == {}
    assert 0.9 < fit.r_squared <= 1.0


def test_bands_cover_the_truth_at_their_stated_rate():
    """400 seeds of 8 reaches each: the 95 % band of the median curve holds the true
    median at A = 50 km², the prediction band a new reach drawn there. Binomial
    tolerance: sd = sqrt(0.95·0.05/400) = 0.011, 3 sd = 0.033. A band with the normal
    quantile 1.96 instead of Student's t (6 df: 2.447) covers about 0.90: it fails."""
    areas = np.geomspace(2.0, 300.0, 8)
    a, b, sigma, a0 = 1.5, 0.45, 0.25, 50.0
    truth = a * a0 ** b
    rng = np.random.default_rng(2024)
    hit_mean = hit_obs = 0
    seeds = 400
    for s in range(seeds):
        _area, y = _synthetic(s, a=a, b=b, sigma=sigma, areas=areas)
        fit = C.fit_power("width", areas, y, np.full(areas.size, "ok"))
        _c, lo, hi = fit.predict(a0, "mean")
        hit_mean += lo <= truth <= hi
        new = truth * math.exp(rng.normal(0.0, sigma))
        _c, lo, hi = fit.predict(a0, "obs")
        hit_obs += lo <= new <= hi
    for hits in (hit_mean, hit_obs):
        assert abs(hits / seeds - 0.95) <= 0.033


def _rows(area, width, status=None, **more):
    status = status or ["ok"] * len(area)
    rows = []
    for i, (ar, w, st) in enumerate(zip(area, width, status)):
        r = {"reach_id": f"R{i}", "status": st, "drainage_area": ar, "top_width": w,
             "bankfull_depth": 0.3 * w ** 0.5 if np.isfinite(w) else np.nan,
             "flow_area": w * 0.3 * w ** 0.5 if np.isfinite(w) else np.nan,
             "discharge": 2.0 * w if np.isfinite(w) else np.nan}
        for k, v in more.items():
            r[k] = v[i]
        rows.append(r)
    return rows


def test_a_reach_outside_the_prediction_band_is_flagged():
    area = np.geomspace(5.0, 200.0, 12)
    # every reach within ±3 % of the curve (alternating), one three times too wide
    width = 3.0 * area ** 0.4 * np.where(np.arange(12) % 2, 1.03, 0.97)
    width[7] *= 3.0
    res = regional_curves(_rows(area, width))
    fields = res.reach_fields
    assert fields["R7"]["regional_flags"] == "regional-outlier"
    assert "width" in fields["R7"]["regional_outside"].split(";")
    assert all(fields[f"R{i}"]["regional_flags"] == "" for i in range(12) if i != 7)
    row = res.regional_fits.set_index("variable").loc["width"]
    assert row["outside"] == 1
    # the flag is a reach flag of the one vocabulary, severity "check"
    assert flags.severity("regional-outlier") == "check" and "regional-outlier" in flags.FLAGS


def test_left_out_reaches_are_counted_by_reason():
    area = [10.0, 20.0, 40.0, 80.0, 30.0, 50.0, np.nan, 60.0]
    width = [5.0, 6.0, 7.5, 9.0, np.nan, np.nan, 8.0, 8.5]
    status = ["ok"] * 4 + ["bankfull-unsupported", "failed", "ok", "ok"]
    rows = _rows(area, width, status)
    rows[7]["discharge"] = np.nan          # a reach with a width but no discharge
    res = regional_curves(rows)
    w, q = res.fits["width"], res.fits["discharge"]
    assert w.n_reaches == 5 and w.left_out == {"no drainage area": 1,
                                               "status bankfull-unsupported": 1,
                                               "status failed": 1}
    assert q.n_reaches == 4 and q.left_out["no trusted figure"] == 1
    table = res.regional_fits.set_index("variable")
    assert table.loc["width", "left_out"] == 3
    assert "1 no drainage area" in table.loc["width", "left_out_why"]
    # fewer than 3 usable reaches: no fit, and the reason
    few = regional_curves(_rows([10.0, 20.0, 30.0], [5.0, 6.0, np.nan]))
    assert not few.fits["width"].fitted
    assert few.fits["width"].why == "too few reaches: 2 usable, at least 3 needed"
    assert math.isnan(few.regional_fits.set_index("variable").loc["width", "coefficient"])


def _csv(tmp_path, text, name="curves.csv"):
    p = tmp_path / name
    p.write_text(text)
    return p


def test_published_curve_ratio_closed_form(tmp_path):
    p = _csv(tmp_path, "name,variable,coefficient,exponent,units,area_min,area_max\n"
                       "alpha,width,2.0,0.5,si,10,100\n"
                       "beta,width,13.0,0.34,us,2,60\n")
    curves = read_curves(p)
    res = regional_curves(_rows([25.0, 200.0, 40.0], [12.0, 30.0, 14.0]), curves)
    r = res.curve_ratios.set_index(["curve", "reach_id"])
    # alpha at 25 km²: 2·25^0.5 = 10 m, so 12 m is 1.2 of it; 200 km² is outside its range
    assert r.loc[("alpha", "R0"), "ratio"] == pytest.approx(1.2, rel=1e-12)
    assert not r.loc[("alpha", "R1"), "in_range"] and math.isnan(r.loc[("alpha", "R1"), "ratio"])
    # beta in ft against mi²: the same ratio computed in its own units (exact definitions)
    a_mi = 40.0 / SQ_MILE_KM2
    expect = (14.0 / FOOT) / (13.0 * a_mi ** 0.34)
    assert r.loc[("beta", "R2"), "ratio"] == pytest.approx(expect, rel=1e-12)
    assert curves.loc[1, "area_max"] == pytest.approx(60 * SQ_MILE_KM2, rel=1e-15)


def test_us_output_is_the_fit_made_in_us_units():
    area, y = _synthetic(3, n=10)
    res = regional_curves(_rows(area, y))
    us = res.tables("us")["regional_fits"].set_index("variable")
    # the same reaches fitted in ft against mi² (a power law stays one under a change of
    # units: only a and the mean of ln A change)
    direct = C.fit_power("width", area / SQ_MILE_KM2, y / FOOT, np.full(area.size, "ok"))
    assert us.loc["width", "coefficient"] == pytest.approx(direct.coefficient, rel=1e-9)
    assert us.loc["width", "exponent"] == pytest.approx(direct.exponent, rel=1e-9)
    assert us.loc["width", "log_area_mean"] == pytest.approx(direct.line.x_mean, rel=1e-9)
    assert us.loc["width", "area_max"] == pytest.approx(area.max() / SQ_MILE_KM2, rel=1e-12)


def test_drainage_area_is_written_in_square_miles_in_us_units():
    from reachgauge.results import layers

    row = layers.finish(pd.DataFrame([{"reach_id": "A", "drainage_area": 100.0}]), "reaches", "us")
    # 1 mi² = 1.609344² km² exactly
    assert row.loc[0, "drainage_area"] == pytest.approx(100.0 / SQ_MILE_KM2, rel=1e-15)


HEAD = "name,variable,coefficient,exponent,units,area_min,area_max\n"


@pytest.mark.parametrize("text, msg", [
    ("name,variable,coefficient,exponent\nx,width,1,0.5\n", "lacks column(s) area_min, area_max"),
    (HEAD, "holds no curve"),
    (HEAD + "x,velocity,1,0.5,si,1,10\n", "line 2: variable 'velocity' is not one of"),
    (HEAD + "x,width,-1,0.5,si,1,10\n", "line 2: coefficient -1 is not a number greater than 0"),
    (HEAD + "x,width,1,abc,si,1,10\n", "line 2: exponent 'abc' is not a number"),
    (HEAD + "x,width,1,0.5,si,10,10\n", "area_max 10 is not above area_min 10"),
    (HEAD + "x,width,1,0.5,si,1,10\nx,width,2,0.5,si,1,10\n", "line 3: curve 'x' gives width "
                                                                "twice"),
    (HEAD + "x,width,1,0.5,metric,1,10\n", "units 'metric' is not si or us"),
    (HEAD + ",width,1,0.5,si,1,10\n", "line 2: the curve has no name"),
    ("name,variable,coefficient,exponent,area_min,area_max\nx,width,1,0.5,1,10\n",
     "lacks the units column"),
    ("# units: us\n" + HEAD + "x,width,1,0.5,si,1,10\n", "disagrees with the file's"),
])
def test_bad_curve_files_are_clear_input_errors(tmp_path, text, msg):
    with pytest.raises(InputError) as e:
        read_curves(_csv(tmp_path, text))
    assert msg in str(e.value), str(e.value)
    assert "\n" not in str(e.value)


def test_units_line_stands_for_a_missing_units_column(tmp_path):
    p = _csv(tmp_path, "# units: us\nname,variable,coefficient,exponent,area_min,area_max\n"
                       "x,depth,1.0,0.3,1,10\n")
    c = read_curves(p)
    # depth in ft against mi² to m against km²: a·0.3048/2.589988110336^b (exact units)
    assert c.loc[0, "coefficient"] == pytest.approx(FOOT / SQ_MILE_KM2 ** 0.3, rel=1e-15)


# ----------------------------------------------------------------- end to end
@pytest.fixture(scope="module")
def basin(tmp_path_factory):
    """One valley with a known channel, digitised as four reaches with invented
    drainage areas in a field (one reach without)."""
    d = tmp_path_factory.mktemp("regional")
    line = tf.straight_line(400.0)
    v = tf.make_valley_raster(d, line, res=1.0, noise=0.02, seed=3, margin=80.0)
    (x0, y0), (x1, _y1) = line.coords
    cuts = np.linspace(x0, x1, 5)
    parts = [shapely.LineString([(a, y0), (b, y0)]) for a, b in zip(cuts[:-1], cuts[1:])]
    streams = tf.write_lines(d / "streams.gpkg", parts,
                             fields={"rid": ["A", "B", "C", "D"],
                                     "da_km2": [12.0, 25.0, 60.0, None]})
    curves = _csv(d, HEAD + "invented-test,width,3.0,0.2,si,5,100\n")
    return v, streams, curves


def test_a_run_writes_the_fits_and_the_report_shows_the_plots(basin, tmp_path):
    v, streams, curves = basin
    out, html = tmp_path / "r.gpkg", tmp_path / "r.html"
    reachgauge.run(out, report=html, dem=v.path, streams=streams, id_field="rid",
                   half_width=30.0, n_overbank=0.05, drainage_area_field="da_km2",
                   regional_curves=curves)
    fits = pyogrio.read_dataframe(out, layer="regional_fits", read_geometry=False)
    run_fits = fits[fits.source == "run"].set_index("variable")
    assert list(run_fits.index) == ["width", "depth", "area", "discharge"]
    assert (run_fits["status"] == "fitted").all()
    assert (run_fits["n_reaches"] == 3).all()
    assert (run_fits["left_out_why"] == "1 no drainage area").all()
    # one channel all along: the width hardly changes with the invented areas
    reaches = pyogrio.read_dataframe(out, layer="reaches", read_geometry=False).set_index("reach_id")
    assert reaches.loc["A", "drainage_area"] == 12.0 and np.isnan(reaches.loc["D", "drainage_area"])
    assert abs(run_fits.loc["width", "exponent"]) < 0.1
    ratios = pyogrio.read_dataframe(out, layer="curve_ratios", read_geometry=False)
    pub = ratios[ratios.curve == "invented-test"].set_index("reach_id")
    w = reaches.loc["B", "top_width"]
    assert pub.loc["B", "ratio"] == pytest.approx(w / (3.0 * 25.0 ** 0.2), rel=1e-6)
    text = html.read_text()
    assert 'id="regional"' in text
    assert all(f'alt="regional curve of {v}"' in text for v in ("width", "depth", "area",
                                                               "discharge"))


def test_a_bad_curve_file_stops_the_run_before_the_work(basin, tmp_path, capsys):
    from reachgauge.cli.entry import main

    v, streams, _ = basin
    bad = _csv(tmp_path, HEAD + "x,width,1,0.5,si,10,1\n")
    out = tmp_path / "r.gpkg"
    code = main(["run", "--dem", str(v.path), "--streams", str(streams), "--id-field", "rid",
                 "--drainage-area-field", "da_km2", "--regional-curves", str(bad),
                 "--out", str(out), "--quiet"])
    err = capsys.readouterr().err
    assert code == 2 and "area_max 1 is not above area_min 10" in err
    assert len(err.strip().splitlines()) == 1 and not out.exists()
