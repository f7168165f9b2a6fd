"""Streaming results and resuming an interrupted run (issue 11).

A run keeps each finished reach in ``<out>.checkpoint`` and assembles the
GeoPackage from it in reach order, so:

- the file is byte for byte the same whatever the executor and the order the
  reaches finish in (given the same creation time, ``SOURCE_DATE_EPOCH``);
- a run killed outright (SIGKILL, as a power cut would) after some reaches and
  continued with ``--resume`` writes the file an uninterrupted run writes, and
  does not compute the kept reaches again;
- a resume with other settings or inputs, a resume with nothing to resume, and a
  new run over a checkpoint are refused with one clear line, the checkpoint
  untouched.

The reference each time is an uninterrupted run of the same tool: these are
checks of equality between ways of running, not of the figures (those are
checked against closed-form channels elsewhere).
"""

from __future__ import annotations

import hashlib
import os
import signal
import subprocess
import sys
from pathlib import Path

import pytest
import shapely

import terrain_fixtures as tf
from reachgauge.cli import main

pytestmark = pytest.mark.filterwarnings("ignore::RuntimeWarning")
EXE = Path(sys.executable).with_name("reachgauge")
EPOCH = "1700000000"


@pytest.fixture(scope="module")
def valley(tmp_path_factory):
    """A 600 m channel split into six reaches of 100 m, with design flows."""
    d = tmp_path_factory.mktemp("resume")
    line = tf.straight_line(600.0)
    v = tf.make_valley_raster(d, line, res=1.0, noise=0.02, seed=5, margin=60.0)
    (x0, y0), (x1, y1) = line.coords[0], line.coords[-1]
    parts = [shapely.LineString([(x0 + (x1 - x0) * k / 6, y0 + (y1 - y0) * k / 6),
                                 (x0 + (x1 - x0) * (k + 1) / 6, y0 + (y1 - y0) * (k + 1) / 6)])
             for k in range(6)]
    streams = tf.write_lines(d / "streams.gpkg", parts, fields={"rid": list("ABCDEF")})
    flows = d / "flows.csv"
    flows.write_text("reach_id,flow,discharge\n" + "".join(f"{r},q2,3.0\n" for r in "ABCDEF"))
    return v.path, streams, flows


def args(valley, out, *extra):
    dem, streams, flows = valley
    return ["run", "--dem", dem, "--streams", streams, "--id-field", "rid", "--half-width", 30,
            "--spacing", 10, "--design-flows", flows, "--out", out, *extra]


def environment(**extra):
    env = dict(os.environ, SOURCE_DATE_EPOCH=EPOCH, **extra)
    src = Path(__file__).resolve().parents[1] / "src"
    env["PYTHONPATH"] = os.pathsep.join([str(src), env.get("PYTHONPATH", "")])
    return env


def sha(path) -> str:
    return hashlib.sha256(Path(path).read_bytes()).hexdigest()


@pytest.fixture(scope="module")
def reference(valley, tmp_path_factory):
    out = tmp_path_factory.mktemp("reference") / "r.gpkg"
    r = subprocess.run([str(EXE)] + [str(a) for a in args(valley, out, "--quiet")],
                       env=environment(), capture_output=True, text=True)
    assert r.returncode == 0, r.stderr
    assert not Path(f"{out}.checkpoint").exists()     # gone once the result is in place
    return out


def test_the_file_is_the_same_whatever_the_executor(valley, reference, tmp_path):
    out = tmp_path / "pool.gpkg"
    r = subprocess.run([str(EXE)] + [str(a) for a in args(valley, out, "--quiet", "--jobs", "2")],
                       env=environment(), capture_output=True, text=True)
    assert r.returncode == 0, r.stderr
    assert sha(out) == sha(reference)


def test_the_file_is_the_same_on_a_dask_cluster(valley, reference, tmp_path, monkeypatch):
    """A real LocalCluster of two worker processes on loopback: the workers shape
    the rows and send them back (they may not share the run's disk)."""
    distributed = pytest.importorskip("dask.distributed")
    monkeypatch.setenv("SOURCE_DATE_EPOCH", EPOCH)
    out = tmp_path / "dask.gpkg"
    with distributed.LocalCluster(n_workers=2, processes=True, threads_per_worker=1,
                                  host="127.0.0.1", dashboard_address=None) as cluster:
        code = main([str(a) for a in args(valley, out, "--quiet", "--scheduler",
                                          cluster.scheduler_address)])
    assert code == 0
    assert sha(out) == sha(reference)


def test_a_killed_run_resumes_to_the_uninterrupted_result(valley, reference, tmp_path):
    out = tmp_path / "r.gpkg"
    cmd = [str(EXE)] + [str(a) for a in args(valley, out)]
    # the test hook holds the run after its first finished reach is kept
    p = subprocess.Popen(cmd, env=environment(REACHGAUGE_TEST_HOLD="computing"),
                         stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    try:
        line = p.stderr.readline()
        while line and not line.startswith("reachgauge-hold"):
            line = p.stderr.readline()
        assert line.startswith("reachgauge-hold computing")
        p.send_signal(signal.SIGKILL)
        p.wait(timeout=30)
    finally:
        if p.poll() is None:
            p.kill()
    kept = sorted(Path(f"{out}.checkpoint").glob("reach-*.pkl"))
    assert len(kept) == 1 and not out.exists()
    r = subprocess.run(cmd + ["--resume"], env=environment(), capture_output=True, text=True)
    assert r.returncode == 0, r.stderr
    assert "1 reaches (" in r.stderr and "kept from the checkpoint" in r.stderr
    # only the five other reaches ran again
    assert sum(ln.startswith("reach ") for ln in r.stderr.splitlines()) == 5
    assert sha(out) == sha(reference)
    assert not Path(f"{out}.checkpoint").exists()
    assert not list(tmp_path.glob(".reachgauge-*"))


def _interrupted(valley, out):
    """A checkpoint as an interrupted run leaves it: three of six reaches kept."""
    from reachgauge.batch import dispatch

    real = dispatch.iterate

    def stop_after_three(*a, **k):
        for n, kept in enumerate(real(*a, **k), 1):
            yield kept
            if n == 3:
                raise KeyboardInterrupt

    dispatch.iterate = stop_after_three
    try:
        assert main([str(a) for a in args(valley, out, "--quiet")]) == 130
    finally:
        dispatch.iterate = real
    folder = Path(f"{out}.checkpoint")
    assert len(list(folder.glob("reach-*.pkl"))) == 3
    return folder


def _state(folder: Path) -> dict:
    return {p.name: sha(p) for p in sorted(folder.iterdir())}


@pytest.mark.parametrize("change,words", [
    (["--spacing", "20"], "spacing 10.0 -> 20.0"),
    (["--n", "0.05"], "n 0.035 -> 0.05"),
])
def test_a_resume_with_other_settings_is_refused(valley, tmp_path, capsys, change, words):
    out = tmp_path / "r.gpkg"
    folder = _interrupted(valley, out)
    before = _state(folder)
    capsys.readouterr()
    a = args(valley, out, "--quiet", "--resume")
    i = a.index(change[0]) if change[0] in a else None
    if i is not None:
        a[i + 1] = change[1]
    else:
        a += change
    assert main([str(x) for x in a]) == 2
    err = [ln for ln in capsys.readouterr().err.strip().splitlines()
           if not ln.startswith("warning: ")]
    assert len(err) == 1 and err[0].startswith("error: cannot resume") and words in err[0], err
    assert _state(folder) == before and not out.exists()


def test_a_resume_with_a_changed_input_is_refused(valley, tmp_path, capsys):
    dem, streams, flows = valley
    out = tmp_path / "r.gpkg"
    folder = _interrupted(valley, out)
    before = _state(folder)
    capsys.readouterr()
    other = tmp_path / "flows.csv"
    other.write_text(Path(flows).read_text().replace("3.0", "4.0"))
    a = [str(x) for x in args(valley, out, "--quiet", "--resume")]
    a[a.index(str(flows))] = str(other)
    assert main(a) == 2
    err = capsys.readouterr().err
    assert "cannot resume" in err and "input design_flows changed" in err
    assert _state(folder) == before and not out.exists()


def test_a_new_run_over_a_checkpoint_and_a_resume_without_one_are_refused(valley, tmp_path,
                                                                          capsys):
    out = tmp_path / "r.gpkg"
    assert main([str(a) for a in args(valley, out, "--quiet", "--resume")]) == 2
    assert "nothing to resume" in capsys.readouterr().err
    folder = _interrupted(valley, out)
    before = _state(folder)
    capsys.readouterr()
    assert main([str(a) for a in args(valley, out, "--quiet")]) == 2
    err = capsys.readouterr().err
    assert "left a checkpoint" in err and "--resume" in err and "3 reach(es) done" in err
    assert _state(folder) == before
    # and the resume completes
    assert main([str(a) for a in args(valley, out, "--quiet", "--resume")]) == 0
    assert not folder.exists() and out.exists()


def test_a_part_is_whole_or_absent(valley, tmp_path):
    """A part is written under a temporary name and renamed: a part cut short
    (a crash mid-write leaves only the temporary file) is not read, and the next
    run removes it."""
    out = tmp_path / "r.gpkg"
    folder = _interrupted(valley, out)
    dead = subprocess.run([sys.executable, "-c", "import os; print(os.getpid())"],
                          capture_output=True, text=True).stdout.strip()
    torn = folder / f".reachgauge-{dead}-0a0a0a-9-reach-0000005.part.pkl"
    torn.write_bytes(b"\x80\x05 cut short")
    assert main([str(a) for a in args(valley, out, "--quiet", "--resume")]) == 0
    assert out.exists() and not folder.exists()
