"""Command line: a thin layer over the Python API.

Exit codes: 0 success; 2 bad input (one ``error: ...`` line on stderr); 1 a bug.
"""

from __future__ import annotations

import argparse
import sys
import warnings

from reachgauge import __version__
from reachgauge.errors import InputError, ReachgaugeWarning
from reachgauge.notices import CAUTION_LINE


class _Parser(argparse.ArgumentParser):
    """argparse that reports bad usage as a clean ``error:`` line, exit 2."""

    def error(self, message):  # noqa: D401 - argparse hook
        raise InputError(message, f"see '{self.prog} --help'")


# ---------------------------------------------------------------- main
def _show_warning(message, category, filename, lineno, file=None, line=None):
    """Our warnings as one ``warning: ...`` line; others as Python prints them."""
    if issubclass(category, ReachgaugeWarning):
        print(f"warning: {message}", file=sys.stderr)
    else:
        sys.stderr.write(warnings.formatwarning(message, category, filename, lineno, line))


def build_parser() -> argparse.ArgumentParser:
    parser = _Parser(
        prog="reachgauge",
        description="Screening estimates of channel geometry, slope, bankfull stage and Manning "
                    "discharge for stream reaches cut from a terrain raster. " + CAUTION_LINE)
    parser.add_argument("--version", action="version", version=f"reachgauge {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    from reachgauge.cli import demo, report, run, section

    for cmd in (run, demo, report, section):
        cmd.add(sub)
    return parser


def main(argv=None) -> int:
    parser = build_parser()
    try:
        args = parser.parse_args(argv)
        if not getattr(args, "func", None):
            parser.print_help()
            return 2
        with warnings.catch_warnings():
            warnings.simplefilter("default", ReachgaugeWarning)
            warnings.showwarning = _show_warning
            return args.func(args)
    except InputError as exc:
        print(f"error: {exc}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("error: interrupted; no partial output was kept", file=sys.stderr)
        return 130


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
