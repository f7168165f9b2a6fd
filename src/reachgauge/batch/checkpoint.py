"""The checkpoint of a run: every finished reach's rows on disk, beside the output.

A run keeps, in the folder ``<out>.checkpoint`` next to its GeoPackage, one part
file per finished reach (its rows of every layer, in their final form, and the
figures the summary counts) and ``run.json``: the settings and the fingerprints
of the inputs the parts were made with. The parts are what the GeoPackage is
assembled from at the end, in reach order, so memory holds only the reaches in
flight; and they are what ``--resume`` keeps after an interruption (SIGINT,
SIGTERM, SIGKILL, power loss): only the reaches without a part run again, and
the file assembled is the one an uninterrupted run writes. The folder goes once
the result is in place.

A part is written under a temporary name, flushed to the disk (``fsync``) and
renamed, so a part either is whole or is not there. Parts are Python pickles:
the fastest whole-fidelity store of the tables (types, geometry), written and
read only by the run that owns the folder; ``run.json`` must match before any
part is read. A reach that failed on an internal error gets no part and runs
again on resume.
"""

from __future__ import annotations

import hashlib
import json
import os
import pickle
from pathlib import Path

from reachgauge import lifecycle
from reachgauge.errors import InputError, OutputError

FORMAT = 1
SUFFIX = ".checkpoint"


def folder_for(out) -> Path:
    out = Path(out)
    return out.with_name(out.name + SUFFIX)


def _describe_change(old: dict, new: dict) -> str:
    """The first few differences between two identities, for the refusal message."""
    diffs = []
    for group in ("settings", "inputs"):
        a, b = old.get(group, {}), new.get(group, {})
        for k in sorted(set(a) | set(b)):
            if a.get(k) != b.get(k):
                if group == "settings":
                    diffs.append(f"{k} {json.dumps(a.get(k))} -> {json.dumps(b.get(k))}")
                else:
                    diffs.append(f"input {k} changed")
    if old.get("reaches") != new.get("reaches"):
        diffs.append("the reaches of the streams changed")
    if old.get("version") != new.get("version"):
        diffs.append(f"reachgauge {old.get('version')} -> {new.get('version')}")
    return ", ".join(diffs[:4]) + (" ..." if len(diffs) > 4 else "")


class Checkpoint:
    """The checkpoint folder of one output (see the module docstring)."""

    def __init__(self, out, identity: dict):
        self.out = Path(out)
        self.folder = folder_for(out)
        self.identity = {"format": FORMAT, **identity}
        self._held = False

    # ------------------------------------------------------------ start and end
    def open(self, resume: bool) -> dict:
        """Create the folder, or (``resume``) check and reopen it. Returns
        {reach id: header} of the parts already there."""
        f = self.folder
        if f.exists() and not f.is_dir():
            raise InputError(f"{str(f)!r} is in the way of the run's checkpoint folder",
                             "move or delete that file, then run again")
        if resume and not (f / "run.json").exists():
            raise InputError(f"nothing to resume: no checkpoint {str(f)!r} of an interrupted run "
                             f"into {str(self.out)!r}", "run again without --resume")
        if f.exists() and lifecycle.in_use(f):
            raise InputError(f"another run is writing into {str(self.out)!r} now "
                             f"(its checkpoint {str(f)!r} is in use)",
                             "wait for it to end, or choose another --out")
        done = len(list(f.glob("reach-*.pkl"))) if f.is_dir() else 0
        if not resume and f.exists() and done == 0:
            import shutil

            shutil.rmtree(f)          # an interrupted run that kept nothing: start over
        if not resume and f.exists():
            raise InputError(f"an interrupted run into {str(self.out)!r} left a checkpoint "
                             f"{str(f)!r} ({done} reach(es) done)",
                             "continue it with --resume, or delete that folder to start over")
        if resume:
            try:
                old = json.loads((f / "run.json").read_text(encoding="utf-8"))
            except (OSError, ValueError) as exc:
                raise InputError(f"the checkpoint {str(f)!r} cannot be read ({exc})",
                                 "delete that folder and run again without --resume") from None
            if old != self.identity:
                change = _describe_change(old, self.identity)
                raise InputError(f"cannot resume into {str(self.out)!r}: the checkpoint was made "
                                 f"with other inputs or settings ({change})",
                                 "run with the settings and inputs of the interrupted run, or "
                                 f"delete {str(f)!r} and run again without --resume")
        else:
            f.mkdir()
            _write(f / "run.json", json.dumps(self.identity, indent=1).encode())
        lifecycle.hold(f)
        self._held = True
        lifecycle.clean_stale(f)
        return self.headers()

    def close(self, stopped: bool = False) -> None:
        """Release the folder. ``stopped``: the run was cut short, so a worker
        stopped mid-write may have left a part under its temporary name (a killed
        process cleans up nothing): once the workers are gone, remove those (the
        folder is this run's alone, :meth:`open` saw to that; whole parts stay)."""
        if stopped and self.folder.is_dir():
            import multiprocessing

            lifecycle.stop_workers()          # the run is ending: none of them may write on
            for child in multiprocessing.active_children():
                child.join(timeout=5)
            for f in self.folder.glob(f"{lifecycle.PREFIX}*"):
                if ".part" in f.name:
                    lifecycle.remove_temp(f)
        if self._held:
            self._held = False
            lifecycle.release(self.folder)

    def remove(self) -> None:
        """Delete the folder (the result is in place, or nothing can be resumed)."""
        import shutil

        self.close()
        shutil.rmtree(self.folder, ignore_errors=True)

    # -------------------------------------------------------------- the parts
    def add(self, header: dict, layers: dict) -> None:
        """Keep a reach's ``header`` (small: the reach row and its counts) and
        ``layers`` ({name: frame}) as one part."""
        write_part(self.folder, header, layers, self.out)

    def headers(self) -> dict:
        """{reach id: header} of every part (reads only the headers)."""
        out = {}
        for p in sorted(self.folder.glob("reach-*.pkl")):
            with open(p, "rb") as fh:
                h = pickle.load(fh)
            out[h["reach_id"]] = h
        return out

    def layers(self, header: dict) -> dict:
        with open(part_path(self.folder, header["reach_id"]), "rb") as fh:
            pickle.load(fh)
            return pickle.load(fh)


def discard(out) -> None:
    """Remove the checkpoint of ``out`` unless a live run uses it (for runs that
    always start over, such as the demo)."""
    import shutil

    f = folder_for(out)
    if f.is_dir() and not lifecycle.in_use(f):
        shutil.rmtree(f, ignore_errors=True)


def part_path(folder, reach_id: str) -> Path:
    """The part of a reach: named by a digest of its id (ids may hold any character)."""
    return Path(folder) / f"reach-{hashlib.sha256(str(reach_id).encode()).hexdigest()[:24]}.pkl"


def write_part(folder, header: dict, layers: dict, out=None) -> None:
    """Write one reach's part into ``folder`` (in a worker or in the run's
    process): under a temporary name, flushed to the disk, then renamed."""
    blob = pickle.dumps(header, protocol=5) + pickle.dumps(layers, protocol=5)
    try:
        _write(part_path(folder, header["reach_id"]), blob)
    except OSError as exc:
        from reachgauge.results.geopackage import write_failed

        err = write_failed(folder, exc)
        raise OutputError(f"cannot keep a finished reach in the checkpoint {str(folder)!r} "
                          f"({exc.strerror or exc})"
                          + (f"; {str(out)!r} was not written" if out else ""), err.fix) from None


def _write(path: Path, data: bytes) -> None:
    tmp = lifecycle.temp_path(path)
    try:
        with open(tmp, "wb") as fh:
            fh.write(data)
            fh.flush()
            os.fsync(fh.fileno())     # whole on the disk before it takes its name
        os.replace(tmp, path)
    except BaseException:
        lifecycle.remove_temp(tmp)
        raise
    _fsync_dir(path.parent)


def _fsync_dir(folder: Path) -> None:
    """Make a rename durable (POSIX: the directory entry lives in the folder)."""
    try:
        fd = os.open(folder, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)
