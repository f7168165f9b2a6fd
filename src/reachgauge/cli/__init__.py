"""The command line: one module per command, each a thin layer over the Python API.

Exit codes: 0 success; 2 bad input (one ``error: ...`` line on stderr); 1 a bug;
128 + the signal number when stopped by a signal.
"""

import os as _os
import signal as _signal
import sys as _sys


def _stopped_while_starting(signum, frame):
    # A signal before main() has set up the run's own handling: nothing has been
    # read or written yet, so say so and leave without a traceback.
    name = _signal.Signals(signum).name
    _sys.stderr.write(f"error: interrupted ({name}) while starting; nothing was written\n")
    raise SystemExit(128 + signum)


# the console script only: not a library user, not a worker process it spawns
# (a spawned worker imports the script again, with multiprocessing.spawn loaded)
if _os.path.basename(_sys.argv[0] or "") == "reachgauge" and "multiprocessing.spawn" not in _sys.modules:
    for _s in ("SIGINT", "SIGTERM", "SIGHUP"):
        if hasattr(_signal, _s):
            _signal.signal(getattr(_signal, _s), _stopped_while_starting)

from reachgauge.cli.entry import build_parser, main  # noqa: E402

__all__ = ["build_parser", "main"]
