"""Command line: a thin layer over the Python API.

Exit codes: 0 success; 2 bad input or a result that cannot be written (one
``error: ...`` line on stderr); 1 a bug; 128 + the signal number when stopped by
SIGINT, SIGTERM or SIGHUP (one line saying what was and was not written).
Long options must be written in full: an abbreviation that works today could
silently change meaning when a new option is added.
"""

from __future__ import annotations

import argparse
import logging
import signal
import sys
import warnings

from reachgauge import __version__
from reachgauge.errors import InputError, install_warning_display
from reachgauge.notices import CAUTION_LINE


class _Parser(argparse.ArgumentParser):
    """argparse that takes long options only in full and reports bad usage as a
    clean ``error:`` line, exit 2."""

    def __init__(self, *args, **kwargs):
        kwargs["allow_abbrev"] = False
        super().__init__(*args, **kwargs)

    def error(self, message):  # noqa: D401 - argparse hook
        raise InputError(message, f"see '{self.prog} --help'")


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


def quiet_logs() -> None:
    """Log records of the steps (a reach that failed, with its traceback) stay
    out of the terminal: the run's summary and --verbose report them."""
    logging.getLogger("reachgauge").addHandler(logging.NullHandler())


def main(argv=None) -> int:
    """Run one command; never lets a traceback of bad input or a signal reach
    the user."""
    from reachgauge import lifecycle

    previous = {s: signal.getsignal(s) for s in lifecycle.SIGNALS}
    lifecycle.STATE.written, lifecycle.STATE.kept = [], []
    quiet_logs()
    try:
        lifecycle.install_signal_handlers()
        parser = build_parser()
        args = parser.parse_args(argv)
        if not getattr(args, "func", None):
            parser.print_help()
            return 2
        with warnings.catch_warnings():
            install_warning_display()
            return args.func(args)
    except InputError as exc:
        lifecycle.STATE.stopping = True   # a signal now only waits: no traceback
        print(f"error: {exc}", file=sys.stderr)
        return 2
    except KeyboardInterrupt as exc:
        lifecycle.STATE.stopping = True
        print(f"error: {lifecycle.interruption_message(exc)}", file=sys.stderr)
        return getattr(exc, "exit_code", 130)
    finally:
        lifecycle.STATE.stopping = True
        lifecycle.release()
        for s, h in previous.items():
            signal.signal(s, h)


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
