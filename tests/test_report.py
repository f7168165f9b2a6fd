"""The HTML report: content, escaping, offline-ness, errors, and a real browser.

Sources of the checks:
- HTML parsing: Python's standard-library parser (:mod:`html.parser`), which
  follows the HTML5 tokenizer for text and character references; a string
  that comes back as text from it was escaped, a tag it reports was markup.
- PNG layout: the PNG specification (W3C Recommendation / ISO/IEC 15948:2004,
  §5.2 signature, §11.2.2 IHDR: width and height as big-endian 4-byte ints).
- Pixel size of a figure saved without a tight bounding box: inches × DPI
  (matplotlib's documented ``savefig`` behaviour).
- Lightness: sRGB decoding of IEC 61966-2-1, relative luminance with the
  ITU-R BT.709 primaries, CIE 1976 L* (CIE 15:2004).
- Unit factors: 1 ft = 0.3048 m exactly (international yard and pound, 1959).
- Headless Chromium: renders the file and reports console messages (a
  Content-Security-Policy violation would be one) on stderr.
The result data are invented (tests/report_fixtures.py).
"""

from __future__ import annotations

import base64
import math
import re
import shutil
import struct
import subprocess
from html.parser import HTMLParser

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from reachgauge.cli import entry as cli
from reachgauge import flags
from reachgauge.results import report, report_figures, report_maps
from reachgauge.errors import InputError
from reachgauge.notices import CAUTIONS
from report_fixtures import BAD, FLOWS, NAMES, result_layers, write_result

# every tag the report may write; anything else in a parsed page came from data
ALLOWED_TAGS = {"html", "head", "meta", "title", "style", "body", "div", "header", "h1", "h2", "h3",
                "p", "section", "nav", "footer", "ul", "ol", "li", "b", "sub", "dl", "dt", "dd",
                "table", "thead", "tbody", "tr", "th", "td", "span", "figure", "img", "figcaption",
                "a", "details", "summary"}


class Page(HTMLParser):
    """Tags, attributes and text of an HTML document (stdlib parser)."""

    def __init__(self, text: str):
        super().__init__(convert_charrefs=True)
        self.tags, self.attrs, self.chunks, self.rows = [], [], [], []
        self.feed(text)
        self.close()
        self.raw = "".join(self.chunks)                  # text exactly as parsed
        self.text = re.sub(r"\s+", " ", self.raw)        # whitespace runs folded

    def handle_starttag(self, tag, attrs):
        self.tags.append(tag)
        self.attrs.append((tag, dict(attrs)))
        if tag == "tr":
            self.rows.append(dict(attrs).get("class", ""))

    def handle_data(self, data):
        self.chunks.append(data)

    def values(self, attr):
        return [a[attr] for _t, a in self.attrs if attr in a]


@pytest.fixture(scope="module")
def layers():
    return result_layers()


@pytest.fixture(scope="module")
def gpkg(tmp_path_factory):
    return write_result(tmp_path_factory.mktemp("result") / "result.gpkg")


@pytest.fixture(scope="module")
def html_file(gpkg, tmp_path_factory):
    out = tmp_path_factory.mktemp("report") / "report.html"
    assert report.write_report(gpkg, out) == out
    return out


@pytest.fixture(scope="module")
def page_text(html_file):
    return html_file.read_text(encoding="utf-8")


@pytest.fixture(scope="module")
def page(page_text):
    return Page(page_text)


def png_size(data: bytes) -> tuple[int, int]:
    assert data[:8] == b"\x89PNG\r\n\x1a\n"            # PNG spec §5.2 signature
    assert data[12:16] == b"IHDR"                       # first chunk is IHDR (§11.2.2)
    return struct.unpack(">II", data[16:24])


# ------------------------------------------------------------------ content
def test_every_reach_has_a_section_and_a_contents_link(layers, page):
    ids = {a["id"] for _t, a in page.attrs if "id" in a}
    links = [h for h in page.values("href") if h.startswith("#")]
    for i, r in enumerate(layers["reaches"].itertuples()):
        assert f"reach-{i}" in ids and f"#reach-{i}" in links
        assert r.reach_id in page.text and r.name in page.text
    assert set(h[1:] for h in links) <= ids                 # no dangling anchor


def test_images_are_embedded_pngs_of_the_expected_size(layers, page, page_text):
    srcs = page.values("src")
    n_ok = int((layers["reaches"]["status"] == "ok").sum())
    # the map, then per processed reach: rating curve, profile, cross-sections
    assert len(srcs) == 1 + 3 * n_ok
    assert page_text.count("data:image/png;base64,") == len(srcs)
    sizes = [png_size(base64.b64decode(s.split(",", 1)[1], validate=True)) for s in srcs]
    # saved without a tight box: pixels = inches × DPI (9.5 in and 6.4 in wide figures)
    assert sizes[0][0] == round(9.5 * report_figures.DPI)
    assert sizes[1] == (round(6.4 * report_figures.DPI), round(3.8 * report_figures.DPI))       # rating
    assert sizes[2] == (round(9.5 * report_figures.DPI), round(3.2 * report_figures.DPI))       # profile
    assert sizes[3] == (round(9.5 * report_figures.DPI), round(6.0 * report_figures.DPI))       # 2 × 2 sections


def test_no_external_reference_anywhere(page, page_text):
    assert not re.search(r"https?://", page_text, re.I)
    assert not re.search(r"""(?:src|href)\s*=\s*["']?\s*//""", page_text, re.I)
    for v in page.values("src"):
        assert v.startswith("data:image/png;base64,")
    for v in page.values("href"):
        assert v.startswith("#")
    assert not {"script", "link", "iframe", "object", "embed", "base", "form"} & set(page.tags)
    style = re.findall(r"<style>(.*?)</style>", page_text, re.S)
    assert style and not re.search(r"url\(|@import|@font-face", style[0], re.I)
    csp = [a["content"] for t, a in page.attrs
           if t == "meta" and a.get("http-equiv") == "Content-Security-Policy"]
    assert csp and "default-src 'none'" in csp[0]


def test_cautions_come_first(page):
    text = page.text
    for c in CAUTIONS:
        assert c in text
    assert max(text.index(c) for c in CAUTIONS) < text.index("Run summary") < text.index("Map")


def test_user_text_is_escaped(page, page_text):
    assert set(page.tags) <= ALLOWED_TAGS
    for raw in (*NAMES, *FLOWS, BAD["name"], BAD["message"], "/data/<dem>&co.tif",
                "1 feature had <no> geometry & was skipped", '"<nm>"'):
        assert raw in page.text                 # came back as text, so it was escaped
    assert "<script" not in page_text and "<em>" not in page_text and "<reach>" not in page_text
    assert "&lt;b&gt;&amp;&quot;x&quot;" in page_text


INFO = report._run_info(result_layers(n_ok=0, bad=False)["run_info"])
# text rich in the characters HTML gives meaning to, around any printable ones
markup = st.text(alphabet=list("<>&\"'/=;#!-abiz "), min_size=1, max_size=12)
names = st.tuples(markup, st.text(st.characters(blacklist_categories=("Cs", "Cc")), max_size=20),
                  markup).map("".join)


@settings(max_examples=60, deadline=None)
@given(rid=names, name=names, status=names, message=names)
def test_any_text_in_a_bad_reach_section_stays_text(rid, name, status, message):
    row = next(pd.DataFrame([{"reach_id": rid, "name": name, "status": "x" + status,
                              "message": message}]).itertuples(index=False))
    parsed = Page(report._reach_section(0, row, {}, INFO))
    assert set(parsed.tags) <= ALLOWED_TAGS
    for s in (rid, name, "x" + status, message):
        assert s in parsed.raw


def reach_section(page_text: str, i: int) -> str:
    """Parsed text of the report's section for the i-th reach."""
    m = re.search(rf'<section class="reach" id="reach-{i}">(.*?)</section>', page_text, re.S)
    assert m, f"no section for reach {i}"
    return Page(m.group(1)).text


def test_bad_reach_section_says_why(layers, page_text):
    i = int(np.flatnonzero(layers["reaches"]["status"] != "ok")[0])
    section = reach_section(page_text, i)
    assert BAD["name"] in section and BAD["status"] in section
    assert flags.REACH_STATUS[BAD["status"]] in section
    assert BAD["message"] in section


def test_code_table_lists_exactly_the_codes_that_occur(layers, page):
    tr = layers["transects"]
    seen = {c for f in tr["flags"] for c in f.split(";") if c} | {"carved"}  # + the slope flag
    for code in seen:
        assert flags.FLAGS[code] in page.text
    for code in set(flags.FLAGS) - seen:
        assert flags.FLAGS[code] not in page.text
    for code in set(tr["status"]) - {"ok"}:
        assert flags.TRANSECT_STATUS[code] in page.text


def test_summary_counts_match_the_layers(layers, page):
    tr = layers["transects"]
    n_ok = int((tr["status"] == "ok").sum())
    # sections counted by their gravest flag, design-flow results (flags.CAPACITY_FLAGS) aside
    capacity = {"out-of-bank", "over-profile"}
    grave = [flags.worst(f) or "none" for f in tr["flags"]]
    # by hand: the gravest severity of the flags other than the design-flow results
    hand = ["none" if not [c for c in f.split(";") if c and c not in capacity] else
            max((flags.severity(c) for c in f.split(";") if c and c not in capacity),
                key=flags.SEVERITIES.index) for f in tr["flags"]]
    assert grave == hand
    assert (f"{len(tr)}: {n_ok} with figures; by their gravest flag (design-flow results aside) "
            f"{grave.count('do not use')} do not use, {grave.count('check')} to check, "
            f"{grave.count('information')} information only, {grave.count('none')} clean"
            ) in page.text
    out = layers["reaches"].query("flows_out != '' and flows_out == flows_out")
    assert len(out) >= 1
    summary = page.text[page.text.index("Design flows out of bank"):page.text.index("Units")]
    for r in out.itertuples():
        assert r.reach_id in summary


def test_transect_rows_marked(layers, page):
    tr = layers["transects"]
    ok = tr["status"] == "ok"
    grave = tr["flags"].map(flags.worst)
    # ✕ (void): no figure to use (a status, or a "do not use" flag); ! (flagged): look
    # before using; information-only flags carry no mark
    void = ~ok | (grave == "do not use")
    assert page.rows.count("void") == int(void.sum())
    assert page.rows.count("flagged") >= int((~void & (grave == "check")).sum())


def test_us_units_are_labelled_and_not_converted_twice():
    si, us = result_layers(), result_layers(units="us")
    text = Page(report.render_report(us)).text
    assert "ft³/s" in text and "m³/s" not in text
    q_si = float(si["reaches"]["discharge"].iloc[0])
    # the contents line shows the reach's bankfull discharge, 3 significant digits
    assert f"Qbf {q_si / 0.3048 ** 3:.3g} ft³/s" in text


def test_colour_field_named_in_the_map_caption():
    text = Page(report.render_report(result_layers(), colour_by="velocity")).text
    assert "coloured by velocity (m/s)" in text


def test_empty_result_still_renders(tmp_path):
    path = write_result(tmp_path / "empty.gpkg", n_ok=0)
    text = report.render_report(report.read_result(path))
    assert text.count("data:image/png") == 1 and BAD["name"] in Page(text).text


# ------------------------------------------------------------------- errors
def test_unknown_colour_field_lists_the_numeric_fields(gpkg, tmp_path):
    out = tmp_path / "r.html"
    with pytest.raises(InputError) as err:
        report.write_report(gpkg, out, colour_by="nonsense")
    msg = str(err.value)
    assert "nonsense" in msg
    for f in ("discharge", "velocity", "bankfull_depth", "min_freeboard"):
        assert f in err.value.fix
    for f in ("status", "flags", "reach_id", "confidence"):
        assert not re.search(rf"\b{f}\b", err.value.fix)
    assert not out.exists() and not list(tmp_path.iterdir())


def test_existing_output_is_kept_without_overwrite(gpkg, tmp_path):
    out = tmp_path / "r.html"
    out.write_text("keep me")
    with pytest.raises(InputError, match="already exists"):
        report.write_report(gpkg, out)
    assert out.read_text() == "keep me"
    report.write_report(gpkg, out, overwrite=True)
    assert out.read_text(encoding="utf-8").startswith("<!DOCTYPE html>")
    assert [p.name for p in tmp_path.iterdir()] == ["r.html"]      # no temporary left


def test_not_a_result_is_an_input_error(tmp_path):
    import geopandas as gpd
    import shapely

    other = tmp_path / "other.gpkg"
    gpd.GeoDataFrame({"a": [1]}, geometry=[shapely.Point(0, 0)], crs="EPSG:4326").to_file(
        other, layer="points", engine="pyogrio")
    with pytest.raises(InputError, match="not a reachgauge result") as err:
        report.write_report(other, tmp_path / "a.html")
    assert "transects" in str(err.value) and "run_info" in str(err.value)
    text = tmp_path / "text.gpkg"
    text.write_text("not a database")
    with pytest.raises(InputError, match="cannot be read"):
        report.write_report(text, tmp_path / "b.html")
    with pytest.raises(InputError, match="does not exist"):
        report.write_report(tmp_path / "missing.gpkg", tmp_path / "c.html")
    with pytest.raises(InputError, match="not a reachgauge result"):
        report.render_report({"transects": pd.DataFrame()})
    assert {p.name for p in tmp_path.iterdir()} == {"other.gpkg", "text.gpkg"}


def test_report_command(gpkg, tmp_path, capsys):
    out = tmp_path / "cli.html"
    assert cli.main(["report", str(gpkg), "--out", str(out), "--colour-by", "top_width"]) == 0
    assert "top_width (m)" in Page(out.read_text(encoding="utf-8")).text
    assert cli.main(["report", str(gpkg), "--out", str(out)]) == 2          # exists
    assert cli.main(["report", str(gpkg), "--out", str(tmp_path / "x.html"),
                     "--colour-by", "status"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 2 and all(e.startswith("error: ") for e in err)
    assert "Traceback" not in "".join(err)


# --------------------------------------------------------- palette, geometry
def cie_lightness(hex_colour: str) -> float:
    c = np.array([int(hex_colour[i:i + 2], 16) / 255 for i in (1, 3, 5)])
    lin = np.where(c <= 0.04045, c / 12.92, ((c + 0.055) / 1.055) ** 2.4)   # IEC 61966-2-1
    y = float(lin @ [0.2126, 0.7152, 0.0722])                               # BT.709 luminance
    f = math.cbrt(y) if y > 216 / 24389 else (24389 / 27 * y + 16) / 116
    return 116 * f - 16                                                      # CIE 1976 L*


def test_palette_lightness_falls_steadily():
    assert all(re.fullmatch(r"#[0-9a-f]{6}", c) for c in report_figures.PALETTE)
    light = np.array([cie_lightness(c) for c in report_figures.PALETTE])
    steps = -np.diff(light)
    # monotone lightness keeps the order readable in any colour-vision deficiency;
    # steps of >= 5 L* are well above a just-noticeable difference (~1 L*)
    assert (steps >= 5).all() and light[0] >= 80 and light[-1] <= 30
    cmap = report_figures.colour_map()
    from matplotlib.colors import to_hex
    assert to_hex(cmap(0.0)) == report_figures.PALETTE[0] and to_hex(cmap(1.0)) == report_figures.PALETTE[-1]


@given(st.floats(1e-3, 1e7))
def test_scale_bar_is_round_and_fits(span):
    length = report_maps.scale_length(span)
    k = math.floor(math.log10(length) + 1e-12)
    mantissa = length / 10 ** k
    assert min(abs(mantissa - m) for m in (1, 2, 5)) < 1e-9
    # 1-2-5 steps are at most 2.5 apart, so a bar <= span/4 is also >= span/10
    assert span / 10 * (1 - 1e-12) <= length <= span / 4 * (1 + 1e-12)


def test_line_parts_split_multilines_and_keep_their_source():
    import shapely

    geoms = [shapely.LineString([(0, 0), (1, 0)]), None,
             shapely.MultiLineString([[(0, 1), (1, 1), (2, 1)], [(5, 5), (6, 6)]]),
             shapely.LineString()]
    parts, src = report_maps.line_parts(geoms)
    assert [p.shape for p in parts] == [(2, 2), (3, 2), (2, 2)]
    assert list(src) == [0, 2, 2]
    np.testing.assert_array_equal(parts[2], [[5, 5], [6, 6]])


# ------------------------------------------------------------------ browser
def test_headless_chromium_renders_the_page(html_file, tmp_path):
    exe = shutil.which("chromium") or shutil.which("chromium-browser")
    if not exe:
        pytest.skip("Chromium is not installed (apt-get install chromium to run this check)")
    shot = tmp_path / "shot.png"
    cmd = [exe, "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
           "--disable-background-networking", "--disable-component-update", "--disable-sync",
           f"--user-data-dir={tmp_path / 'profile'}", "--enable-logging=stderr", "--v=0",
           f"--screenshot={shot}", "--window-size=1280,2000", html_file.resolve().as_uri()]
    done = subprocess.run(cmd, capture_output=True, text=True, timeout=120)
    assert done.returncode == 0, done.stderr[-2000:]
    assert shot.is_file() and shot.stat().st_size > 20_000
    assert png_size(shot.read_bytes()) == (1280, 2000)
    from matplotlib.image import imread

    img = imread(shot)[..., :3]
    assert len(np.unique((img.reshape(-1, 3) * 255).astype(np.uint8), axis=0)) > 50  # not blank
    console = [ln for ln in done.stderr.splitlines() if "CONSOLE" in ln]
    assert not console and "Content Security Policy" not in done.stderr


def test_rating_axes_fit_the_flows_asked_about():
    # a median curve Q = 10·d² for d in 0..3 m (Q up to 90); design flows 5 and 20, bankfull 12:
    # the axis runs to 1.3 × 20 = 26 and the depth to where the curve carries 26
    # (d = √2.6 = 1.612 by the closed form), plus 5 %
    from reachgauge.results.report_figures import rating_limits

    d = np.linspace(0, 3, 61)
    med = pd.DataFrame({"depth": d, "discharge": 10 * d ** 2})
    q, depth = rating_limits(med, [5.0, 20.0], 12.0)
    assert q == pytest.approx(26.0)
    assert depth == pytest.approx(1.05 * math.sqrt(2.6), rel=2e-3)   # linear interpolation, 5 cm steps
    assert rating_limits(med, [], float("nan")) == (None, None)
    # a flow beyond the curve: the whole curve is shown
    assert rating_limits(med, [200.0], 12.0)[1] == pytest.approx(1.05 * 3.0)
