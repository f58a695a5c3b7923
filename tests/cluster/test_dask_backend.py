"""The Dask backend (limitcase.cluster): a local cluster on the loopback address with two
worker processes gives the numbers of one process, and a worker that dies is recovered
(its task re-run) or reported, never silently dropped.

Skipped when ``distributed`` is not installed (``pip install 'limitcase[dask]'``)."""

from __future__ import annotations

import json
import os
import signal
import sys
import threading
import time
from pathlib import Path

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

distributed = pytest.importorskip(
    "distributed", reason="the Dask backend needs 'distributed' (pip install 'limitcase[dask]')")

import cloudpickle  # noqa: E402  (a dependency of distributed)
import dask  # noqa: E402
from click.testing import CliRunner  # noqa: E402

from limitcase import BlackScholes  # noqa: E402
from limitcase.audits import run_audits  # noqa: E402
from limitcase.cli import main  # noqa: E402
from limitcase.cluster import CHUNKS_PER_THREAD, WORKER_MALLOC_ENV, DaskPool, chunked, use_scheduler  # noqa: E402
from limitcase.loader import load_products  # noqa: E402
from limitcase.models.merton import Merton  # noqa: E402
from limitcase.reduce import checks_for  # noqa: E402
from limitcase.suite import run_checks  # noqa: E402
from limitcase.workers import Lost, WorkerLost, open_pool  # noqa: E402

ROOT = Path(__file__).resolve().parents[2]

# the helpers below run on the workers, which cannot import this test module: send them by value
cloudpickle.register_pickle_by_value(sys.modules[__name__])


def _local_cluster(allowed_failures: int = 2):
    """Two worker processes, one thread each, on 127.0.0.1; a task may lose its worker
    ``allowed_failures`` times and is re-run, the next time it is given up (KilledWorker)."""
    with dask.config.set({"distributed.scheduler.allowed-failures": allowed_failures}):
        cluster = distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True, host="127.0.0.1",
                                           dashboard_address="127.0.0.1:0", silence_logs=50)
    assert cluster.scheduler_address.startswith("tcp://127.0.0.1:")
    return cluster


@pytest.fixture(scope="module")
def address():
    cluster = _local_cluster()
    try:
        yield cluster.scheduler_address
    finally:
        cluster.close()


@pytest.fixture()
def own_address():
    """A cluster of its own, for a test that kills workers."""
    cluster = _local_cluster()
    try:
        yield cluster.scheduler_address
    finally:
        cluster.close()


def _catalogue_checks(families: tuple[str, ...]):
    products = [p for p in load_products() if p.__module__.split(".")[-1] in families]
    return [c for p in products for c in checks_for(p)]


def _numbers(result) -> list[dict]:
    return [o.to_dict() for o in result.outcomes]


def test_check_on_two_dask_workers_gives_the_numbers_of_one_process(address):
    checks = _catalogue_checks(("vanilla", "digitals"))
    assert len(checks) > 10
    one = run_checks(checks, paths=3000, seed=11, workers=1)
    with use_scheduler(address) as backend:
        spread = run_checks(checks, paths=3000, seed=11, workers=1)
        ran_here = backend.client.run(lambda: __import__("limitcase.cluster").cluster._STATE["tasks"])
    assert _numbers(spread) == _numbers(one)
    assert len(ran_here) == 2 and all(n > 0 for n in ran_here.values())  # both workers took tasks


def test_products_from_a_users_file_are_sent_by_value(address):
    products = load_products([ROOT / "examples" / "capped_call.py"])
    checks = [c for p in products for c in checks_for(p)]
    assert checks and all(c.product for c in checks)
    one = run_checks(checks, paths=5000, seed=3, workers=1)
    with use_scheduler(address):
        spread = run_checks(checks, paths=5000, seed=3, workers=1)
    assert _numbers(spread) == _numbers(one)


def test_audits_spread_over_the_models_give_the_numbers_of_one_process(address):
    models = {"bs": BlackScholes(), "merton": Merton()}
    one = run_audits(models, ("martingale", "seeds"), paths=4000, seed=5)
    with use_scheduler(address):
        spread = run_audits(models, ("martingale", "seeds"), paths=4000, seed=5)
    assert _numbers(spread) == _numbers(one)


def test_the_check_command_takes_a_scheduler_address(address, tmp_path):
    args = ["check", str(ROOT / "payoffs" / "vanilla.py"), "--paths", "3000", "--workers", "1"]
    r1 = CliRunner().invoke(main, args + ["--json", str(tmp_path / "one.json")])
    r2 = CliRunner().invoke(main, args + ["--json", str(tmp_path / "dask.json"), "--scheduler", address])
    assert r1.exit_code == r2.exit_code == 0, r2.output
    one = json.loads((tmp_path / "one.json").read_text())
    spread = json.loads((tmp_path / "dask.json").read_text())
    assert one["cases"] and one["cases"] == spread["cases"]


def test_a_bad_scheduler_is_bad_input_named():
    r = CliRunner().invoke(main, ["check", str(ROOT / "payoffs" / "vanilla.py"), "--scheduler", "local:zero"])
    assert r.exit_code == 2
    assert "local:zero" in r.output


# -- dead workers ---------------------------------------------------------------------------


def _die_once(marker: str) -> int:
    """Kill this worker the first time; answer the second (on the worker that replaced it)."""
    if not os.path.exists(marker):
        Path(marker).write_text("died once")
        os.kill(os.getpid(), signal.SIGKILL)
    return 42


def _die_always() -> int:
    os.kill(os.getpid(), signal.SIGKILL)
    return 0  # never reached


def test_a_task_whose_worker_dies_is_run_again(address, tmp_path):
    with use_scheduler(address):
        pool = open_pool(2, 2)
        assert isinstance(pool, DaskPool)
        try:
            assert list(pool.map(_die_once, [str(tmp_path / "marker")])) == [42]
        finally:
            pool.close()
    assert (tmp_path / "marker").exists()


def test_a_task_that_always_kills_its_worker_is_reported():
    cluster = _local_cluster(allowed_failures=0)  # given up at its first lost worker
    with cluster, use_scheduler(cluster.scheduler_address):
        pool = open_pool(2, 2)
        lost: list[Lost] = []
        done: list[int] = []
        try:
            pool.run([(_die_always, ()), (abs, (-7,))], lambda v: done.append(v) or [],
                     lambda x: lost.append(x) or [])
            with pytest.raises(WorkerLost):
                list(pool.map(lambda _: _die_always(), [0, 1]))
        finally:
            pool.close()
    assert done == [7]
    assert len(lost) == 1 and lost[0].reason == "died" and lost[0].fn is _die_always
    assert "died" in lost[0].detail


def test_a_worker_killed_during_a_check_run_loses_no_block(own_address):
    checks = _catalogue_checks(("asians",))
    one = run_checks(checks, paths=12000, seed=7, workers=1)
    with use_scheduler(own_address) as backend:
        pids = list(backend.client.run(os.getpid).values())

        def kill_one() -> None:
            time.sleep(1.0)
            os.kill(pids[0], signal.SIGKILL)

        killer = threading.Thread(target=kill_one)
        killer.start()
        spread = run_checks(checks, paths=12000, seed=7, workers=1)
        killer.join()
    assert _numbers(spread) == _numbers(one)


# -- what makes it fast ------------------------------------------------------------------------


@settings(max_examples=200, deadline=None)
@given(st.integers(0, 300), st.integers(1, 80))
def test_chunks_are_the_tasks_in_order_in_near_equal_runs(n, k):
    tasks = list(range(n))
    chunks = chunked(tasks, k)
    assert [t for c in chunks for t in c] == tasks
    assert len(chunks) == min(n, k)
    assert all(chunks) and (not chunks or max(map(len, chunks)) - min(map(len, chunks)) <= 1)


def test_a_local_cluster_sends_few_dask_tasks_and_keeps_freed_memory():
    """``local:2``: the workers start with the malloc settings (their buffers are not handed
    back to the system after every block), and a map of 300 tasks is a few Dask tasks per
    worker thread, its results in task order."""
    with use_scheduler("local:2") as backend:
        env = backend.client.run(lambda: {k: os.environ.get(k) for k in WORKER_MALLOC_ENV})
        before = sum(backend.client.run(lambda: __import__("limitcase.cluster").cluster._STATE["tasks"]).values())
        pool = open_pool(2, 300)
        try:
            assert list(pool.map(abs, range(-300, 0))) == list(range(300, 0, -1))
        finally:
            pool.close()
        after = sum(backend.client.run(lambda: __import__("limitcase.cluster").cluster._STATE["tasks"]).values())
    assert len(env) == 2 and all(e == WORKER_MALLOC_ENV for e in env.values())
    assert after - before == 2 * CHUNKS_PER_THREAD


def _sleep_then(seconds: float, value: int) -> int:
    time.sleep(seconds)
    return value


def test_a_task_past_its_time_limit_is_given_up_and_the_rest_go_on(address):
    with use_scheduler(address):
        pool = open_pool(2, 2)
        lost: list[Lost] = []
        done: list[int] = []
        t0 = time.monotonic()
        try:
            def on_done(v: int) -> list:  # a result may add a task
                done.append(v)
                return [(abs, (-8,))] if v == 7 else []

            pool.run([(_sleep_then, (4.0, 1), 0.5), (abs, (-7,))], on_done, lambda x: lost.append(x) or [])
        finally:
            pool.close()
        waited = time.monotonic() - t0
    assert sorted(done) == [7, 8]
    assert len(lost) == 1 and lost[0].reason == "timeout" and lost[0].fn is _sleep_then
    assert waited < 4.0  # given up at its limit, not waited for
