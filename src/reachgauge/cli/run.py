"""`reachgauge run`: the batch over every reach."""

from __future__ import annotations

import argparse
import textwrap
import sys
from pathlib import Path

from reachgauge.notices import CAUTION_LINE
from reachgauge.cli.options import Progress, add_config_options, setting_values

EXAMPLE = """\
examples:
  reachgauge run --dem terrain.tif --streams streams.gpkg --out result.gpkg

  # a config file, two worker processes, a report, US customary units
  reachgauge run --config run.toml --jobs 2 --units us --out result.gpkg --report report.html

  # design flows and measured discharges for calibration
  reachgauge run --dem terrain.tif --streams streams.gpkg --id-field reach_id \\
      --design-flows flows.csv --observations gaugings.csv --calibrate --out result.gpkg

Every option can also be set in the TOML file given by --config (same names with
underscores, e.g. half_width = 40.0, optionally inside tables such as [transects]);
command-line values win. Lengths on the command line are in metres, or in feet with
--units us. Files state their own units, whatever --units says: units = "si" or "us"
in the TOML file, a first line '# units: si' or '# units: us' in a CSV file.

A run keeps every finished reach in RESULT.gpkg.checkpoint beside --out until the
result is in place; after an interruption, the same command with --resume continues.

Exit codes: 0 done; 2 bad input or an output that cannot be written (one error line,
nothing written); 1 an internal error; 130/143/129 stopped by SIGINT/SIGTERM/SIGHUP.
"""


def add(sub):
    p = sub.add_parser(
        "run", help="the whole job on a terrain raster and stream centrelines",
        description=textwrap.fill(
            "Cut transects along every reach, find the thalweg and slope, pick the "
            "bankfull stage, compute Manning discharge, rating curves and design-flow "
            "checks, and write one GeoPackage. " + CAUTION_LINE, 78),
        epilog=EXAMPLE, formatter_class=argparse.RawDescriptionHelpFormatter)
    out = p.add_argument_group("output")
    out.add_argument("--out", required=True, type=Path, metavar="RESULT.gpkg",
                     help="GeoPackage to write")
    out.add_argument("--overwrite", action="store_true", help="replace existing output files")
    out.add_argument("--resume", action="store_true",
                     help="continue an interrupted run into the same --out from its checkpoint "
                          "(RESULT.gpkg.checkpoint): finished reaches are kept, not recomputed; "
                          "refused if the settings or inputs changed")
    out.add_argument("--csv", type=Path, metavar="DIR", help="also write every table as CSV in DIR")
    out.add_argument("--report", type=Path, metavar="REPORT.html", help="also write the HTML report")
    out.add_argument("--colour-by", default="discharge", metavar="FIELD",
                     help="transect field that colours the report's map (default: discharge)")
    out.add_argument("--config", type=Path, metavar="FILE.toml", help="read settings from a TOML file")
    talk = out.add_mutually_exclusive_group()
    talk.add_argument("--quiet", action="store_true", help="print only errors")
    talk.add_argument("--verbose", action="store_true", help="print details of every reach")
    add_config_options(p)
    p.set_defaults(func=run)


def run(args) -> int:
    from reachgauge import api

    progress = Progress(args.quiet, args.verbose)
    summary = api.run(args.out, config=args.config, overwrite=args.overwrite, csv=args.csv,
                      report=args.report, colour_by=args.colour_by, progress=progress,
                      resume=args.resume,
                      **setting_values(args))
    if not args.quiet:
        print("\n".join(summary.lines()))
        print(CAUTION_LINE)
    if summary.failed:
        print(f"error: internal error on reach(es) {', '.join(summary.failed)}; the other reaches "
              "were written. Please report it with the --verbose output", file=sys.stderr)
        return 1
    return 0
