"""The shared worker pool: Ctrl-C ends a run within seconds with no traceback and no worker
left behind; a task past its time limit is stopped and reported, the run goes on; a worker
that dies is reported, never waited for; results come back in task order."""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import time

import pytest

from limitcase.mutate import run_mutation
from limitcase.workers import ForkedPool, InlinePool, WorkerLost, open_pool

from .stalling_products import StallingCall


def _square(x: int) -> int:
    return x * x


def _sleep_then(x: float) -> float:
    time.sleep(x)
    return x


def _die(code: int) -> None:
    os._exit(code)


def _fail(x: int) -> None:
    raise ValueError(f"bad task {x}")


def test_map_keeps_task_order_on_forked_workers():
    with open_pool(2, 10) as pool:
        assert isinstance(pool, ForkedPool)
        assert list(pool.map(_square, range(10))) == [x * x for x in range(10)]


def test_an_error_in_a_task_is_raised_here_with_the_worker_traceback():
    pool = open_pool(2, 3)
    try:
        with pytest.raises(ValueError, match="bad task 1") as info:
            list(pool.map(_fail, [1]))
        assert any("in a worker process" in n for n in getattr(info.value, "__notes__", []))
    finally:
        pool.close()


def test_a_dead_worker_stops_a_map_with_an_error_naming_it():
    pool = open_pool(2, 2)
    try:
        with pytest.raises(WorkerLost, match=r"worker process died \(exit code 3\)"):
            list(pool.map(_die, [3, 3]))
    finally:
        pool.close()


@pytest.mark.parametrize("workers", [1, 2])
def test_a_task_past_its_time_limit_is_reported_and_the_run_goes_on(workers):
    pool = open_pool(workers, 3)
    assert isinstance(pool, InlinePool if workers == 1 else ForkedPool)
    done, lost = [], []
    t0 = time.monotonic()
    pool.run([(_sleep_then, (30.0,), 0.5), (_sleep_then, (0.01,)), (_square, (3,), 5.0)],
             on_done=lambda r: (done.append(r), [])[1],
             on_lost=lambda lo: (lost.append(lo), [(_square, (4,))])[1])
    pool.close()
    assert time.monotonic() - t0 < 10.0
    assert sorted(done) == [0.01, 9, 16]  # the lost task's follow-up ran too
    assert [(lo.reason, lo.args) for lo in lost] == [("timeout", (30.0,))]
    assert "time limit of 0.5 s" in lost[0].detail


@pytest.mark.parametrize("workers", [1, 2])
def test_a_stalling_mutant_is_reported_as_timeout(workers):
    """The mutant ``pause < 0`` -> ``pause <= 0`` sleeps for two minutes; with a 2 s limit it
    is stopped, reported as ``timeout`` (counted as detected, with the crashes, and apart from
    the catches by a failing check), and every other mutant is judged as usual."""
    t0 = time.monotonic()
    report = run_mutation([StallingCall], paths=2000, quick_paths=2000, equivalence_paths=2048,
                          workers=workers, time_limit=2.0)
    assert time.monotonic() - t0 < 60.0
    stalled = [r for r in report.results if r.status == "timeout"]
    assert len(stalled) == 1 and "self.pause <= 0.0" in stalled[0].diff
    assert "time limit of 2 s" in stalled[0].message and stalled[0].detected
    c, catch = report.counts(), report.catch()
    assert catch["timeout"] == 1 and c["error"] == catch["caught_by_error"] + 1
    assert catch["counted"] == c["caught"] + c["error"] + c["survived"]
    assert catch["check_catch_rate"] == c["caught"] / catch["counted"]
    others = [r for r in report.results if r.status != "timeout"]
    assert any(r.status == "caught" for r in others)  # e.g. the strike's sign flipped
    assert report.false_alarms == []
    doc = report.to_dict()
    assert doc["catch"]["timeout"] == 1 and doc["counts"]["timeout"] == 1
    assert doc["products"][0]["timeout"] == 1


def _children(pid: int) -> list[int]:
    try:
        with open(f"/proc/{pid}/task/{pid}/children") as f:
            return [int(x) for x in f.read().split()]
    except OSError:
        return []


def _interrupt_once(delay: float) -> tuple[float, str, int]:
    """Start ``limitcase check`` on the catalogue in a session of its own; once its worker
    processes are up, wait ``delay`` seconds more and send SIGINT to the whole process
    group (as a terminal's Ctrl-C does); return the seconds it took to exit, its stderr and
    its exit code."""
    proc = subprocess.Popen(
        [sys.executable, "-c", "from limitcase.cli import main; main()", "check", "--workers", "2"],
        stdout=subprocess.PIPE, stderr=subprocess.PIPE, start_new_session=True, text=True,
    )
    t_start = time.monotonic()
    while not _children(proc.pid) and proc.poll() is None and time.monotonic() - t_start < 60:
        time.sleep(0.05)
    time.sleep(delay)
    if proc.poll() is not None:
        pytest.fail(f"the run ended before the interrupt: {proc.stderr.read()}")
    os.killpg(proc.pid, signal.SIGINT)
    t0 = time.monotonic()
    try:
        _, err = proc.communicate(timeout=15.0)
    except subprocess.TimeoutExpired:
        os.killpg(proc.pid, signal.SIGKILL)
        proc.communicate()
        pytest.fail(f"'limitcase check' still running 15 s after Ctrl-C (delay {delay} s)")
    seconds = time.monotonic() - t0
    time.sleep(0.2)
    try:
        os.killpg(proc.pid, 0)
        left = True
    except ProcessLookupError:
        left = False
    if left:
        os.killpg(proc.pid, signal.SIGKILL)
        pytest.fail("worker processes were left running after Ctrl-C")
    return seconds, err, proc.returncode


def test_ctrl_c_ends_a_check_run_within_seconds_without_traceback():
    """Issue: Ctrl-C during ``check`` hung in 5 of 12 tries until the workers were killed by
    hand. Interrupted at several moments once the workers are up (set-ups, blocks), the run
    ends within a few seconds every time, prints no traceback and leaves no worker behind."""
    for delay in (0.0, 1.0, 2.5):
        seconds, err, code = _interrupt_once(delay)
        assert seconds < 5.0, (delay, seconds)
        assert "Traceback" not in err, err
        assert code != 0


@pytest.mark.parametrize("workers", [1, 2])
def test_a_busy_looping_mutant_is_reported_as_timeout_and_the_run_goes_on(workers):
    """The mutant ``pause < 0`` -> ``pause <= 0`` spins in a Python loop that never ends (no
    sleep, the CPU busy): with a 2 s limit it is stopped and reported as ``timeout``, and
    every other mutant is judged."""
    from .stalling_products import LoopingCall

    t0 = time.monotonic()
    report = run_mutation([LoopingCall], paths=2000, quick_paths=2000, equivalence_paths=2048,
                          workers=workers, time_limit=2.0)
    assert time.monotonic() - t0 < 60.0
    looping = [r for r in report.results if r.status == "timeout"]
    assert len(looping) == 1 and "self.pause <= 0.0" in looping[0].diff, [r.diff for r in report.results]
    assert "time limit of 2 s" in looping[0].message
    others = [r for r in report.results if r.status != "timeout"]
    assert others and all(r.status in ("caught", "error", "survived", "equivalent") for r in others)
    assert any(r.status == "caught" for r in others)
