"""The command line: one module per command, each a thin layer over the Python API.

Exit codes: 0 success; 2 bad input (one ``error: ...`` line on stderr); 1 a bug.
"""

from reachgauge.cli.entry import build_parser, main

__all__ = ["build_parser", "main"]
