"""Design-flow capacity, calibration round trip, land-cover n and Cowan's method.

Sources: Manning's equation and the divided-channel method (Chow, V. T., 1959,
Open-Channel Hydraulics, Eq. 5-6 and §6-9); Horton–Einstein composite n (Chow
1959, Eq. 6-17); Cowan's method and its term ranges (Arcement, G. J., and
Schneider, V. R., 1989, USGS Water-Supply Paper 2339, Table 1 — channel terms
[read], vegetation and meander terms [memory]).
"""

import numpy as np
import pandas as pd
import pytest

from reachgauge.hydraulics import calibration, capacity, roughness
from reachgauge.errors import InputError
from reachgauge.kernel import sections as K


def compound_set(t=4):
    # 4 m channel 1.5 m deep (side slope 1:1), flood plains at 1.5 either side, walls at 3
    x = np.linspace(0, 30, 301)
    z = np.interp(x, [0, 0.01, 11.5, 13, 17, 18.5, 29.99, 30], [3, 1.5, 1.5, 0, 0, 1.5, 1.5, 3])
    zz = np.tile(z, (t, 1)) + np.arange(t)[:, None] * 0.1
    return K.profiles(x, zz), np.tile([11.5, 18.5], (t, 1))


def test_design_flow_equal_to_bankfull_gives_zero_freeboard():
    ps, banks = compound_set()
    bf_stage = ps.thalweg + 1.5
    n = (0.06, 0.035, 0.06)
    q_bf = K.flow(ps, bf_stage, 0.002, n, banks).discharge[:, 0]
    # one design flow per transect equal to its own bankfull discharge
    for i in range(ps.count):
        checks = capacity.check_flows(ps.take([i]), {"qbf": float(q_bf[i])}, 0.002, n, banks[i:i + 1],
                                      bf_stage[i:i + 1], q_bf[i:i + 1])
        assert checks["freeboard"].iloc[0] == pytest.approx(0.0, abs=1e-6)
        assert checks["q_ratio"].iloc[0] == pytest.approx(1.0)
        assert not checks["out_of_bank"].iloc[0]


def test_flows_above_and_below_bankfull():
    ps, banks = compound_set()
    bf_stage = ps.thalweg + 1.5
    n = (0.06, 0.035, 0.06)
    q_bf = K.flow(ps, bf_stage, 0.002, n, banks).discharge[:, 0]
    checks = capacity.check_flows(ps, {"low": 0.5 * q_bf.min(), "high": 2.0 * q_bf.max(),
                                       "huge": 1e5}, 0.002, n, banks, bf_stage, q_bf)
    by = {k: g for k, g in checks.groupby("flow")}
    assert (by["low"]["freeboard"] > 0).all() and not by["low"]["out_of_bank"].any()
    assert (by["high"]["freeboard"] < 0).all() and by["high"]["out_of_bank"].all()
    assert by["huge"]["over_profile"].all() and by["huge"]["out_of_bank"].all()
    summary = capacity.summarise_flows(checks, float(np.median(q_bf)), np.ones(ps.count, bool))
    assert summary.set_index("flow").loc["high", "out_of_bank"]
    assert not summary.set_index("flow").loc["low", "out_of_bank"]


@pytest.mark.parametrize("depth", [0.6, 1.2, 2.0])  # in bank and over the flood plain
def test_calibration_round_trip(depth):
    ps, banks = compound_set()
    n_true = 0.042
    n_ob = np.tile([0.07, 0.08], (ps.count, 1))
    stage = ps.thalweg + depth
    q = K.flow(ps, stage, 0.0015, np.column_stack([n_ob[:, 0], np.full(ps.count, n_true),
                                                   n_ob[:, 1]]), banks).discharge[:, 0]
    n_back = calibration.back_calculate(ps, np.arange(ps.count), stage, q,
                                        np.full(ps.count, 0.0015), n_ob, banks)
    np.testing.assert_allclose(n_back, n_true, rtol=1e-10)


def test_match_transects_by_chainage_and_point():
    import shapely

    obs = pd.DataFrame({"chainage": [12.0, np.nan], "x": [np.nan, 5.0], "y": [np.nan, 41.0]})
    lines = [shapely.LineString([(0, 10 * i), (10, 10 * i)]) for i in range(5)]
    idx = calibration.match_transects(obs, np.array([0.0, 10.0, 20.0, 30.0, 40.0]), lines)
    assert idx.tolist() == [1, 4]


def test_landcover_n_horton_einstein_per_part():
    x = np.arange(10.0)
    classes = np.array([[2, 2, 2, 1, 1, 1, 1, 3, 3, 3]])
    table = {1: 0.035, 2: 0.030, 3: 0.100}
    n, unknown = roughness.subsection_n_from_classes(classes, x, np.array([[2.5, 6.5]]), table, 0.04)
    assert n[0].tolist() == pytest.approx([0.030, 0.035, 0.100])
    assert not unknown[0]
    # a mixed part: Horton–Einstein with equal lengths, (mean n^1.5)^(2/3) (Chow 1959, Eq. 6-17)
    n, _ = roughness.subsection_n_from_classes(classes, x, np.array([[-1, 4.5]]), table, 0.04)
    mixed = roughness.horton_einstein([1] * 5, [0.03, 0.03, 0.03, 0.035, 0.035])
    assert n[0, 1] == pytest.approx(mixed)
    # unknown class: fallback n and a flag
    n, unknown = roughness.subsection_n_from_classes(np.array([[9] * 10]), x, np.array([[2.5, 6.5]]),
                                                     table, 0.04)
    assert unknown[0] and n[0].tolist() == pytest.approx([0.04] * 3)


def test_cowan_sum_and_term_ranges():
    # n = (nb + n1 + n2 + n3 + n4) m (Arcement & Schneider 1989, Eq. 1): a gravel channel
    # (nb 0.028, low end of Table 1's gravel range), minor irregularity 0.005, occasional
    # variation 0.005, minor obstructions 0.010, small vegetation 0.005, appreciable meander 1.15
    n = roughness.cowan_n(0.028, 0.005, 0.005, 0.010, 0.005, 1.15)
    assert n == pytest.approx((0.028 + 0.005 + 0.005 + 0.010 + 0.005) * 1.15)
    # every range of Table 1 lies inside the checks
    for table in (roughness.COWAN_IRREGULARITY, roughness.COWAN_VARIATION,
                  roughness.COWAN_OBSTRUCTION):
        for lo, hi in table.values():
            assert lo <= hi
    assert roughness.COWAN_IRREGULARITY["severe"] == (0.011, 0.020)
    assert roughness.COWAN_OBSTRUCTION["appreciable"] == (0.020, 0.030)
    with pytest.raises(InputError, match="irregularity"):
        roughness.cowan_n(0.03, irregularity=0.05)
    with pytest.raises(InputError, match="meander"):
        roughness.cowan_n(0.03, meander=2.0)
    assert roughness.meander_multiplier(1.1) == 1.0 and roughness.meander_multiplier(1.6) == 1.3


def test_reach_channel_n_priority():
    cow = {"A": dict(base=0.03, irregularity=0.005, variation=0.0, obstruction=0.0, vegetation=0.0,
                     meander=1.0)}
    assert roughness.reach_channel_n("A", {"n": 0.05}, default=0.035, n_field="n", cowan_terms=cow) \
        == (pytest.approx(0.035), "cowan")
    assert roughness.reach_channel_n("B", {"n": 0.05}, default=0.035, n_field="n") == (0.05, "field")
    assert roughness.reach_channel_n("B", {"n": None}, default=0.035, n_field="n") == (0.035, "default")
    with pytest.raises(InputError, match="not a field"):
        roughness.reach_channel_n("B", {"m": 1}, default=0.035, n_field="n")


def test_overbank_n_has_its_own_default_not_the_channel_and_not_cowans_meander():
    # Arcement & Schneider (1989): the meander multiplier m applies to the channel n
    # only; a flood plain's n is its own. With Cowan terms for the channel (m = 1.30)
    # and no overbank n given, the overbanks take the flood-plain default.
    cowan = {"R1": dict(base=0.028, irregularity=0.005, variation=0.0, obstruction=0.01,
                        vegetation=0.005, meander=1.30)}
    n, src, _ = roughness.transect_n("R1", {}, 3, roughness.RoughnessParams(n=0.035),
                                     cowan_terms=cowan)
    assert n[0, 1] == pytest.approx((0.028 + 0.005 + 0.01 + 0.005) * 1.30)
    assert n[0, 0] == n[0, 2] == roughness.FLOODPLAIN_N
    # the default is the median of Chow's flood-plain "normal" values (Table 5-6)
    normals = sorted(v[1] for k, _t, v in roughness.CHOW_NATURAL if k.startswith("plain-"))
    assert roughness.FLOODPLAIN_N == pytest.approx(normals[len(normals) // 2])
    given = roughness.transect_n("R1", {}, 3, roughness.RoughnessParams(n=0.035, n_overbank=0.08))
    assert given[0][0, 0] == 0.08


def test_regional_curve_in_us_units_is_converted(tmp_path):
    # depth = a·DA^b in ft and mi² with --units us; a_si = a_us·0.3048/2.59^b
    # (1 mi = 1609.344 m exactly): the same depth whichever units the curve is in
    from reachgauge.config import RunConfig
    from reachgauge.hydraulics.bankfull import regional_depth
    from reachgauge.hydraulics.reach import ReachParams

    cfg = RunConfig(bankfull_method="regional", regional_coef=0.9502, regional_exp=0.296,
                    drainage_area_field="da", units="us")
    params = ReachParams.from_config(cfg)
    da_mi2 = 10.0
    depth_m = regional_depth(da_mi2 * params.drainage_area_km2_per_unit,
                             params.bankfull.regional_coef, params.bankfull.regional_exp)
    assert depth_m == pytest.approx(0.9502 * da_mi2 ** 0.296 * 0.3048, rel=1e-12)
