"""Output targets that cannot be written, and the temporary files of runs that
ended: every write failure is one ``error:`` line with nothing half-written,
found before the work where it can be known; stale temporary files are removed
only when they are ours and no live run holds them.

A read-only folder is made with chmod, or, for root (whom permissions do not
stop), with the immutable attribute (chattr +i). A full disk is a real one to
the writer: the file-size limit RLIMIT_FSIZE of a child process makes every
write past it fail with EFBIG, as a full disk fails with ENOSPC.
"""

from __future__ import annotations

import fcntl
import hashlib
import os
import resource
import shutil
import signal
import subprocess
import sys
from contextlib import contextmanager
from pathlib import Path

import pytest

import terrain_fixtures as tf
from reachgauge import lifecycle
from reachgauge.cli.entry import main

EXE = Path(sys.executable).with_name("reachgauge")
PROFILE = Path(__file__).resolve().parents[1] / "sample_data" / "gauged_section.csv"


@contextmanager
def read_only(folder: Path):
    folder.mkdir(exist_ok=True)
    if os.geteuid() != 0:
        folder.chmod(0o555)
        try:
            yield folder
        finally:
            folder.chmod(0o755)
        return
    if not shutil.which("chattr") or subprocess.run(["chattr", "+i", str(folder)],
                                                    capture_output=True).returncode:
        pytest.skip("running as root without chattr +i: no way to make a read-only folder")
    try:
        yield folder
    finally:
        subprocess.run(["chattr", "-i", str(folder)], check=True)


@pytest.fixture(scope="module")
def inputs(tmp_path_factory):
    d = tmp_path_factory.mktemp("writes")
    line = tf.straight_line(300.0)
    v = tf.make_valley_raster(d, line, res=1.0, noise=0.02, seed=3, margin=80.0)
    streams = tf.write_lines(d / "streams.gpkg", [line], fields={"rid": ["A"]})
    return {"dem": v.path, "streams": streams}


def run_args(inputs, out, *extra):
    return ["run", "--dem", str(inputs["dem"]), "--streams", str(inputs["streams"]),
            "--id-field", "rid", "--half-width", "30", "--out", str(out), *map(str, extra)]


def one_error(err):
    # one error line; the run's warnings (plain "warning:" lines) may stand before it
    lines = [ln for ln in err.splitlines() if ln.strip() and not ln.startswith("warning: ")]
    assert len(lines) == 1 and lines[0].startswith("error: "), err
    assert "Traceback" not in err
    return lines[0]


@pytest.mark.parametrize("target", ["out", "report", "csv-existing", "csv-new"])
def test_an_unwritable_target_stops_the_run_before_the_work(inputs, tmp_path, capsys, target):
    ro = tmp_path / "locked"
    out = tmp_path / "r.gpkg"
    extra = {"out": [], "report": ["--report", ro / "r.html"],
             "csv-existing": ["--csv", ro], "csv-new": ["--csv", ro / "tables"]}[target]
    with read_only(ro):
        code = main(run_args(inputs, ro / "r.gpkg" if target == "out" else out, *extra))
    _, err = capsys.readouterr()   # not --quiet: a reach that ran would print a progress line
    assert code == 2
    line = one_error(err)
    assert "cannot write in folder" in line and "choose a folder you can write to" in line
    assert not out.exists() and sorted(os.listdir(ro)) == []


def test_section_rating_in_a_read_only_folder(tmp_path, capsys):
    ro = tmp_path / "locked"
    with read_only(ro):
        code = main(["section", str(PROFILE), "--stage", "100.9", "--slope", "0.0021", "--n",
                     "0.035", "--rating", str(ro / "rating.csv")])
    out, err = capsys.readouterr()
    assert code == 2 and out == ""            # refused before any figure was printed
    assert "cannot write in folder" in one_error(err)


def test_report_command_into_a_read_only_folder(inputs, tmp_path, capsys):
    out = tmp_path / "r.gpkg"
    assert main(run_args(inputs, out, "--quiet")) == 0
    ro = tmp_path / "locked"
    with read_only(ro):
        code = main(["report", str(out), "--out", str(ro / "r.html")])
    assert code == 2 and "cannot write in folder" in one_error(capsys.readouterr()[1])


def _limited(nbytes):
    def limit():
        signal.signal(signal.SIGXFSZ, signal.SIG_IGN)   # a write past the limit fails (EFBIG)
        resource.setrlimit(resource.RLIMIT_FSIZE, (nbytes, nbytes))
    return limit


def _env():
    env = dict(os.environ, PYTHONDONTWRITEBYTECODE="1")
    src = Path(__file__).resolve().parents[1] / "src"
    env["PYTHONPATH"] = os.pathsep.join([str(src), env.get("PYTHONPATH", "")])
    return env


def test_a_full_disk_while_writing_is_one_error_line_and_keeps_the_earlier_result(inputs,
                                                                                  tmp_path):
    out = tmp_path / "r.gpkg"
    out.write_bytes(b"earlier result")
    # the GeoPackage of this run is about 240 kB: 100 kB runs out in the middle of it
    r = subprocess.run([str(EXE)] + run_args(inputs, out, "--overwrite", "--quiet", "--csv",
                                             tmp_path / "tables"),
                       preexec_fn=_limited(100_000), env=_env(), capture_output=True, text=True)
    assert r.returncode == 2, r.stderr
    line = one_error(r.stderr)
    assert "cannot write" in line and "nothing was written" in line
    assert out.read_bytes() == b"earlier result"
    # no temporary file, no CSV folder; the finished reaches are kept for --resume
    assert sorted(os.listdir(tmp_path)) == ["r.gpkg", "r.gpkg.checkpoint"]
    assert "--resume" in line
    # with room on the disk again, the same command with --resume completes
    r = subprocess.run([str(EXE)] + run_args(inputs, out, "--overwrite", "--quiet", "--csv",
                                             tmp_path / "tables", "--resume"),
                       env=_env(), capture_output=True, text=True)
    assert r.returncode == 0, r.stderr
    assert sorted(os.listdir(tmp_path)) == ["r.gpkg", "tables"]
    assert out.read_bytes()[:16] == b"SQLite format 3\x00"


def test_a_full_disk_under_the_section_rating(tmp_path):
    rating = tmp_path / "rating.csv"
    r = subprocess.run([str(EXE), "section", str(PROFILE), "--stage", "100.9", "--slope",
                        "0.0021", "--n", "0.035", "--rating", str(rating)],
                       preexec_fn=_limited(1000), env=_env(), capture_output=True, text=True)
    assert r.returncode == 2, r.stderr
    assert "cannot write" in one_error(r.stderr)
    assert os.listdir(tmp_path) == []


# ------------------------------------------------------ stale temporary files
HOLDER = """
import fcntl, os, sys, time
fd = os.open(sys.argv[1], os.O_CREAT | os.O_RDWR)
fcntl.flock(fd, fcntl.LOCK_EX)
print("held", flush=True)
time.sleep(60)
"""


def _dead_pid():
    p = subprocess.Popen([sys.executable, "-c", "pass"])
    p.wait()
    return p.pid   # reaped: no process has this id (until the system reuses it)


def test_stale_files_are_removed_only_when_ours_and_not_held(tmp_path):
    dead = _dead_pid()
    stale = [f".reachgauge-{dead}-0a0a0a-3-r.part.gpkg", f".reachgauge-{dead}-0a0a0a-3-r.part.gpkg-journal",
             f".reachgauge-{dead}-0a0a0a.lock"]
    orphan = [f".reachgauge-{dead}-0b0b0b-1-t.part.csv"]               # its lock file is gone
    living = [f".reachgauge-{os.getppid()}-0c0c0c-1-u.part.csv"]       # no lock, process alive
    others = ["r.gpkg", ".r.abc.part.gpkg", ".reachgauge-notes.txt", "reachgauge-1-0a0a0a.lock"]
    for name in stale + orphan + living + others:
        (tmp_path / name).write_text("x")
    (tmp_path / f".reachgauge-{dead}-0a0a0a-4-csv.part").mkdir()      # a staged CSV folder
    held_lock = tmp_path / ".reachgauge-99999-0d0d0d.lock"
    held = [".reachgauge-99999-0d0d0d-1-v.part.gpkg"]
    (tmp_path / held[0]).write_text("x")
    holder = subprocess.Popen([sys.executable, "-c", HOLDER, str(held_lock)],
                              stdout=subprocess.PIPE, text=True)
    try:
        assert holder.stdout.readline().strip() == "held"
        lifecycle.clean_stale(tmp_path)
        left = sorted(os.listdir(tmp_path))
        assert left == sorted(living + others + held + [held_lock.name])
    finally:
        holder.kill()
        holder.wait()
    lifecycle.clean_stale(tmp_path)   # the holder is gone: its files go now
    assert sorted(os.listdir(tmp_path)) == sorted(living + others)


def test_a_run_holds_its_lock_while_it_writes(tmp_path):
    lifecycle.hold(tmp_path)
    try:
        lock = tmp_path / f".reachgauge-{lifecycle.TOKEN}.lock"
        fd = os.open(lock, os.O_RDWR)
        try:
            with pytest.raises(BlockingIOError):
                fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        finally:
            os.close(fd)
    finally:
        lifecycle.release(tmp_path)
    assert os.listdir(tmp_path) == []


def test_a_failed_commit_restores_every_earlier_file(inputs, tmp_path, monkeypatch, capsys):
    """The second rename fails: the first target is put back from its hard link."""
    from reachgauge.results import staging

    out, html = tmp_path / "r.gpkg", tmp_path / "r.html"
    assert main(run_args(inputs, out, "--report", html, "--quiet")) == 0
    before = {p: hashlib.sha256(p.read_bytes()).hexdigest() for p in (out, html)}
    real, calls = os.replace, {"n": 0}

    def flaky(src, dst):
        if Path(dst) == html and ".reachgauge-" in Path(src).name:
            calls["n"] += 1
            raise OSError(28, "No space left on device")
        return real(src, dst)

    monkeypatch.setattr(staging.os, "replace", flaky)
    code = main(run_args(inputs, out, "--report", html, "--overwrite", "--quiet"))
    assert code == 2 and calls["n"] == 1
    assert "cannot write" in one_error(capsys.readouterr()[1])
    assert {p: hashlib.sha256(p.read_bytes()).hexdigest() for p in (out, html)} == before
    # the finished reaches stay for --resume; nothing else is left
    assert sorted(os.listdir(tmp_path)) == ["r.gpkg", "r.gpkg.checkpoint", "r.html"]
