"""Our copy of Chow (1959) Table 5-6: against the published table, and against the
library it was transcribed from.

Source: Chow, V. T., 1959, Open-Channel Hydraulics, Table 5-6. Our rows were copied
from the table as encoded in fluids.open_flow.n_natural (Bell, C., fluids, PyPI), so
the check against fluids is a REGRESSION check (it catches a slip in our copy of
their copy, not an error they share). The independent check is against the printed
table: the values below were recalled from Chow's Table 5-6, not read from the book
here [memory]; where Chow prints no "normal" value (major streams) the library fills
one and only the minimum and maximum are checked. REFERENCES.md warns that copies of
this table carry typos.
"""

import pytest

from reachgauge.hydraulics import roughness


@pytest.fixture(scope="module")
def fluids_open_flow():
    return pytest.importorskip("fluids.open_flow")


# Chow (1959) Table 5-6, minimum / normal / maximum [memory]; None: not printed
CHOW_PRINTED = {
    "clean-straight": (0.025, 0.030, 0.033),
    "clean-straight-stony": (0.030, 0.035, 0.040),
    "clean-winding": (0.033, 0.040, 0.045),
    "winding-weeds": (0.035, 0.045, 0.050),
    "winding-low-stage": (0.040, 0.048, 0.055),
    "winding-stony": (0.045, 0.050, 0.060),
    "sluggish-weedy": (0.050, 0.070, 0.080),
    "very-weedy": (0.075, 0.100, 0.150),
    "mountain-gravel": (0.030, 0.040, 0.050),
    "mountain-boulders": (0.040, 0.050, 0.070),
    "major-irregular": (0.035, None, 0.100),
    "plain-short-grass": (0.025, 0.030, 0.035),
    "plain-high-grass": (0.030, 0.035, 0.050),
    "plain-no-crop": (0.020, 0.030, 0.040),
    "plain-row-crops": (0.025, 0.035, 0.045),
    "plain-field-crops": (0.030, 0.040, 0.050),
    "plain-scattered-brush": (0.035, 0.050, 0.070),
    "plain-light-brush-winter": (0.035, 0.050, 0.060),
    "plain-light-brush-summer": (0.040, 0.060, 0.080),
    "plain-dense-brush-winter": (0.045, 0.070, 0.110),
    "plain-dense-brush-summer": (0.070, 0.100, 0.160),
    "plain-willows": (0.110, 0.150, 0.200),
    "plain-stumps": (0.030, 0.040, 0.050),
    "plain-stumps-sprouts": (0.050, 0.060, 0.080),
    "plain-timber-low": (0.080, 0.100, 0.120),
    "plain-timber-high": (0.100, 0.120, 0.160),
}


@pytest.mark.parametrize("key,text,values", roughness.CHOW_NATURAL,
                         ids=[r[0] for r in roughness.CHOW_NATURAL])
def test_every_row_matches_the_printed_table(key, text, values):
    # exact: a table value is a printed number, not a measurement
    printed = CHOW_PRINTED[key]
    for ours, chow in zip(values, printed):
        if chow is not None:
            assert ours == pytest.approx(chow, abs=1e-12), key

# our key -> the fluids (group, description)
FLUIDS_KEYS = {
    "clean-straight": ("Minor streams", "Plain streams, clean, straight, full stage, no rifts or deep pools"),
    "clean-straight-stony": ("Minor streams", "Plain streams, clean, straight, full stage, no rifts or deep pools, more stones and weeds"),
    "clean-winding": ("Minor streams", "Clean, winding, some pools and shoals"),
    "winding-weeds": ("Minor streams", "Clean, winding, some pools and shoals, some weeds and stones"),
    "winding-low-stage": ("Minor streams", "Clean, winding, some pools and shoals, some weeds and stones, lower stages, less effective slopes and sections"),
    "winding-stony": ("Minor streams", "Clean, winding, some pools and shoals, more weeds and stones"),
    "sluggish-weedy": ("Minor streams", "Sluggish reaches, weedy, deep pools"),
    "very-weedy": ("Minor streams", "Very weedy reaches, deep pools, or floodways with heavy stand of timber and underbrush"),
    "mountain-gravel": ("Minor streams", "Mountain streams, no vegetation in channel, banks steep, trees and bush on the banks submerged to high stages, with gravel, cobbles and few boulders on bottom"),
    "mountain-boulders": ("Minor streams", "Mountain streams, no vegetation in channel, banks steep, trees and bush on the banks submerged to high stages, with cobbles and large boulders on bottom"),
    "major-irregular": ("Major streams", "Irregular, rough"),
    "plain-short-grass": ("Flood plains", "Pasture, no brush, short grass"),
    "plain-high-grass": ("Flood plains", "Pasture, no brush, high grass"),
    "plain-no-crop": ("Flood plains", "Cultivated areas, no crop"),
    "plain-row-crops": ("Flood plains", "Cultivated areas, mature row crops"),
    "plain-field-crops": ("Flood plains", "Cultivated areas, mature field crops"),
    "plain-scattered-brush": ("Flood plains", "Brush, scattered brush, heavy weeds"),
    "plain-light-brush-winter": ("Flood plains", "Brush, light brush and trees, in winter"),
    "plain-light-brush-summer": ("Flood plains", "Brush, light brush and trees, in summer"),
    "plain-dense-brush-winter": ("Flood plains", "Brush, medium to dense brush, in winter"),
    "plain-dense-brush-summer": ("Flood plains", "Brush, medium to dense brush, in summer"),
    "plain-willows": ("Flood plains", "Trees, dense willows, summer, straight"),
    "plain-stumps": ("Flood plains", "Trees, cleared land with tree stumps, no sprouts"),
    "plain-stumps-sprouts": ("Flood plains", "Trees, cleared land with tree stumps, heavy growth of sprouts"),
    "plain-timber-low": ("Flood plains", "Trees, heavy stand of timber, a few down trees, little undergrowth, flood stage below branches"),
    "plain-timber-high": ("Flood plains", "Trees, heavy stand of timber, a few down trees, little undergrowth, flood stage reaching branches"),
}


@pytest.mark.parametrize("key,text,values", roughness.CHOW_NATURAL, ids=[r[0] for r in roughness.CHOW_NATURAL])
def test_every_row_matches_fluids_regression(fluids_open_flow, key, text, values):
    group, desc = FLUIDS_KEYS[key]
    assert values == pytest.approx(fluids_open_flow.n_natural[group][desc])


def test_every_fluids_natural_row_is_ours(fluids_open_flow):
    ours = {FLUIDS_KEYS[k] for k, _t, _v in roughness.CHOW_NATURAL}
    theirs = {(g, d) for g, rows in fluids_open_flow.n_natural.items() for d in rows}
    assert ours == theirs


def test_range_checks():
    # 0.3 for 0.03 is a typo the hard range catches; 0.012 is outside the natural table
    with pytest.raises(ValueError, match="outside 0.01–0.25"):
        roughness.check_n_range(0.3)
    assert roughness.check_n_range(0.3, force=True)
    assert roughness.check_n_range(0.012)  # a warning text
    assert roughness.check_n_range(0.035) == []
    assert roughness.TABLE_RANGE == (0.020, 0.200)


def test_table_matches():
    keys = [k for k, _t, _v in roughness.table_matches(0.032, kind="channel")]
    assert "clean-straight" in keys and "plain-short-grass" not in keys
