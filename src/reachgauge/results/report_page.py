"""HTML building blocks of the report: escaping, code chips, tables, figures and
the page shell with its inline style (no script, nothing loaded from the network:
a Content-Security-Policy meta tag says so to the browser)."""

from __future__ import annotations

import html


def _e(value) -> str:
    """Escape any user-supplied value for HTML text or attribute."""
    return html.escape("" if value is None else str(value), quote=True)


def _codes(text: str, vocabulary: dict) -> str:
    parts = [c for c in str(text).split(";") if c]
    return " ".join(f'<span class="code" title="{_e(vocabulary.get(c, ""))}">{_e(c)}</span>'
                    for c in parts)


def _table(head: list[str], rows: list[str], cls: str = "") -> str:
    th = "".join(f"<th>{h}</th>" for h in head)
    body = "".join(rows)
    return f'<table class="{cls}"><thead><tr>{th}</tr></thead><tbody>{body}</tbody></table>'


def _figure_html(uri: str, alt: str, caption: str = "") -> str:
    cap = f"<figcaption>{caption}</figcaption>" if caption else ""
    return f'<figure><img src="{uri}" alt="{_e(alt)}">{cap}</figure>'


def _page(body: str) -> str:
    csp = "default-src 'none'; img-src data:; style-src 'unsafe-inline'"
    return ('<!DOCTYPE html>\n<html lang="en"><head><meta charset="utf-8">'
            f'<meta http-equiv="Content-Security-Policy" content="{csp}">'
            '<meta name="viewport" content="width=device-width, initial-scale=1">'
            f"<title>reachgauge reach report</title><style>{_CSS}</style></head>"
            f'<body><div id="top" class="page">{body}</div></body></html>\n')


_CSS = """
body{margin:0;background:#f6f3ee;color:#23201c;font:15px/1.45 system-ui,-apple-system,"Segoe UI",
Roboto,"DejaVu Sans",sans-serif}
.page{max-width:1180px;margin:0 auto;padding:18px 22px 40px}
header{border-bottom:3px solid #604069;margin-bottom:14px}
h1{font-size:28px;margin:6px 0 2px;color:#352c5a;letter-spacing:.02em}
h2{font-size:20px;margin:0 0 10px;color:#352c5a}
h3{font-size:16px;margin:16px 0 6px;color:#604069}
.sub{margin:0 0 10px;color:#6d6358}
.panel,.reach{background:#fff;border:1px solid #e2dacb;border-radius:6px;padding:14px 18px;
margin:14px 0}
.reach{border-top:5px solid #8b5569}
.reach h2 .name{font-weight:400;color:#6d6358}
.caution{background:#fff4df;border:1px solid #e3b176;border-left:8px solid #b4471c;
border-radius:6px;padding:10px 18px;margin:14px 0}
.caution h2{color:#7a2f10;margin-bottom:4px}.caution li{margin:3px 0}
dl.facts{display:grid;grid-template-columns:max-content 1fr;gap:3px 16px;margin:0}
dl.facts dt{font-weight:600;color:#4a3b2e}dl.facts dd{margin:0}
dl.facts ul{margin:0;padding-left:18px}
table{border-collapse:collapse;margin:6px 0 10px;font-size:13.5px}
th{background:#efe7da;text-align:left;padding:4px 8px;border-bottom:2px solid #d6c9b3}
td{padding:3px 8px;border-bottom:1px solid #eee6d9;vertical-align:top}
table.transects td:nth-child(n+7),table.transects td:nth-child(2),table.transects td:nth-child(3)
{text-align:right;font-variant-numeric:tabular-nums}
tr.flagged td{background:#fbecd9}tr.flagged td.mark{color:#b4471c;font-weight:700;
border-left:4px solid #d08e63}
tr.void td{background:#efece7;color:#7a7166}tr.void td.mark{color:#604069;font-weight:700;
border-left:4px solid #8b5569}
.code{font-family:ui-monospace,"DejaVu Sans Mono",monospace;font-size:12.5px;background:#f3eee6;
border:1px solid #e2dacb;border-radius:3px;padding:0 4px;white-space:nowrap}
.code.bad{background:#f1e4ee;border-color:#b58aa8;color:#4b2347}
.path{font-family:ui-monospace,"DejaVu Sans Mono",monospace;font-size:12.5px;word-break:break-all}
.pair{display:grid;grid-template-columns:minmax(0,1fr) minmax(0,1fr);gap:18px;align-items:start}
@media (max-width:900px){.pair{grid-template-columns:1fr}}
figure{margin:12px 0}figure img{max-width:100%;height:auto;border:1px solid #eee6d9}
figcaption{font-size:13px;color:#6d6358}
ol.toc{columns:2;margin:0;padding-left:22px}ol.toc li{margin:2px 0;break-inside:avoid}
a{color:#604069}.top{font-size:12.5px;text-align:right;margin:4px 0 0}
.void-box{background:#f6f0f4;border-left:5px solid #8b5569;padding:6px 12px}
details{margin-top:8px}summary{cursor:pointer;color:#604069}.note{font-size:12.5px;color:#6d6358}
footer{font-size:12.5px;color:#6d6358;border-top:1px solid #d6c9b3;margin-top:20px}
"""
