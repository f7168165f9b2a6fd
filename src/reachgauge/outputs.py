"""Writing results (an output edge of the tool).

Every write goes to a temporary file beside the target and is renamed into
place only when complete, so an existing result is never half-overwritten and a
failed run leaves nothing behind.
"""

from __future__ import annotations

import os
import tempfile
from pathlib import Path

import pandas as pd

from .errors import InputError


def check_target(path, overwrite: bool) -> Path:
    """Refuse to replace an existing file unless ``overwrite``."""
    p = Path(path)
    if p.exists() and not overwrite:
        raise InputError(f"{str(p)!r} already exists", "choose another path or pass --overwrite")
    if p.exists() and p.is_dir():
        raise InputError(f"{str(p)!r} is a directory", "give a file path")
    if not p.parent.exists():
        raise InputError(f"folder {str(p.parent)!r} does not exist", "create it first")
    return p


class atomic_path:
    """Context manager yielding a temporary path beside ``target``; on success
    it is renamed onto the target, on failure removed."""

    def __init__(self, target, overwrite: bool = False):
        self.target = check_target(target, overwrite)

    def __enter__(self) -> Path:
        fd, name = tempfile.mkstemp(prefix=f".{self.target.name}.", suffix=".part",
                                    dir=self.target.parent)
        os.close(fd)
        os.unlink(name)  # writers such as GDAL want to create the file themselves
        self.tmp = Path(name)
        return self.tmp

    def __exit__(self, exc_type, exc, tb):
        if exc_type is None:
            os.replace(self.tmp, self.target)
        else:
            self.tmp.unlink(missing_ok=True)
        return False


def write_csv_atomic(table: pd.DataFrame, path, overwrite: bool = False) -> Path:
    """Write ``table`` as CSV to ``path`` atomically."""
    with atomic_path(path, overwrite) as tmp:
        table.to_csv(tmp, index=False, float_format="%.6g")
    return Path(path)
