"""Checks of the Monte Carlo uncertainty (reachgauge.hydraulics.uncertainty).

References outside the project, named beside each check:
- closed-form trapezoid geometry, A = (b + z y) y, P = b + 2 y √(1 + z²) (plane
  geometry; Chow 1959, Table 2-1) and Manning's equation Q = A R^(2/3) S^(1/2) / n
  (Chow 1959, Eq. 5-6), so Q ∝ 1/n and the quantiles of Q under a uniform n are those
  of 1/n, in closed form;
- the expected range d₂ of k normal draws, as tabulated in quality-control texts
  (Montgomery, *Introduction to Statistical Quality Control*, Appendix VI [memory]);
- binomial tolerances for shares of independent trials;
- equality between ways of running (seed, executor, draws = 0), as in test_resume.py.
"""

from __future__ import annotations

import hashlib
import os
import subprocess
import sys
from pathlib import Path

import geopandas
import numpy as np
import pytest
import shapely

import terrain_fixtures as tf
from reachgauge import api
from reachgauge.hydraulics import spreads as S
from reachgauge.hydraulics import uncertainty as U
from reachgauge.kernel import sections as K
from reachgauge.transects import slope as slope_mod

pytestmark = pytest.mark.filterwarnings("ignore::RuntimeWarning")
EXE = Path(sys.executable).with_name("reachgauge")
EPOCH = "1700000000"


def trapezoids(b, z, height, bed=100.0):
    """Profiles of trapezoids of bottom width b, side slope z (H:V), banks ``height``
    above the bed, one per row; banks at the ends (the whole section is channel)."""
    b, z, height = (np.asarray(v, float) for v in (b, z, height))
    x = np.stack([np.zeros_like(b), z * height, z * height + b, 2 * z * height + b], axis=1)
    zz = np.stack([bed + height, np.full_like(b, bed), np.full_like(b, bed), bed + height], axis=1)
    p = K.profiles(x, zz)
    return p, np.column_stack([x[:, 0], x[:, -1]])


def manning_trapezoid(b, z, y, slope, n):
    """Chow (1959), Table 2-1 and Eq. 5-6, SI."""
    a = (b + z * y) * y
    per = b + 2 * y * np.sqrt(1 + z ** 2)
    return a * (a / per) ** (2 / 3) * np.sqrt(slope) / n


def spread(t, stage, slope, n_lo, n_hi, slope_sd=0.0, stage_sd=0.0):
    lo = np.tile([n_lo, n_lo, n_lo], (t, 1))
    hi = np.tile([n_hi, n_hi, n_hi], (t, 1))
    return U.Spread(lo, hi, None, np.full(t, slope), np.full(t, slope_sd), 1,
                    np.asarray(stage, float), np.full(t, stage_sd))


def test_only_n_varying_gives_the_closed_form_band():
    """Geometry, slope and stage exact, n uniform on [lo, hi]: Q = Q₁/n, so p10 of Q is
    Q₁ / n₉₀ and p90 is Q₁ / n₁₀, with n_q = lo + q (hi − lo); the same at every rating
    depth. Tolerance: the sample quantile of a uniform over D draws has sd
    √(q(1−q)/D)·(hi − lo) (asymptotic order statistics); 4 sd."""
    b, z, y, s = 6.0, 1.5, 1.2, 0.002
    p, banks = trapezoids([b], [z], [2.0])
    lo, hi, draws = 0.03, 0.05, 8000
    sp = spread(1, [100.0 + y], s, lo, hi)
    dr = U.draw_inputs(sp, draws, np.random.default_rng(1))
    depths = np.array([0.5, 1.0, 1.5])
    sm = U.propagate(p, banks, sp, dr, [0], depths, np.random.default_rng(2))
    out = U.summarise(sm, {}, [True], [True])
    tol_n = 4 * np.sqrt(0.09 / draws) * (hi - lo)
    for key, q in (("discharge_p10", 0.9), ("discharge_p50", 0.5), ("discharge_p90", 0.1)):
        n_q = lo + q * (hi - lo)
        expect = manning_trapezoid(b, z, y, s, n_q)
        got = out.transect[key][0]
        assert abs(got - expect) <= expect * tol_n / n_q, (key, got, expect)
        assert abs(out.reach[key] - expect) <= expect * tol_n / n_q
    for j, q in ((0, 0.9), (2, 0.1)):
        expect = manning_trapezoid(b, z, depths, s, lo + q * (hi - lo))
        np.testing.assert_allclose(out.rating[j, 0], expect, rtol=tol_n / lo)


def test_probability_out_of_bank_matches_the_closed_form():
    """A design flow Q_d leaves the channel where Q₁/n < Q_d, i.e. n > Q₁/Q_d:
    probability (hi − Q₁/Q_d) / (hi − lo) for uniform n. Tolerance 4 binomial sd."""
    b, z, y, s = 6.0, 1.5, 1.2, 0.002
    p, banks = trapezoids([b], [z], [y])
    lo, hi, draws = 0.03, 0.05, 4000
    q1 = manning_trapezoid(b, z, y, s, 1.0)
    qd = q1 / 0.045                     # out of bank where n > 0.045: probability 1/4
    sp = spread(1, [100.0 + y], s, lo, hi)
    dr = U.draw_inputs(sp, draws, np.random.default_rng(3))
    sm = U.propagate(p, banks, sp, dr, [0], [], np.random.default_rng(4))
    out = U.summarise(sm, {"q": qd}, [True], [True])
    expect = (hi - 0.045) / (hi - lo)
    tol = 4 * np.sqrt(expect * (1 - expect) / draws)
    assert abs(out.p_out[0, 0] - expect) <= tol
    assert abs(out.p_out_reach[0] - expect) <= tol


def test_the_band_covers_the_truth_at_its_stated_rate():
    """Sections whose true n, slope and stage differ from the observed by draws from
    the stated distributions (n uniform ±20 %, slope lognormal, stage normal): the
    p10-p90 band should hold the true discharge (closed form, Chow 1959) in 80 % of
    them. 400 sections: binomial sd √(400·0.8·0.2) = 8; the band's own quantiles from
    400 draws add a little; tolerance 3 sd (±24) around 320."""
    rng = np.random.default_rng(20)
    t = 400
    b = rng.uniform(2, 20, t)
    z = rng.uniform(0.5, 3, t)
    y_obs = rng.uniform(0.5, 2.5, t)
    s_obs = 10 ** rng.uniform(-3.5, -1.5, t)
    n_obs, slope_sd, stage_sd = 0.04, 0.3, 0.1
    p, banks = trapezoids(b, z, y_obs + 1.0)
    sp = U.Spread(np.full((t, 3), n_obs * 0.8), np.full((t, 3), n_obs * 1.2), None, s_obs,
                  np.full(t, slope_sd), 1, 100.0 + y_obs, np.full(t, stage_sd))
    dr = U.draw_inputs(sp, 400, rng)
    sm = U.propagate(p, banks, sp, dr, np.arange(t), [], rng)
    out = U.summarise(sm, {}, np.ones(t, bool), np.ones(t, bool))
    n_true = rng.uniform(0.8, 1.2, t) * n_obs
    s_true = s_obs * np.exp(slope_sd * rng.standard_normal(t))
    y_true = y_obs + stage_sd * rng.standard_normal(t)
    q_true = manning_trapezoid(b, z, y_true, s_true, n_true)
    hits = int(((out.transect["discharge_p10"] <= q_true)
                & (q_true <= out.transect["discharge_p90"])).sum())
    assert 296 <= hits <= 344, hits


def test_expected_range_of_normal_draws():
    """d₂(k) against the quality-control table (4 significant digits)."""
    for k, d2 in ((2, 1.128), (3, 1.693), (4, 2.059), (5, 2.326)):
        assert S.expected_range(k) == pytest.approx(d2, abs=6e-4)
    assert S.expected_range(1) == 0.0
    # two methods 0.2 m apart and no noise: σ = 0.2 / d₂(2)
    sd = S.stage_sd(np.array([[100.0, 100.2, np.nan, np.nan]]), np.array([0.0]))
    assert sd[0] == pytest.approx(0.2 / 1.128, rel=1e-3)


def test_slope_spread_matches_the_window_fits_own_scatter():
    """On a straight grade with Gaussian noise, the predicted log-sd of a station's
    slope against the scatter of the windowed Theil–Sen fit over 300 noise draws
    (the fit the run uses). Theil–Sen is a little less efficient than least squares
    (Sen 1968 [memory]; benchmarks/bench_slope.py: 1.0–1.2×), and an sd from 300 draws
    is within ±10 % (2 sd of its sampling error): accept 0.85–1.35."""
    rng = np.random.default_rng(7)
    c = np.arange(0.0, 2000.0, 10.0)
    grade, sigma, window = 0.002, 0.02, 200.0
    fits = np.array([-slope_mod.theil_sen_windows(c, 50 - grade * c + rng.normal(0, sigma, c.size),
                                                  window)[100] for _ in range(300)])
    z = 50 - grade * c + rng.normal(0, sigma, c.size)
    sd, span = S.slope_log_sd(c, z, np.full(c.size, grade), window)
    ratio = np.std(np.log(fits)) / sd[100]
    assert 0.85 <= ratio <= 1.35, ratio
    assert span == 21


def test_generator_depends_on_seed_and_reach_only():
    a = U.generator(3, "A").random(4)
    assert np.array_equal(a, U.generator(3, "A").random(4))
    assert not np.array_equal(a, U.generator(3, "B").random(4))
    assert not np.array_equal(a, U.generator(4, "A").random(4))


# ----------------------------------------------------------------- whole runs
@pytest.fixture(scope="module")
def valley(tmp_path_factory):
    """A 300 m channel in three reaches, with two design flows."""
    d = tmp_path_factory.mktemp("unc")
    line = tf.straight_line(300.0)
    v = tf.make_valley_raster(d, line, res=1.0, noise=0.02, seed=5, margin=60.0)
    (x0, y0), (x1, y1) = line.coords[0], line.coords[-1]
    parts = [shapely.LineString([(x0 + (x1 - x0) * k / 3, y0), (x0 + (x1 - x0) * (k + 1) / 3, y1)])
             for k in range(3)]
    streams = tf.write_lines(d / "streams.gpkg", parts, fields={"rid": list("ABC")})
    flows = d / "flows.csv"
    flows.write_text("reach_id,flow,discharge\n" + "".join(f"{r},q2,3.0\n{r},q100,20\n"
                                                           for r in "ABC"))
    return v.path, streams, flows


def sha(path) -> str:
    return hashlib.sha256(Path(path).read_bytes()).hexdigest()


def run(valley, out, monkeypatch, **settings):
    """A run in this process (no start-up cost), creation time fixed."""
    dem, streams, flows = valley
    monkeypatch.setenv("SOURCE_DATE_EPOCH", EPOCH)
    api.run(out, dem=dem, streams=streams, id_field="rid", half_width=30.0, spacing=10.0,
            design_flows=flows, n_overbank=0.05, **settings)
    return sha(out)


def run_cli(valley, out, *extra):
    """The same run through the command line (the options as a user types them)."""
    dem, streams, flows = valley
    env = dict(os.environ, SOURCE_DATE_EPOCH=EPOCH)
    src = Path(__file__).resolve().parents[1] / "src"
    env["PYTHONPATH"] = os.pathsep.join([str(src), env.get("PYTHONPATH", "")])
    cmd = [str(EXE), "run", "--dem", str(dem), "--streams", str(streams), "--id-field", "rid",
           "--half-width", "30", "--spacing", "10", "--design-flows", str(flows),
           "--n-overbank", "0.05", "--out", str(out), "--quiet", *map(str, extra)]
    r = subprocess.run(cmd, env=env, capture_output=True, text=True)
    assert r.returncode == 0, r.stderr
    return sha(out)


def test_zero_draws_change_nothing(valley, tmp_path, monkeypatch):
    """--uncertainty 0 writes the file a run without the option writes, byte for byte;
    with other uncertainty settings too, every layer but run_info is the same."""
    plain = run(valley, tmp_path / "a.gpkg", monkeypatch)
    assert run_cli(valley, tmp_path / "b.gpkg", "--uncertainty", 0) == plain
    run_cli(valley, tmp_path / "c.gpkg", "--uncertainty", 0, "--vertical-accuracy", 0.2,
            "--n-range", 0.03, 0.05, "--seed", 9)
    for layer, new in (("transects", "discharge_p50"), ("reaches", "discharge_p10"),
                       ("rating_curves", "discharge_p90"), ("design_checks", "p_out_of_bank")):
        a = geopandas.read_file(tmp_path / "a.gpkg", layer=layer)
        c = geopandas.read_file(tmp_path / "c.gpkg", layer=layer)
        assert a.equals(c), layer
        assert a[new].isna().all(), layer


def test_same_seed_same_file_whatever_the_executor(valley, tmp_path, monkeypatch):
    """Draws seeded by the run seed and the reach id: one process and two give the
    same file (another seed gives other draws: test_generator_depends_on_seed_and_reach_only);
    p10 < p90 and p_out_of_bank in [0, 1]."""
    opts = dict(uncertainty=60, vertical_accuracy=0.1)
    one = run(valley, tmp_path / "one.gpkg", monkeypatch, **opts)
    assert run(valley, tmp_path / "two.gpkg", monkeypatch, jobs=2, **opts) == one
    a = geopandas.read_file(tmp_path / "one.gpkg", layer="reaches")
    assert (a["discharge_p10"] < a["discharge_p90"]).all()
    d = geopandas.read_file(tmp_path / "one.gpkg", layer="design_checks")
    assert d["p_out_of_bank"].between(0, 1).all()


def test_cowan_terms_take_the_range_of_their_class():
    """Each term's bounds are those of the classes of Arcement & Schneider (1989),
    Table 1, that hold it: base 0.028 is earth (0.025-0.032) or gravel (0.028-0.035),
    irregularity 0.003 minor (0.001-0.005), variation 0.002 occasional (0.001-0.005),
    obstruction 0.002 negligible (0-0.004), vegetation 0.003 small (0.002-0.010)."""
    lo, hi, m = S.cowan_ranges({"base": 0.028, "irregularity": 0.003, "variation": 0.002,
                                "obstruction": 0.002, "vegetation": 0.003, "meander": 1.15})
    np.testing.assert_allclose(lo, [0.025, 0.001, 0.001, 0.0, 0.002])
    np.testing.assert_allclose(hi, [0.035, 0.005, 0.005, 0.004, 0.010])
    assert m == 1.15
