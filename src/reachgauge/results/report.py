"""The HTML report of a result GeoPackage (an output edge of the tool).

One self-contained file that works offline: CSS inline, every figure a base64
PNG in a ``data:`` URI, no script, no font, tile or link from the network (a
Content-Security-Policy meta tag tells the browser to load nothing at all).
Every string that came from the user's data (reach names and ids, messages,
flow names, file paths, parameter values) goes through :func:`html.escape`.

Contents: the cautions (:data:`reachgauge.notices.CAUTIONS`), the run summary,
the flag and status codes that occur, a map of reaches and transects coloured by
one numeric transect field, the regional curves across the reaches
(:mod:`reachgauge.results.report_regional`), and per reach its summary figures, longitudinal
profile, up to four cross-sections, rating curve and a table of its transects.

Figures are drawn with matplotlib's Agg canvas on free-standing
:class:`~matplotlib.figure.Figure` objects (no pyplot state, nothing to close).
Values are shown in the run's own units, read from the ``run_info`` layer.
"""

from __future__ import annotations

import json
import math
from collections import Counter
from pathlib import Path

import numpy as np
import pandas as pd

from reachgauge import flags as flagcodes
from reachgauge.results import schema
from reachgauge.errors import InputError
from reachgauge.notices import CAUTION_LINE, CAUTIONS
from reachgauge.results.report_regional import regional_section
from reachgauge.results.report_page import _codes, _e, _figure_html, _page, _table  # noqa: F401
from reachgauge.results.report_figures import (_drainage, _f, _mc_band, _mc_share, _num,
                                               _profile_png, _rating_png, _sections_png, _truthy)
from reachgauge.results.report_maps import _map


REQUIRED_LAYERS = ("transects", "reaches", "thalweg_points", "rating_curves", "design_checks",
                   "profile", "sample_sections", "run_info")
OPTIONAL_LAYERS = ("stage_figures", "calibration", "regional_fits", "curve_ratios")
TEXT_KINDS = ("text", "flag")


# ================================================================ entry points
def write_report(result_gpkg, out_html, *, colour_by: str = "discharge",
                 overwrite: bool = False) -> Path:
    """Read a result GeoPackage and write its HTML report to ``out_html``.

    The file is written beside the target and renamed into place when done
    (:class:`reachgauge.results.geopackage.atomic_path`); an existing file is kept unless
    ``overwrite``. Bad input (missing file, not a reachgauge result, unknown
    ``colour_by``) is an :class:`~reachgauge.errors.InputError`.
    """
    from reachgauge.results.geopackage import atomic_path, check_target

    out = check_target(out_html, overwrite)   # fail before the work, not after
    src = Path(result_gpkg)
    if src.exists() and out.exists() and out.resolve() == src.resolve():
        raise InputError("the report would replace the result file itself",
                         "give the report a path ending in .html")
    text = render_report(read_result(src), colour_by)
    with atomic_path(out, overwrite) as tmp:
        tmp.write_text(text, encoding="utf-8")
    return out


def read_result(path) -> dict:
    """Every layer of a result GeoPackage as a (Geo)DataFrame, by layer name."""
    import pyogrio

    p = Path(path)
    fix = "give the GeoPackage written by 'reachgauge run'"
    if not p.is_file():
        raise InputError(f"result file {str(p)!r} does not exist", fix)
    try:
        names = {str(n) for n, _g in pyogrio.list_layers(p)}
        missing = [n for n in REQUIRED_LAYERS if n not in names]
        if missing:
            raise InputError(f"{str(p)!r} is not a reachgauge result: layer(s) "
                             f"{', '.join(missing)} missing", fix)
        return {n: pyogrio.read_dataframe(p, layer=n)
                for n in REQUIRED_LAYERS + OPTIONAL_LAYERS if n in names}
    except (pyogrio.errors.DataSourceError, pyogrio.errors.DataLayerError, OSError) as exc:
        raise InputError(f"{str(p)!r} cannot be read as a GeoPackage ({exc})", fix) from None


def numeric_fields(transects: pd.DataFrame) -> list[str]:
    """Transect fields that can colour the map: numeric, not boolean."""
    return [c for c in transects.columns
            if c != "geometry" and pd.api.types.is_numeric_dtype(transects[c])
            and not pd.api.types.is_bool_dtype(transects[c])
            and schema.TRANSECT_FIELDS.get(c, ("none",))[0] not in TEXT_KINDS]


def render_report(layers: dict, colour_by: str = "discharge") -> str:
    """The report as one HTML string. Pure: layers in (as :func:`read_result`
    gives them), text out."""
    lay = _prepare(layers)
    fields = numeric_fields(lay["transects"])
    if colour_by not in fields:
        raise InputError(f"cannot colour the map by {colour_by!r}: not a numeric transect field",
                         f"choose one of: {', '.join(fields)}")
    info = _run_info(lay["run_info"])
    reaches = lay["reaches"]
    by = {name: dict(tuple(lay[name].groupby("reach_id", sort=False)))
          for name in ("transects", "profile", "rating_curves", "design_checks", "sample_sections")}
    body = [_header(info), _cautions(), _summary(lay, info), _code_table(lay),
            _map(lay, colour_by, info), regional_section(lay, info), _contents(reaches, info)]
    for i, row in enumerate(reaches.itertuples(index=False)):
        own = {k: v.get(str(row.reach_id), lay[k].iloc[:0]) for k, v in by.items()}
        body.append(_reach_section(i, row, own, info))
    body.append(f"<footer><p>{_e(CAUTION_LINE)}</p></footer>")
    return _page("".join(body))


# ============================================================ input handling
def _prepare(layers: dict) -> dict:
    """Check the layers are a result's and normalise them: text as str without
    nulls, reach_id as str, optional layers present."""
    missing = [n for n in REQUIRED_LAYERS if n not in layers]
    if missing:
        raise InputError(f"not a reachgauge result: layer(s) {', '.join(missing)} missing",
                         "give the GeoPackage written by 'reachgauge run'")
    out = {}
    for name in REQUIRED_LAYERS + OPTIONAL_LAYERS:
        df = layers.get(name)
        df = pd.DataFrame() if df is None else df.copy()
        fields = schema.LAYERS.get(name, {})  # thalweg_points: only its geometry is drawn
        for col, (kind, _m) in fields.items():
            if col not in df.columns:
                df[col] = pd.Series("" if kind == "text" else np.nan, index=df.index,
                                    dtype=object if kind == "text" else float)
            elif kind == "text":
                df[col] = df[col].map(lambda v: "" if v is None or v is pd.NA or
                                      (isinstance(v, float) and math.isnan(v)) else str(v))
        out[name] = df
    if not {"key", "value"} <= set(out["run_info"].columns):
        raise InputError("not a reachgauge result: the run_info layer has no key/value columns",
                         "give the GeoPackage written by 'reachgauge run'")
    return out


class _Info:
    """What the report needs from the ``run_info`` key/value table."""

    def __init__(self, rows: list[tuple[str, str]]):
        kv = {}
        self.warnings, self.params, self.versions, self.inputs = [], [], [], []
        for k, v in rows:
            if k == "warning":
                self.warnings.append(v)
            elif k.startswith("param."):
                self.params.append((k[6:], v))
            elif k.startswith("version."):
                self.versions.append((k[8:], v))
            elif k.startswith("input."):
                fp = _json(v, None)
                self.inputs.append((k[6:], fp if isinstance(fp, dict) else {"path": v}))
            else:
                kv[k] = v
        self.kv = kv
        self.units = kv.get("units", "si") if kv.get("units") in schema.UNIT_LABELS else "si"
        labels = _json(kv.get("unit_labels", ""), None)
        self.labels = labels if isinstance(labels, dict) else schema.UNIT_LABELS[self.units]
        self.crs = kv.get("crs", "")

    def unit(self, layer: str, field: str) -> str:
        """Unit label of a field of a layer ('' when dimensionless or unknown)."""
        kind = schema.LAYERS.get(layer, {}).get(field, ("none",))[0]
        return str(self.labels.get(kind, ""))

    def head(self, layer: str, field: str, title: str) -> str:
        u = self.unit(layer, field)
        return f"{title} ({u})" if u else title


def _run_info(df: pd.DataFrame) -> _Info:
    return _Info([(str(k), "" if v is None else str(v)) for k, v in zip(df["key"], df["value"])])


def _json(text, default):
    try:
        return json.loads(text)
    except (TypeError, ValueError):
        return default


# ============================================================ HTML pieces
def _header(info: _Info) -> str:
    created = _e(info.kv.get("created_utc", "unknown date"))
    version = _e(info.kv.get("reachgauge_version", "?"))
    system = "SI units" if info.units == "si" else "US customary units"
    return (f'<header><h1>Reach report</h1><p class="sub">reachgauge {version} · '
            f"run of {created} · values in {system}</p></header>")


def _cautions() -> str:
    items = "".join(f"<li>{_e(c)}</li>" for c in CAUTIONS)
    return f'<section class="caution"><h2>Read this first</h2><ul>{items}</ul></section>'


def _summary(lay: dict, info: _Info) -> str:
    reaches, tr = lay["reaches"], lay["transects"]
    status = Counter(reaches["status"])
    ok_reaches = status.pop("ok", 0)
    t_ok = int((tr["status"] == "ok").sum())
    worst = Counter(flagcodes.worst(f) or "none" for f in tr["flags"])
    counts = Counter(c for f in tr["flags"] for c in f.split(";") if c)
    top = ", ".join(f"{_e(k)} ({v})" for k, v in counts.most_common(6)) or "none"
    others = "".join(f", {v} {_e(k)}" for k, v in status.items())
    out_rows = [f"<li><b>{_e(r.reach_id)}</b>{' — ' + _e(r.name) if r.name else ''}: "
                f"{_e(r.flows_out.replace(';', ', '))}</li>"
                for r in reaches.itertuples(index=False) if r.flows_out]
    oob = f"<ul>{''.join(out_rows)}</ul>" if out_rows else "none"
    unit_text = ", ".join(f"{_e(k)} {_e(v)}" for k, v in info.labels.items())
    inputs = "".join(
        f"<tr><td>{_e(k)}</td><td class='path'>{_e(fp.get('path', ''))}</td>"
        f"<td>{_e(_size(fp))}</td><td>{_e(fp.get('modified', ''))}</td>"
        f"<td class='path'>{_e(str(fp.get('sha256_first_mib', ''))[:16])}</td></tr>"
        for k, fp in info.inputs)
    rows = [("Reaches", f"{len(reaches)} ({ok_reaches} processed{others})"),
            ("Transects", f"{len(tr)}: {t_ok} with figures; by their gravest flag (design-flow "
                          f"results aside) {worst['do not use']} do not use, {worst['check']} to "
                          f"check, {worst['information']} information only, {worst['none']} "
                          "clean"),
            ("Most frequent flags", top),
            ("Design flows out of bank", oob),
            ("Units", f"{'SI' if info.units == 'si' else 'US customary'} — {unit_text}"),
            ("CRS", f"<span class='path'>{_e(info.crs) or 'unknown'}</span>"),
            ("Created (UTC)", _e(info.kv.get("created_utc", "")))]
    if info.warnings:
        rows.append(("Warnings", "<ul>" + "".join(f"<li>{_e(w)}</li>" for w in info.warnings)
                     + "</ul>"))
    dl = "".join(f"<dt>{k}</dt><dd>{v}</dd>" for k, v in rows)
    inp = (_table(["input", "path", "size", "modified", "SHA-256 of first MiB"],
                  [inputs], "small") if inputs else "<p>No input fingerprints recorded.</p>")
    params = "".join(f"<tr><td>{_e(k)}</td><td class='path'>{_e(v)}</td></tr>"
                     for k, v in info.params)
    versions = ", ".join(f"{_e(k)} {_e(v)}" for k, v in info.versions)
    return (f'<section class="panel"><h2>Run summary</h2><dl class="facts">{dl}</dl>'
            f"<h3>Inputs</h3>{inp}<details><summary>Parameters of the run</summary>"
            f"{_table(['parameter', 'value'], [params], 'small')}"
            f"<p class='note'>Software: {versions or 'not recorded'}</p></details></section>")


def _size(fp: dict) -> str:
    """A file size from a fingerprint, in B, KiB, MiB or GiB."""
    b = _f(fp.get("bytes"))
    if not np.isfinite(b):
        return ""
    for unit in ("B", "KiB", "MiB", "GiB"):
        if b < 1024 or unit == "GiB":
            return f"{b:.0f} {unit}" if unit == "B" else f"{b:.1f} {unit}"
        b /= 1024
    return ""


def _code_table(lay: dict) -> str:
    """The status and flag codes that occur in this result, with their meanings."""
    tr, reaches = lay["transects"], lay["reaches"]
    seen = Counter(c for f in list(tr["flags"]) + list(reaches["slope_flags"])
                   + list(reaches["regional_flags"])
                   for c in f.split(";") if c)
    rows = [f"<tr><td>flag</td><td><span class='code'>{_e(c)}</span></td><td>{n}</td>"
            f"<td>{_e(flagcodes.FLAGS.get(c, 'not a known code'))}</td></tr>"
            for c, n in sorted(seen.items())]
    for kind, col, vocab in (("reach status", reaches["status"], flagcodes.REACH_STATUS),
                             ("transect status", tr["status"], flagcodes.TRANSECT_STATUS)):
        for c, n in sorted(Counter(x for x in col if x and x != "ok").items()):
            rows.append(f"<tr><td>{kind}</td><td><span class='code'>{_e(c)}</span></td>"
                        f"<td>{n}</td><td>{_e(vocab.get(c, 'not a known code'))}</td></tr>")
    if not rows:
        return ('<section class="panel"><h2>Codes in this result</h2>'
                "<p>No flags and no failed items.</p></section>")
    return ('<section class="panel"><h2>Codes in this result</h2>'
            + _table(["kind", "code", "count", "meaning"], rows, "small") + "</section>")


def _contents(reaches: pd.DataFrame, info: _Info) -> str:
    items = []
    for i, r in enumerate(reaches.itertuples(index=False)):
        tag = "" if r.status == "ok" else f' <span class="code bad">{_e(r.status)}</span>'
        q = (f" — Q<sub>bf</sub> {_num(r.discharge)} {_e(info.unit('reaches', 'discharge'))}"
             if r.status == "ok" else "")
        name = f" {_e(r.name)}" if r.name else ""
        items.append(f'<li><a href="#reach-{i}"><b>{_e(r.reach_id)}</b>{name}</a>{tag}{q}</li>')
    return f'<nav class="panel"><h2>Reaches</h2><ol class="toc">{"".join(items)}</ol></nav>'


def _reach_section(i: int, r, parts: dict, info: _Info) -> str:
    name = f" <span class='name'>{_e(r.name)}</span>" if r.name else ""
    head = f'<section class="reach" id="reach-{i}"><h2>{_e(r.reach_id)}{name}</h2>'
    if r.status != "ok":
        meaning = flagcodes.REACH_STATUS.get(r.status, "not a known status")
        msg = f"<p>Details: {_e(r.message)}</p>" if r.message else ""
        return (f'{head}<div class="void-box"><p>No figures for this reach: status '
                f"<span class='code bad'>{_e(r.status)}</span> — {_e(meaning)}.</p>{msg}</div>"
                '<p class="top"><a href="#top">back to top</a></p></section>')
    tr = parts["transects"].sort_values("station")
    figs, rating_fig = [], ""
    rating = parts["rating_curves"]
    if len(rating):
        rating_fig = _figure_html(_rating_png(rating, parts["design_checks"], r, info),
                                  f"rating curve of reach {r.reach_id}",
                                  "Rating curve: every transect faint, the reach median bold, "
                                  "design flows as vertical lines.")
    prof = parts["profile"]
    if len(prof):
        figs.append(_figure_html(_profile_png(prof, tr, info, str(r.reach_id)),
                                 f"longitudinal profile of reach {r.reach_id}",
                                 "Longitudinal profile: thalweg as sampled and after carving, "
                                 "with each transect's bankfull stage."))
    samples = parts["sample_sections"]
    if len(samples):
        figs.append(_figure_html(_sections_png(samples, tr, parts["design_checks"], info),
                                 f"cross-sections of reach {r.reach_id}",
                                 "Cross-sections looking downstream: ground, water at bankfull "
                                 "stage between the banks (▼), design-flow stages as lines."))
    if not figs and not rating_fig:
        figs.append("<p>No transect of this reach has figures.</p>")
    return (f'{head}<div class="pair"><div>{_reach_facts(r, info)}'
            f"{_design_table(parts['design_checks'], info)}</div><div>{rating_fig}</div></div>"
            f"{''.join(figs)}<h3>Transects</h3>{_transect_table(tr, info)}"
            '<p class="top"><a href="#top">back to top</a></p></section>')


def _reach_facts(r, info: _Info) -> str:
    u = lambda f: _e(info.unit("reaches", f))  # noqa: E731
    n_back = (f"; back-calculated {_num(r.n_calibrated, 3)}"
              if np.isfinite(_f(r.n_calibrated)) else "")
    ratio = (f" (largest design / bankfull ratio {_num(r.worst_ratio)})"
             if np.isfinite(_f(r.worst_ratio)) else "")
    rows = [
        ("Length", f"{_num(r.reach_length, 0)} {u('length')}; {_num(r.transects, 0)} transects, "
                   f"{_num(r.transects_ok, 0)} with figures, "
                   f"{_num(r.transects_flagged, 0)} flagged"),
        ("Slope", f"{_num(r.slope, sig=3)} {_codes(r.slope_flags, flagcodes.FLAGS)}"),
        ("Drainage area", _drainage(r, u("drainage_area"))),
        ("Bankfull depth (median)", f"{_num(r.bankfull_depth, 2)} {u('bankfull_depth')} "
                                    f"(IQR {_num(r.depth_spread, 2)})"),
        ("Top width (median)", f"{_num(r.top_width)} {u('top_width')}"),
        ("Bankfull discharge (median)",
         f"{_num(r.discharge)} {u('discharge')} "
         f"(p25–p75 {_num(r.discharge_p25)}–{_num(r.discharge_p75)}{_mc_band(r)})"),
        ("Velocity (median)", f"{_num(r.velocity)} {u('velocity')}"),
        ("Manning's n",
         f"{_num(r.n_channel, 3)} ({_e(r.n_source) or 'source not recorded'}){n_back}"),
        ("Low-confidence / outlier transects",
         f"{_num(r.confidence_low, 0)} / {_num(r.outliers, 0)}"),
        ("Design flows out of bank", (_e(r.flows_out.replace(";", ", ")) or "none") + ratio),
        ("Downstream direction", _e(r.orientation) or "–"),
    ]
    return '<dl class="facts">' + "".join(f"<dt>{k}</dt><dd>{v}</dd>" for k, v in rows) + "</dl>"


def _design_table(design: pd.DataFrame, info: _Info) -> str:
    reach_rows = design[design["station"] == -1]
    if not len(reach_rows):
        return ""
    rows = [f"<tr class='{'flagged' if _truthy(d.out_of_bank) else ''}'><td>{_e(d.flow)}</td>"
            f"<td>{_num(d.discharge)}</td><td>{_num(d.q_ratio, 2)}</td>"
            f"<td>{_num(100 * _f(d.share_out), 0)} %</td>"
            f"<td>{'yes' if _truthy(d.out_of_bank) else 'no'}{_mc_share(d)}</td></tr>"
            for d in reach_rows.itertuples(index=False)]
    head = ["design flow", _e(info.head("design_checks", "discharge", "discharge")),
            "design / bankfull", "transects out of bank", "leaves the channel"]
    return "<h3>Design flows</h3>" + _table(head, rows, "small")


def _transect_table(tr: pd.DataFrame, info: _Info) -> str:
    h = lambda f, t: _e(info.head("transects", f, t))  # noqa: E731
    head = ["", "station", h("chainage", "chainage"), "status", "flags", "confidence",
            h("bankfull_depth", "bankfull depth"), h("top_width", "top width"),
            h("discharge", "discharge"), h("min_freeboard", "min freeboard")]
    rows = []
    for t in tr.itertuples(index=False):
        # the mark says what to do: ✕ no figure to use, ! look before using, none: use
        grave = flagcodes.worst(t.flags)
        bad = t.status != "ok" or grave == "do not use"
        cls = "void" if bad else ("flagged" if grave == "check" else "")
        mark = "✕" if bad else ("!" if grave == "check" else "")
        status = _codes(t.status, flagcodes.TRANSECT_STATUS) if t.status != "ok" else "ok"
        rows.append(f"<tr class='{cls}'><td class='mark'>{mark}</td><td>{_num(t.station, 0)}</td>"
                    f"<td>{_num(t.chainage, 1)}</td><td>{status}</td>"
                    f"<td>{_codes(t.flags, flagcodes.FLAGS)}</td><td>{_e(t.confidence)}</td>"
                    f"<td>{_num(t.bankfull_depth, 2)}</td><td>{_num(t.top_width)}</td>"
                    f"<td>{_num(t.discharge)}</td><td>{_num(t.min_freeboard, 2)}</td></tr>")
    return _table(head, rows, "transects")


