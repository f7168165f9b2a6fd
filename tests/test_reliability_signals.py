"""No damage from a killed run: SIGINT, SIGTERM and SIGKILL sent to the console
script at four points of a real run (start-up, computing with two worker
processes, writing the GeoPackage, writing the report), with and without an
earlier result at --out.

After each: the earlier result is byte for byte intact (a run stopped before it
put its results in place must not touch them); SIGINT and SIGTERM give one true
``error:`` line, exit 128 + the signal number and leave no temporary file, only
the checkpoint of the reaches finished (which the line names, with --resume);
SIGKILL leaves files that the next run removes; no worker process outlives its
parent. The points are reached with the test hook of
reachgauge.lifecycle (REACHGAUGE_TEST_HOLD), so each signal lands where
the test says.
"""

from __future__ import annotations

import hashlib
import os
import shutil
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

import terrain_fixtures as tf

pytestmark = pytest.mark.skipif(not sys.platform.startswith("linux"),
                                reason="reads /proc for the process tree")
EXE = Path(sys.executable).with_name("reachgauge")


def descendants(pid: int) -> set[int]:
    """Every process below ``pid`` (Linux /proc)."""
    parents: dict[int, list[int]] = {}
    for entry in os.listdir("/proc"):
        if entry.isdigit():
            try:
                stat = Path(f"/proc/{entry}/stat").read_text()
            except OSError:
                continue
            ppid = int(stat.rsplit(")", 1)[1].split()[1])
            parents.setdefault(ppid, []).append(int(entry))
    out, todo = set(), [pid]
    while todo:
        for child in parents.get(todo.pop(), []):
            out.add(child)
            todo.append(child)
    return out


def alive(pid: int) -> bool:
    try:
        state = Path(f"/proc/{pid}/stat").read_text().rsplit(")", 1)[1].split()[0]
    except OSError:
        return False
    return state != "Z"


def digest(folder: Path) -> dict:
    return {p.name: hashlib.sha256(p.read_bytes()).hexdigest()
            for p in sorted(folder.iterdir()) if p.is_file()}


@pytest.fixture(scope="module")
def inputs(tmp_path_factory):
    d = tmp_path_factory.mktemp("signals")
    line = tf.straight_line(300.0)
    v = tf.make_valley_raster(d, line, res=1.0, noise=0.02, seed=3, margin=80.0)
    streams = tf.write_lines(d / "streams.gpkg", [line], fields={"rid": ["A"]})
    earlier = d / "earlier"
    earlier.mkdir()
    r = subprocess.run(command(v.path, streams, earlier), capture_output=True, text=True,
                       env=environment())
    assert r.returncode == 0, r.stderr
    return {"dem": v.path, "streams": streams, "earlier": earlier}


def environment(**extra):
    env = dict(os.environ, **extra)
    src = Path(__file__).resolve().parents[1] / "src"
    env["PYTHONPATH"] = os.pathsep.join([str(src), env.get("PYTHONPATH", "")])
    return env


def command(dem, streams, folder, *extra):
    return [str(EXE), "run", "--dem", str(dem), "--streams", str(streams), "--id-field", "rid",
            "--half-width", "30", "--split-length", "150", "--out", str(folder / "r.gpkg"), "--report",
            str(folder / "r.html"), "--csv", str(folder / "csv"), "--overwrite", "--quiet",
            *extra]


def ours(folder: Path) -> list[str]:
    return sorted(p.name for p in folder.rglob(".reachgauge-*"))


POINTS = ["start-up", "computing", "writing", "report"]
CASES = [(sig, point, (i + j) % 2 == 1)
         for i, sig in enumerate(("SIGINT", "SIGTERM", "SIGKILL")) for j, point in enumerate(POINTS)]


@pytest.mark.parametrize("sig,point,earlier", CASES,
                         ids=[f"{s}-{p}-{'earlier' if e else 'fresh'}" for s, p, e in CASES])
def test_a_signal_leaves_no_trace(inputs, tmp_path, sig, point, earlier):
    folder = tmp_path / "out"
    folder.mkdir()
    if earlier:
        for name in ("r.gpkg", "r.html"):
            shutil.copy(inputs["earlier"] / name, folder / name)
        shutil.copytree(inputs["earlier"] / "csv", folder / "csv")
    before = digest(folder)
    before_csv = digest(folder / "csv") if earlier else None
    jobs = ["--jobs", "2"] if point == "computing" else []
    env = environment(REACHGAUGE_TEST_HOLD=point)
    p = subprocess.Popen(command(inputs["dem"], inputs["streams"], folder, *jobs), env=env,
                         stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    try:
        if point == "start-up":
            time.sleep(0.3)
        else:
            seen = ""
            line = p.stderr.readline()
            while line.startswith("warning: "):   # the run's warnings come first
                seen += line
                line = p.stderr.readline()
            assert line.startswith(f"reachgauge-hold {point}"), seen + line + p.stderr.read()
        family = descendants(p.pid)
        if point == "computing":
            assert len(family) >= 2   # the pool's workers are up
        p.send_signal(getattr(signal, sig))
        _, err = p.communicate(timeout=60)
    finally:
        if p.poll() is None:
            p.kill()
            p.wait()
    # no process of the run outlives it
    deadline = time.time() + 10
    while time.time() < deadline and any(alive(c) for c in family):
        time.sleep(0.1)
    assert not [c for c in family if alive(c)]
    # the earlier result is intact (the run never reached the point of replacing it)
    assert {k: v for k, v in digest(folder).items() if k in before} == before
    if earlier:
        assert {k: v for k, v in digest(folder / "csv").items() if k in before_csv} == before_csv
    kept = folder / "r.gpkg.checkpoint"
    kept_reaches = list(kept.glob("reach-*.pkl")) if kept.exists() else []
    if point in ("computing", "writing", "report"):
        assert kept_reaches       # the hold comes after the first reach is kept
    if sig == "SIGKILL":
        assert p.returncode == -signal.SIGKILL
        # the next run removes what the killed one left, and completes
        resume = ["--resume"] if kept_reaches else []
        r = subprocess.run(command(inputs["dem"], inputs["streams"], folder, *resume),
                           env=environment(), capture_output=True, text=True)
        assert r.returncode == 0, r.stderr
        assert ours(folder) == [] and not kept.exists()
        assert {"r.gpkg", "r.html"} <= set(digest(folder))
        return
    number = getattr(signal, sig)
    assert p.returncode == 128 + number
    lines = [ln for ln in err.splitlines() if ln.strip() and not ln.startswith("warning: ")]
    assert len(lines) == 1 and lines[0].startswith(f"error: interrupted ({sig})"), err
    assert "Traceback" not in err
    assert "no result was written" in lines[0] or "nothing was written" in lines[0]
    if earlier and point != "start-up":
        assert "r.gpkg" in lines[0] and "unchanged" in lines[0]
    assert ("--resume" in lines[0]) == bool(kept_reaches)
    assert ours(folder) == []                                  # no temporary file left
    assert set(os.listdir(folder)) == (set(before) | ({"csv"} if earlier else set())
                                       | ({kept.name} if kept_reaches else set()))
