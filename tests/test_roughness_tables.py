"""Our copy of Chow (1959) Table 5-6 against the copy in the fluids package.

Source: Chow, V. T., 1959, Open-Channel Hydraulics, Table 5-6, as encoded in
fluids.open_flow.n_natural (Bell, C., fluids, PyPI). REFERENCES.md warns that
copies of this table carry typos: two independent copies must agree.
"""

import pytest

from reachgauge.hydraulics import roughness

fluids_open_flow = pytest.importorskip("fluids.open_flow")

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
def test_every_row_matches_fluids(key, text, values):
    group, desc = FLUIDS_KEYS[key]
    assert values == pytest.approx(fluids_open_flow.n_natural[group][desc])


def test_every_fluids_natural_row_is_ours():
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
