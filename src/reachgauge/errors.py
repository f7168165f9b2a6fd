"""The one exception type for bad input, and the warning category.

The CLI turns an :class:`InputError` into a single ``error: ...`` line and exit
code 2; anything else that escapes is a bug (exit 1).
"""

from __future__ import annotations


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


class ReachgaugeWarning(UserWarning):
    """A result was produced but something about it deserves a look."""
