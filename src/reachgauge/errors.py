"""The exception types for bad input and failed writes, the warning category,
and how values and warnings are shown to a user.

The CLI turns an :class:`InputError` (or its :class:`OutputError`) into a single
``error: ...`` line and exit code 2; anything else that escapes is a bug
(exit 1).
"""

from __future__ import annotations

import math
import os
import sys
import warnings


class InputError(ValueError):
    """Bad input that the user can fix.

    ``problem`` says what is wrong; ``fix`` says how to fix it. ``str()`` joins
    them into one line. It subclasses :class:`ValueError` so that callers of the
    Python API can catch either.
    """

    def __init__(self, problem: str, fix: str | None = None):
        self.problem = problem
        self.fix = fix
        super().__init__(problem if not fix else f"{problem}; {fix}")


class OutputError(InputError):
    """A result could not be written (no space, no permission, a read-only
    disk). Nothing was half-written: the message says what is where."""


class ReachgaugeWarning(UserWarning):
    """A result was produced but something about it deserves a look."""


def shown(value) -> str:
    """A value as a user should read it in a message: ``-5.3`` rather than
    ``np.float64(-5.3)``, text in quotes, whole floats without a trailing ``.0``."""
    item = getattr(value, "item", None)
    if callable(item) and getattr(value, "ndim", 1) == 0:
        value = item()   # a numpy scalar
    if isinstance(value, bool) or value is None:
        return {True: "true", False: "false", None: "nothing"}[value]
    if isinstance(value, float):
        return "nan" if math.isnan(value) else f"{value:g}"
    if isinstance(value, (list, tuple)):
        return "[" + ", ".join(shown(v) for v in value) + "]"
    return repr(value) if isinstance(value, str) else str(value)


# ------------------------------------------------------------------- warnings
# Library warnings a user cannot act on: numpy's notes on NaN arithmetic (the
# steps handle NaN on purpose) and font glyph substitutions in the report's figures.
_NOISE = ("invalid value encountered", "divide by zero", "Mean of empty slice",
          "All-NaN slice", "Degrees of freedom", "missing from font", "overflow encountered")
_seen: set = set()


def show_warning(message, category, filename, lineno, file=None, line=None):
    """Print a warning as one line without source paths: ours as ``warning: ...``;
    a library's as ``warning: (library) ...`` once per text; known noise not at
    all (``REACHGAUGE_DEBUG=1`` prints every warning as Python would)."""
    stream = file or sys.stderr
    if os.environ.get("REACHGAUGE_DEBUG"):
        stream.write(warnings.formatwarning(message, category, filename, lineno, line))
        return
    text = " ".join(str(message).split())
    if issubclass(category, ReachgaugeWarning):
        print(f"warning: {text}", file=stream)
        return
    if any(n in text for n in _NOISE) or text in _seen:
        return
    _seen.add(text)
    parts = str(filename).replace("\\", "/").split("/")
    lib = next((parts[i + 1] for i in range(len(parts) - 1)
                if parts[i] in ("site-packages", "dist-packages")), None)
    print(f"warning: ({lib or category.__name__}) {text}", file=stream)


def install_warning_display() -> None:
    """Route every warning of this process through :func:`show_warning`."""
    warnings.simplefilter("default", ReachgaugeWarning)
    warnings.showwarning = show_warning
