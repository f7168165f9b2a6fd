"""The executors of reachgauge.batch.dispatch: a Dask cluster, a local pool and
the serial loop give the same reach tables; the window bounds the tasks in
flight; a task carries only its reach's rows of the run-wide tables.

Truth: the serial run is the reference for the other executors (the same
process_reach on the same inputs must give identical tables, pandas
assert_frame_equal, exact); the window bound is counted, not timed. Inputs: the
invented demo basin (sample_data/basin: 5 reaches, land cover, observations,
design flows), with Cowan terms for three of its reaches.
"""

from __future__ import annotations

import pickle
import threading
import time
from concurrent.futures import Future, ThreadPoolExecutor
from pathlib import Path
from types import SimpleNamespace

import pandas as pd
import pytest

from reachgauge.api import configure
from reachgauge.batch import dispatch, shared as shared_mod, task
from reachgauge.errors import InputError
from reachgauge.inputs import network as network_mod

pytestmark = pytest.mark.filterwarnings("ignore::RuntimeWarning", "ignore::UserWarning")
BASIN = Path(__file__).resolve().parents[1] / "sample_data" / "basin"
TABLES = ("transects", "rating", "stages", "design", "calibration")


@pytest.fixture(scope="module")
def basin(tmp_path_factory):
    d = tmp_path_factory.mktemp("dispatch")
    rows = (BASIN / "cowan.csv").read_text().splitlines()
    cowan = d / "cowan.csv"   # terms for M1, M2, M3; none for N1 and S1
    cowan.write_text("\n".join(r for r in rows if not r.startswith(("N1", "S1"))) + "\n")
    cfg = configure(BASIN / "config.toml", cowan=cowan)
    net = network_mod.load_network(cfg)
    shared = shared_mod.read_shared_inputs(cfg, net)
    serial = run(cfg, net, shared)
    assert len(serial) == 5 and all(o.result is not None for o in serial.values())
    return cfg, net, shared, serial


def run(cfg, net, shared, **kw):
    return {o.reach_id: o for o in dispatch.iterate(cfg, net, shared, **kw)}


def assert_same(got: dict, ref: dict):
    assert sorted(got) == sorted(ref)
    for rid, o in ref.items():
        g = got[rid]
        assert g.error is None   # NaN equals NaN here: assert_series_equal
        pd.testing.assert_series_equal(pd.Series(g.reach_row), pd.Series(o.reach_row))
        for name in TABLES:
            pd.testing.assert_frame_equal(getattr(g.result, name), getattr(o.result, name))
        assert [ln.wkb for ln in g.transect_lines] == [ln.wkb for ln in o.transect_lines]
        assert (g.thalweg_xy == o.thalweg_xy).all() and (g.offsets == o.offsets).all()


def test_dask_local_cluster_gives_the_serial_tables(basin):
    distributed = pytest.importorskip("dask.distributed")
    cfg, net, shared, serial = basin
    with distributed.LocalCluster(n_workers=2, processes=True, threads_per_worker=1,
                                  host="127.0.0.1", dashboard_address=None) as cluster:
        got = run(cfg.replace(scheduler=cluster.scheduler_address), net, shared)
    assert_same(got, serial)


def test_a_pool_of_two_gives_the_serial_tables_and_says_serial_would_be_faster(basin):
    cfg, net, shared, serial = basin
    notes = []
    got = run(cfg.replace(jobs=2), net, shared, note=notes.append)
    assert_same(got, serial)
    # the demo is ~200 transects: a pool cannot pay for its start, but --jobs 2 is obeyed
    assert len(notes) == 1 and "--jobs 1" in notes[0]


def test_a_subset_of_reaches_runs_only_those(basin):
    cfg, net, shared, serial = basin
    some = [r for r in net.reaches if r.reach_id in ("M2", "S1")]
    got = run(cfg, net, shared, reaches=some)
    assert_same(got, {k: serial[k] for k in ("M2", "S1")})


def test_jobs_0_chooses_serial_only_where_a_pool_cannot_pay():
    # arithmetic of dispatch.plan: serial time = length / spacing × PER_TRANSECT_S; a pool
    # of w saves serial × (1 − 1/w) and costs POOL_START_S
    def reaches(n, length):
        return [SimpleNamespace(status="ok", length_m=length) for _ in range(n)]

    cfg = SimpleNamespace(jobs=0, spacing=20.0)
    need = dispatch.POOL_START_S / dispatch.PER_TRANSECT_S / (1 - 1 / 2) * 20.0   # metres
    workers, why = dispatch.plan(cfg, reaches(10, 0.9 * need / 10), cores=2)
    assert workers == 1 and why.startswith("ran serially: about ")
    assert dispatch.plan(cfg, reaches(10, 1.1 * need / 10), cores=2) == (2, None)
    # one core, one reach, --jobs 1: serial without a word
    assert dispatch.plan(cfg, reaches(10, 10 * need), cores=1) == (1, None)
    assert dispatch.plan(cfg, reaches(1, 10 * need), cores=2) == (1, None)
    assert dispatch.plan(SimpleNamespace(jobs=1, spacing=20.0), reaches(10, need), cores=2) == (1, None)
    # --jobs 4 is obeyed (a worker per reach at most) even where it cannot pay
    assert dispatch.plan(SimpleNamespace(jobs=4, spacing=20.0), reaches(3, 1.0), cores=2)[0] == 3


def test_the_window_bounds_tasks_in_flight_and_builds_arguments_as_it_goes(basin, monkeypatch):
    cfg, net, shared, serial = basin
    counts = {"built": 0, "submitted": 0, "yielded": 0, "worst": 0, "worst_built": 0}
    lock = threading.Lock()

    class Counting(ThreadPoolExecutor):
        def submit(self, fn, *args):
            with lock:
                counts["submitted"] += 1
                counts["worst"] = max(counts["worst"], counts["submitted"] - counts["yielded"])
            return super().submit(fn, *args)

    class CountingShared(shared_mod.SharedInputs):
        def for_reach(self, reach):
            counts["built"] += 1
            counts["worst_built"] = max(counts["worst_built"], counts["built"] - counts["yielded"])
            return super().for_reach(reach)

    monkeypatch.setattr(dispatch, "pool", lambda workers: Counting(workers))
    monkeypatch.setattr(dispatch, "WINDOW_PER_WORKER", 1)
    counting = CountingShared(shared.flows, shared.observations, shared.cowan, shared.class_table)
    got = {}
    for out in dispatch.iterate(cfg.replace(jobs=2), net, counting):
        got[out.reach_id] = out
        counts["yielded"] += 1
        time.sleep(0.01)   # a slow consumer: the workers must not run ahead of the window
    assert_same(got, serial)
    assert counts["submitted"] == counts["built"] == 5
    # window = 1 × 2 workers; refilled before each result is handed on: 2 + 1 at most
    assert counts["worst"] <= 3 and counts["worst_built"] <= 3


def test_bounded_never_exceeds_its_window():
    started, finished, in_flight = [], [], []

    def submit(a):
        f = Future()
        f.set_result(a * 10)
        started.append(f)
        in_flight.append(len(started) - len(finished))

    def next_done():
        f = started[len(finished)]
        finished.append(f)
        return f

    built = []

    def args():
        for i in range(20):
            built.append(i)
            yield i

    out = []
    for r in dispatch.bounded(args(), submit, next_done, lambda: 4):
        assert len(built) - len(out) <= 4 + 1   # built lazily: at most a window ahead
        out.append(r)
    assert out == [10 * i for i in range(20)] and max(in_flight) == 4


def test_a_task_carries_only_its_reachs_rows(basin):
    cfg, net, shared, _ = basin
    by_id = {r.reach_id: r for r in net.reaches}
    m1, n1 = shared.for_reach(by_id["M1"]), shared.for_reach(by_id["N1"])
    assert set(m1.cowan) == {"M1"} and n1.cowan is None           # no Cowan terms: none sent
    assert set(m1.observations["reach_id"]) == {"M1"} and len(m1.observations) == 2
    assert len(n1.observations) == 0 and list(n1.observations.columns) == \
        list(shared.observations.columns)
    assert set(m1.flows) == {"q2", "q10", "q100"}
    # the whole tables are no longer in the task: its pickle is smaller than with them
    whole = pickle.dumps((shared.cowan, shared.observations, shared.flows))
    slim = pickle.dumps((n1.cowan, n1.observations, n1.flows))
    assert len(slim) < len(whole)


def test_an_unreachable_scheduler_is_an_input_error(basin):
    pytest.importorskip("dask.distributed")
    cfg, net, shared, _ = basin
    with pytest.raises(InputError, match="cannot reach the Dask scheduler"):
        run(cfg.replace(scheduler="tcp://127.0.0.1:9"), net, shared)


def test_an_open_raster_is_kept_per_thread_and_dropped_after_a_bad_read(basin):
    cfg, net, _, _ = basin
    a = task.opened(net.raster)
    assert task.opened(net.raster) is a                     # the same dataset, kept open
    with ThreadPoolExecutor(1) as ex:
        assert ex.submit(task.opened, net.raster).result() is not a   # GDAL: one per thread
        ex.submit(task.close_rasters).result()
    task.discard(net.raster)
    assert task.opened(net.raster) is not a                 # reopened after a discard
    task.close_rasters()
