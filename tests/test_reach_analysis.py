"""The hydraulics step for a whole reach (hydraulics.analyse_reach) on sections of
known shape, fed as the transects step would feed them.

References: trapezoid geometry A = (b + z y) y, P = b + 2 y sqrt(1 + z²)
(standard geometry); Manning's equation Q = (1/n) A R^(2/3) S^(1/2) (Chow, V. T.,
1959, Open-Channel Hydraulics, Eq. 5-6); normal depth at the bankfull discharge is
the bankfull depth (definition of freeboard: bankfull stage minus design stage).
"""

from types import SimpleNamespace

import numpy as np
import pandas as pd
import pytest
import shapely

from reachgauge.config import RunConfig
from reachgauge.hydraulics.reach import ReachInputs, ReachParams, analyse_reach

B, Z, H = 4.0, 1.0, 1.5      # bottom width, side slope (H:V), bank height (m)
SLOPE = 0.002


def _analyse(rs, cfg, inputs=None):
    """The hydraulics step with the parameters a RunConfig sets."""
    return analyse_reach(rs, ReachParams.from_config(cfg), inputs)


def fake_reach(t=10, step=0.5, half=15.0, bad=(7,)):
    x = np.arange(0.0, 2 * half + 1e-9, step)
    c = half
    z0 = np.clip((np.abs(x - c) - B / 2) / Z, 0, H)           # trapezoid, flat plains at H
    z0 = np.where(np.abs(x - c) > half - 1.0, H + 1.0, z0)     # valley walls at the ends
    chain = np.arange(t) * 20.0
    bed = 100.0 - SLOPE * chain
    elev = bed[:, None] + z0[None, :]
    status = np.array(["ok"] * t, dtype=object)
    for i in bad:
        status[i] = "no-data"
        elev[i] = np.nan
    lines = [shapely.LineString([(ch, -half), (ch, half)]) for ch in chain]
    reach = SimpleNamespace(reach_id="R1", name="test reach", attributes={}, orientation="as-digitised",
                            length_m=float(chain[-1]), half_width_m=half)
    return SimpleNamespace(
        reach=reach, status="ok", message="", chainage=chain, offsets=x, elevations=elev,
        transects=lines, thalweg_xy=np.column_stack([chain, np.zeros(t)]), thalweg_z=bed,
        thalweg_shift=np.zeros(t), transect_status=status, transect_flags=np.array([""] * t),
        slope=np.full(t, SLOPE), reach_slope=SLOPE, reach_left=np.full(t, half),
        profile=pd.DataFrame({"chainage": chain, "z_raw": bed, "z_carved": bed, "z_used": bed}))


def closed_form_q(y, n):
    a = (B + Z * y) * y
    p = B + 2 * y * np.sqrt(1 + Z * Z)
    return a / n * (a / p) ** (2 / 3) * np.sqrt(SLOPE)


def test_bank_top_finds_the_known_bank_height():
    res = _analyse(fake_reach(), RunConfig(n=0.035))
    ok = res.transects[res.transects.status == "ok"]
    # bank-top on a clean compound section: within 5 cm (its stage step is a few mm;
    # it reports the stage where the water has spread halfway onto the plain)
    assert ok.bankfull_depth.to_numpy() == pytest.approx(H, abs=0.05)
    assert set(ok.confidence) <= {"high", "medium"}


def test_bankfull_figures_match_closed_form():
    # fixed-depth 1.2 m: in bank, so the trapezoid closed form holds exactly
    rs = fake_reach()
    res = _analyse(rs, RunConfig(n=0.035, bankfull_method="fixed-depth", bankfull_depth=1.2))
    tr = res.transects
    ok = tr[tr.status == "ok"]
    assert ok.bankfull_depth.to_numpy() == pytest.approx(1.2, abs=1e-9)
    for _, row in ok.iterrows():
        y = row.bankfull_depth
        assert row.flow_area == pytest.approx((B + Z * y) * y, rel=1e-9)
        # banks at the water edges: the channel carries everything in bank
        assert row.discharge == pytest.approx(closed_form_q(y, 0.035), rel=1e-6)
        assert row.q_overbank_left == pytest.approx(0.0, abs=1e-9)
    bad = tr[tr.status != "ok"].iloc[0]
    assert bad.station == 7 and np.isnan(bad.discharge)
    assert res.reach["transects_ok"] == 9
    assert res.reach["bankfull_depth"] == pytest.approx(1.2)


def test_rating_curves_monotone_and_reach_median_present():
    res = _analyse(fake_reach(), RunConfig(n=0.035, rating_step=0.05))
    r = res.rating
    for st, grp in r.groupby("station"):
        assert grp.sort_values("depth")["discharge"].is_monotonic_increasing, st
    assert (r.station == -1).any()
    assert set(r.station.unique()) - {-1} == set(range(10)) - {7}


def test_design_flows_freeboard_and_out_of_bank():
    rs = fake_reach()
    first = _analyse(rs, RunConfig(n=0.035))
    q_bf = float(first.transects.discharge_total.iloc[0])  # what fills it to the bankfull stage
    res = _analyse(rs, RunConfig(n=0.035), ReachInputs(flows={"qbf": q_bf, "big": 5 * q_bf}))
    d = res.design
    row = d[(d.station == 0) & (d.flow == "qbf")].iloc[0]
    assert row.freeboard == pytest.approx(0.0, abs=1e-6)
    assert row.depth == pytest.approx(first.transects.bankfull_depth.iloc[0], abs=1e-6)
    big = d[(d.flow == "big") & (d.station >= 0)]
    assert big.out_of_bank.all() and (big.freeboard < 0).all()
    assert "big" in res.reach["flows_out"] and "qbf" not in res.reach["flows_out"]
    assert all("out-of-bank" in f for f in res.transects["flags"][res.transects.status == "ok"])


def test_calibration_recovers_n_and_applies_it():
    rs = fake_reach()
    n_true, y = 0.045, 1.0
    obs = pd.DataFrame({"reach_id": ["R1"], "chainage": [41.0], "x": [np.nan], "y": [np.nan],
                        "stage": [np.nan], "depth": [y], "discharge": [closed_form_q(y, n_true)]})
    res = _analyse(rs, RunConfig(n=0.035, calibrate=True), ReachInputs(observations=obs))
    cal = res.calibration.iloc[0]
    assert cal.station == 2 and cal.n_back == pytest.approx(n_true, rel=1e-9)
    assert res.reach["n_calibrated"] == pytest.approx(n_true, rel=1e-9)
    assert res.transects.n_channel.to_numpy() == pytest.approx(n_true)
    assert set(res.transects.n_source) == {
        "calibrated"}


def test_user_stages_and_baseflow_correction():
    rs = fake_reach()
    cfg = RunConfig(n=0.035, depths=(0.5,), elevations=(100.5,))
    res = _analyse(rs, cfg)
    s = res.stages[res.stages.station == 0]
    d05 = s[s.request == "depth 0.5"].iloc[0]
    assert d05.flow_area == pytest.approx((B + Z * 0.5) * 0.5, rel=1e-9)
    e = s[s.request == "elevation 100.5"].iloc[0]
    assert e.depth == pytest.approx(0.5)
    more = _analyse(rs, RunConfig(n=0.035, baseflow_depth=0.3))
    assert (more.transects.flow_area.dropna() > res.transects.flow_area.dropna() + 0.3).all()


def test_min_freeboard_is_unknown_when_a_flow_has_no_stage():
    rs = fake_reach()
    q_bf = float(_analyse(rs, RunConfig(n=0.035)).transects.discharge.iloc[0])
    # 1e7 m³/s is carried by no stage up to three times the profile's depth; it comes
    # first, so a later flow must not overwrite the unknown
    res = _analyse(rs, RunConfig(n=0.035), ReachInputs(flows={"absurd": 1e7, "half": 0.5 * q_bf}))
    ok = res.transects[res.transects.status == "ok"]
    assert ok.min_freeboard.isna().all()
    only = _analyse(rs, RunConfig(n=0.035), ReachInputs(flows={"half": 0.5 * q_bf}))
    d = only.design[(only.design.station >= 0)].set_index("station")
    ok = only.transects[only.transects.status == "ok"].set_index("station")
    np.testing.assert_allclose(ok.min_freeboard, d.loc[ok.index, "freeboard"])


def test_a_deeper_ditch_beyond_the_thalweg_search_is_not_the_channel():
    # a 2 m wide ditch 0.6 m deeper than the channel bed, 11 m from the centre line;
    # the thalweg was sought within 5 m of the line (the transect's snap distance), so
    # the section is the channel's: its bed is the thalweg and its banks give bankfull
    rs = fake_reach()
    x = rs.offsets
    ditch = np.abs(x - 4.0) <= 1.0
    rs.elevations = np.where(ditch[None, :], rs.thalweg_z[:, None] - 0.6, rs.elevations)
    rs.snap = 5.0
    res = _analyse(rs, RunConfig(n=0.035))
    ok = res.transects[res.transects.status == "ok"]
    np.testing.assert_allclose(ok.thalweg_z, rs.thalweg_z[ok.station], atol=1e-9)
    assert ok.bankfull_depth.to_numpy() == pytest.approx(H, abs=0.05)


def test_a_transect_without_ground_has_no_thalweg_elevation():
    # transect 7 of the fake reach is all nodata: its thalweg_z is no value, not 0
    res = _analyse(fake_reach(), RunConfig(n=0.035))
    row = res.transects.set_index("station").loc[7]
    assert row.status == "no-data" and np.isnan(row.thalweg_z)
