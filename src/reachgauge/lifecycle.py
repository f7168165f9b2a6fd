"""The life of a run on a shared machine: signals, worker processes and
temporary files, so that a run ended in any way leaves no damaged result, no
stray file and no stray process.

Signals. SIGINT (Ctrl-C), SIGTERM (what a scheduler or ``kill`` sends) and
SIGHUP (a closed terminal) all end a run the same way: the worker processes are
stopped at once, :class:`Interrupted` unwinds the run (every temporary file is
removed on the way), and the CLI prints one true line and exits 128 + the
signal number. While a run puts its results in place (:func:`deferred`) a signal
waits until the renames are done, so the results are either all old or all new.

Workers. Every pool process calls :func:`worker_started`: it ignores SIGINT
(Ctrl-C reaches the whole process group; the parent decides) and dies with its
parent even when the parent is killed outright (SIGKILL): Linux's parent-death
signal where there is one, and everywhere a thread that watches the parent id.

Temporary files. A file is written under a hidden name in its target's folder,
``.reachgauge-<pid>-<tag>-<k>-<name>.part<suffix>`` (the target's suffix last:
GDAL picks the driver from it), and renamed into place when complete. For as
long as it runs, a run holds an exclusive lock (``flock``) on
``.reachgauge-<pid>-<tag>.lock`` in every folder it writes to. :func:`clean_stale`
removes the files of earlier runs in a folder only when it can take their lock
(their run is gone, however it ended); files of a run whose lock file is
missing are removed only when their process id is no longer alive. Nothing
without the ``.reachgauge-`` prefix is ever touched.

Test hook: with ``REACHGAUGE_TEST_HOLD=<point>`` in the environment a run stops
for two minutes at that :func:`checkpoint` (``computing``, ``writing``,
``report``), after printing ``reachgauge-hold <point>`` to stderr, so that tests
can send signals at a known point of a real run.
"""

from __future__ import annotations

import errno
import os
import re
import secrets
import signal
import sys
import threading
import time
import atexit
from contextlib import contextmanager
from pathlib import Path

PREFIX = ".reachgauge-"
TOKEN = f"{os.getpid()}-{secrets.token_hex(3)}"
_TOKEN_RE = re.compile(r"^\.reachgauge-(\d+)-([0-9a-f]{6})[-.]")
SIGNALS = tuple(s for s in (getattr(signal, n, None) for n in ("SIGINT", "SIGTERM", "SIGHUP"))
                if s is not None)


# ====================================================================== signals
class Interrupted(KeyboardInterrupt):
    """The run was stopped by a signal; ``exit_code`` is 128 + its number."""

    def __init__(self, signum: int):
        super().__init__(signum)
        self.signum = signum

    @property
    def name(self) -> str:
        return signal.Signals(self.signum).name

    @property
    def exit_code(self) -> int:
        return 128 + self.signum


class _State:
    deferred = 0
    pending: int | None = None
    stopping = False
    written: list = []      # targets put in place by this process
    kept: list = []         # earlier files at the targets, left as they were
    writing_to: list = []   # targets of the write in progress
    resumable: str | None = None   # what an interrupted run kept for --resume


STATE = _State()


def _handler(signum, frame):
    stop_workers()
    if STATE.deferred or STATE.stopping:
        STATE.pending = STATE.pending or signum
        return
    STATE.stopping = True   # later signals wait: the unwinding must not be cut short
    raise Interrupted(signum)


def install_signal_handlers() -> None:
    """SIGINT, SIGTERM and SIGHUP end the run through :class:`Interrupted`."""
    STATE.stopping, STATE.pending, STATE.resumable = False, None, None
    for s in SIGNALS:
        signal.signal(s, _handler)
    # multiprocessing's resource tracker outlives a killed parent by a moment and
    # would print a raw warning about the semaphores it then cleans up; it takes
    # its warning options from ours
    quiet = "ignore::UserWarning:multiprocessing.resource_tracker"
    if quiet not in sys.warnoptions:
        sys.warnoptions.append(quiet)


@contextmanager
def deferred():
    """Hold signals until the block is done (the renames that put results in place)."""
    STATE.deferred += 1
    try:
        yield
    finally:
        STATE.deferred -= 1
        if not STATE.deferred and STATE.pending and not STATE.stopping:
            s, STATE.pending = STATE.pending, None
            STATE.stopping = True
            raise Interrupted(s)


def interruption_message(exc: Interrupted | KeyboardInterrupt) -> str:
    """One true line about what an interrupted run left behind."""
    name = exc.name if isinstance(exc, Interrupted) else "SIGINT"
    kept = [str(p) for p in STATE.kept]
    if STATE.written:
        done = ", ".join(str(p) for p in STATE.written)
        return f"interrupted ({name}) after the results were complete and written: {done}"
    text = f"interrupted ({name}); no result was written"
    if kept:
        text += f" and the earlier {', '.join(kept)} {'is' if len(kept) == 1 else 'are'} unchanged"
    if STATE.resumable:
        text += f"; {STATE.resumable}"
    return text


def stop_workers() -> None:
    """Terminate this process's pool workers now (they hold no result)."""
    import multiprocessing

    try:
        children = multiprocessing.active_children()
    except Exception:  # noqa: BLE001 - never fail inside a signal handler
        return
    for p in children:
        try:
            p.terminate()
        except Exception:  # noqa: BLE001
            pass


# ====================================================================== workers
def worker_started(parent_pid: int) -> None:
    """Initializer of every pool process: ignore Ctrl-C, die with the parent,
    show warnings as the CLI does."""
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    signal.signal(signal.SIGTERM, signal.SIG_DFL)   # the parent's way to stop it: at once
    if hasattr(signal, "SIGHUP"):
        signal.signal(signal.SIGHUP, signal.SIG_IGN)
    _die_with(parent_pid)
    import logging

    from reachgauge.errors import install_warning_display

    install_warning_display()
    logging.getLogger("reachgauge").addHandler(logging.NullHandler())


def _die_with(parent_pid: int) -> None:
    if sys.platform.startswith("linux"):
        try:
            import ctypes

            libc = ctypes.CDLL(None, use_errno=True)
            libc.prctl(1, signal.SIGKILL, 0, 0, 0)   # PR_SET_PDEATHSIG
        except (OSError, AttributeError):
            pass
    if os.getppid() != parent_pid:   # the parent died before the line above
        os._exit(1)

    def watch():
        while os.getppid() == parent_pid:
            time.sleep(0.5)
        os._exit(1)

    threading.Thread(target=watch, name="reachgauge-parent-watch", daemon=True).start()


# ============================================================ temporary files
_locks: dict[Path, list] = {}   # folder -> [fd, holders]
_count = 0


def hold(folder) -> None:
    """Take (or share) this run's lock in ``folder``. The lock file is created
    under another name, locked, then renamed, so a cleaner never sees it
    unlocked. Every :func:`hold` needs a :func:`release`."""
    import fcntl

    key = Path(folder).resolve()
    if key in _locks:
        _locks[key][1] += 1
        return
    final = key / f"{PREFIX}{TOKEN}.lock"
    new = key / f"{PREFIX}{TOKEN}.lock-new"
    fd = os.open(new, os.O_CREAT | os.O_WRONLY | os.O_TRUNC, 0o644)
    try:
        fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        os.write(fd, f"{os.getpid()}\n".encode())
        os.replace(new, final)
    except BaseException:
        os.close(fd)
        _unlink(new)
        raise
    _locks[key] = [fd, 1]


def release(folder=None) -> None:
    """Give back one :func:`hold` of ``folder`` (all of them with no folder);
    the last one removes the lock file."""
    for key in list(_locks) if folder is None else [Path(folder).resolve()]:
        entry = _locks.get(key)
        if entry is None:
            continue
        entry[1] = 0 if folder is None else entry[1] - 1
        if entry[1] > 0:
            continue
        del _locks[key]
        _unlink(key / f"{PREFIX}{TOKEN}.lock")
        os.close(entry[0])


@contextmanager
def holding(*folders):
    """This run's lock in every folder of ``folders`` for the block."""
    done = []
    try:
        for f in folders:
            hold(f)
            done.append(f)
        yield
    finally:
        for f in done:
            release(f)


def probe(folder) -> None:
    """Create and remove a file in ``folder``: raises OSError when results
    cannot be written there."""
    global _count
    _count += 1
    p = Path(folder) / f"{PREFIX}{TOKEN}-{_count}-probe"
    os.close(os.open(p, os.O_CREAT | os.O_EXCL | os.O_WRONLY, 0o644))
    os.unlink(p)


def temp_path(target) -> Path:
    """A fresh hidden name beside ``target`` for a file being written (the
    caller holds the folder's lock); the target's suffix comes last."""
    global _count
    target = Path(target)
    _count += 1
    return target.parent / f"{PREFIX}{TOKEN}-{_count}-{target.stem}.part{target.suffix}"


def remove_temp(path) -> None:
    """Remove a temporary file (or folder of ours) and what a writer may have
    left beside it (SQLite's journal, write-ahead log and shared memory)."""
    path = Path(path)
    if path.is_dir() and not path.is_symlink() and path.name.startswith(PREFIX):
        import shutil

        shutil.rmtree(path, ignore_errors=True)
        return
    for p in (path, *(Path(f"{path}{s}") for s in ("-journal", "-wal", "-shm"))):
        _unlink(p)


def _unlink(p) -> None:
    try:
        os.unlink(p)
    except FileNotFoundError:
        pass
    except IsADirectoryError:
        pass


def alive(pid: int) -> bool:
    """Whether process ``pid`` exists (someone else's counts)."""
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True   # someone else's process
    return True


def clean_stale(folder) -> list[Path]:
    """Remove the temporary files that runs which have ended left in ``folder``;
    return what was removed. Files of live runs (their lock is held) are kept."""
    import fcntl

    folder = Path(folder)
    try:
        names = os.listdir(folder)
    except OSError:
        return []
    ours = [n for n in names if n.startswith(PREFIX)]
    by_token: dict[str, list[str]] = {}
    for n in ours:
        m = _TOKEN_RE.match(n)
        if m:
            by_token.setdefault(f"{m.group(1)}-{m.group(2)}", []).append(n)
    removed = []
    for token, files in by_token.items():
        if token == TOKEN:
            continue
        lock = f"{PREFIX}{token}.lock"
        if lock in files:
            try:
                fd = os.open(folder / lock, os.O_RDWR)
            except OSError:
                continue
            try:
                fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
            except OSError as exc:
                os.close(fd)
                if exc.errno in (errno.EWOULDBLOCK, errno.EAGAIN, errno.EACCES):
                    continue   # a live run holds it
                continue
            try:
                removed += _remove_all(folder, [f for f in files if f != lock])
                removed += _remove_all(folder, [lock])
            finally:
                os.close(fd)
        elif not alive(int(token.split("-")[0])):
            removed += _remove_all(folder, files)
    return removed


def in_use(folder) -> bool:
    """Whether a live run other than this one holds its lock in ``folder``."""
    import fcntl

    folder = Path(folder)
    for lock in folder.glob(f"{PREFIX}*.lock"):
        if lock.name == f"{PREFIX}{TOKEN}.lock":
            continue
        try:
            fd = os.open(lock, os.O_RDWR)
        except OSError:
            continue
        try:
            fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
            fcntl.flock(fd, fcntl.LOCK_UN)
        except OSError:
            return True
        finally:
            os.close(fd)
    return False


def _remove_all(folder, names) -> list[Path]:
    out = []
    for n in names:
        p = folder / n
        try:
            if p.is_dir() and not p.is_symlink():
                import shutil

                shutil.rmtree(p)
            else:
                os.unlink(p)
            out.append(p)
        except OSError:
            pass
    return out


atexit.register(release)


# ========================================================================= hook
def checkpoint(point: str) -> None:
    """Pause here when a test asks for it (see the module docstring)."""
    if os.environ.get("REACHGAUGE_TEST_HOLD") == point:
        print(f"reachgauge-hold {point}", file=sys.stderr, flush=True)
        time.sleep(120)
