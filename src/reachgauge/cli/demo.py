"""`reachgauge demo`: the whole job on the bundled fictional basin."""

from __future__ import annotations

import argparse
import textwrap
from pathlib import Path

from reachgauge.errors import InputError
from reachgauge.notices import CAUTION_LINE
from reachgauge.cli.options import Progress

DEMO_DIR = Path(__file__).resolve().parents[3] / "sample_data" / "basin"


def add(sub):
    p = sub.add_parser(
        "demo", help="run the whole job on the bundled sample basin",
        description=textwrap.fill(
            "Run reachgauge on the bundled fictional basin (sample_data/basin) and write "
            "demo_result.gpkg and demo_report.html into --out, replacing earlier demo "
            "outputs there. " + CAUTION_LINE, 78),
        formatter_class=argparse.RawDescriptionHelpFormatter,
        epilog="example:\n  reachgauge demo --out demo_output\n")
    p.add_argument("--out", type=Path, default=Path("demo_output"), metavar="DIR",
                   help="folder for the results (default: demo_output)")
    p.add_argument("--jobs", type=int, default=1, help="worker processes (default: 1)")
    p.add_argument("--quiet", action="store_true", help="print only errors")
    p.set_defaults(func=run)


def run(args) -> int:
    from reachgauge import api

    cfg_path = DEMO_DIR / "config.toml"
    if not cfg_path.is_file():
        raise InputError(f"the demo data is missing ({cfg_path})",
                         "run the demo from a source checkout of reachgauge")
    if not args.out.is_dir():
        if args.out.exists():
            raise InputError(f"--out {str(args.out)!r} is a file", "give a folder for the demo")
        try:
            args.out.mkdir(parents=True)
        except OSError as exc:
            from reachgauge.results.geopackage import write_failed

            raise write_failed(args.out, exc) from None
    gpkg = args.out / "demo_result.gpkg"
    html = args.out / "demo_report.html"
    from reachgauge.batch.checkpoint import discard

    discard(gpkg)          # the demo always starts over: an interrupted one is not resumed
    summary = api.run(gpkg, config=cfg_path, jobs=args.jobs, overwrite=True, report=html,
                      progress=Progress(quiet=args.quiet))
    if not args.quiet:
        print("reachgauge demo: a fictional basin with a main stem and two tributaries")
        print("\n".join(summary.lines()))
        print(CAUTION_LINE)
    return 1 if summary.failed else 0
