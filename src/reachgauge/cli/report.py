"""`reachgauge report`: an offline HTML report of a result GeoPackage."""

from __future__ import annotations

import argparse
import textwrap
from pathlib import Path

from reachgauge.notices import CAUTION_LINE


def add(sub):
    p = sub.add_parser(
        "report", help="write the HTML report of a result GeoPackage",
        description=textwrap.fill(
            "Write one self-contained HTML file (works offline) with the cautions, the "
            "run summary, a map, and per reach the profile, sections, rating curve and a "
            "table of transects. " + CAUTION_LINE, 78),
        formatter_class=argparse.RawDescriptionHelpFormatter,
        epilog="example:\n  reachgauge report result.gpkg --out report.html --colour-by velocity\n")
    p.add_argument("result", type=Path, help="GeoPackage written by 'reachgauge run'")
    p.add_argument("--out", type=Path, metavar="REPORT.html",
                   help="HTML file to write (default: beside the result, .html)")
    p.add_argument("--colour-by", default="discharge", metavar="FIELD",
                   help="transect field that colours the map (default: discharge)")
    p.add_argument("--overwrite", action="store_true", help="replace an existing report")
    p.set_defaults(func=run)


def run(args) -> int:
    from reachgauge.errors import InputError
    from reachgauge.results.report import write_report

    out = args.out or args.result.with_suffix(".html")
    if out.suffix.lower() not in (".html", ".htm"):
        raise InputError(f"--out {str(out)!r} does not end in .html",
                         "give a path ending in .html: the report is one HTML page")
    write_report(args.result, out, colour_by=args.colour_by, overwrite=args.overwrite)
    print(f"report: {out}")
    return 0
