"""Running the pool's tasks on a Dask distributed cluster (optional: ``pip install
'limitcase[dask]'``).

Inside ``with use_scheduler(address):`` every pool :func:`limitcase.workers.open_pool`
opens (the suite's, the mutation runner's, the audits') sends its tasks to the cluster at
``address`` (``tcp://host:8786``) instead of forked processes; ``local`` or ``local:N``
starts a cluster of N worker processes on the loopback address for the block and stops it
after. The numbers do not change: a task computes the same blocks from the same streams
wherever it runs, and the caller combines them in block order (invariant 2 of
DEVELOPERS.md).

What the forked workers inherit (module globals naming the run's checks, cases and
mutants) is pickled with cloudpickle and sent once to each worker: products loaded from
users' files go by value (the workers need not see the files), mutant classes too. The
workers need limitcase (same version) and its dependencies installed.

What keeps it fast (benchmarks/cluster_speedup.py; benchmarks/README.md has the figures):
:meth:`DaskPool.map` sends its tasks in a few dozen chunks per worker thread, not one Dask
task each; a local cluster's workers start with glibc malloc settings
(:data:`WORKER_MALLOC_ENV`) that keep freed block buffers for the next block;
:meth:`DaskPool.run` waits on its futures' callbacks, not by polling.
"""

from __future__ import annotations

import collections
import os
import pickle
import queue as queue_module
import time
from contextlib import contextmanager
from typing import Any, Callable, Iterable, Iterator, Sequence

from .errors import ParamError
from .settings import default_workers
from .workers import Lost, Task, WorkerLost, mark_worker, pop_backend, push_backend, split_task

__all__ = ["LOCAL_PREFIX", "DASK_ALLOWED_FAILURES", "DaskCluster", "DaskPool", "RunState", "CHUNKS_PER_THREAD", "chunked", "WORKER_MALLOC_ENV", "use_scheduler", "dask_available"]

LOCAL_PREFIX = "local"
"""``--scheduler local`` (all cores) or ``local:N``: a cluster of N worker processes on
this machine, on the loopback address, started for the run and stopped after it."""

DASK_ALLOWED_FAILURES = 3
"""How many times a local cluster's scheduler re-runs a task whose worker died before giving
it up (then the task is reported lost: :class:`~limitcase.workers.Lost` with reason
``"died"``). A remote scheduler uses its own ``distributed.scheduler.allowed-failures``."""

REGISTER_ATTEMPTS = 5
"""Tries at sending a run's state to the workers (a worker restarting may refuse it once)."""

WORKER_MALLOC_ENV = {"MALLOC_MMAP_THRESHOLD_": "33554432", "MALLOC_TRIM_THRESHOLD_": "268435456"}
"""glibc malloc settings of a local cluster's worker processes, set before they start.
Dask's default (``MALLOC_TRIM_THRESHOLD_=65536``) and glibc's in a worker thread (the
tasks run outside the process's main thread, in an arena of their own) hand every block's
numpy buffers (megabytes) back to the operating system when they are freed and fault them
in again for the next block; that page clearing cost the workers about as much CPU as the
pricing (measured: 25.5 CPU seconds a worker before, 12.6 after, same run).
Buffers up to 32 MiB (glibc's ceiling for this setting) now come from the heap, and up to
256 MiB of free heap per arena is kept for the next block. Remote workers: set the same
environment variables where they are started (README, "On a cluster")."""

CHUNKS_PER_THREAD = 32
""":meth:`DaskPool.map` cuts its tasks into this many chunks per worker thread: few enough
that the scheduler's cost per Dask task (milliseconds, paid in the client's process for a
local cluster) is small beside the work, many enough that a thread finished early takes the
next chunk and both end together."""

_STATE: dict[str, Any] = {"token": None, "tasks": 0}  # on a Dask worker: runs' states by token, tasks run

try:  # the base of worker plugins, when Dask is there (this module imports without it)
    from distributed.diagnostics.plugin import WorkerPlugin as _PluginBase
except ImportError:  # pragma: no cover - exercised without distributed
    _PluginBase = object


class RunState(_PluginBase):  # type: ignore[misc, valid-type]
    """What a run's tasks read (pickled module globals), given to every worker of the
    cluster as a worker plugin: a worker that starts later (the nanny replacing one that
    died) gets it too, so a re-run task finds it."""

    def __init__(self, token: str, state: bytes) -> None:
        self.token = token
        self.state = state
        self.name = f"limitcase-run-{token}"

    def setup(self, worker: Any = None) -> None:
        _STATE[self.token] = self.state

    def teardown(self, worker: Any = None) -> None:
        _STATE.pop(self.token, None)
        if _STATE["token"] == self.token:
            _STATE["token"] = None


def _remote_call(token: str, task: bytes) -> Any:
    """Run on a Dask worker: install the run's state (module globals the local workers
    would inherit by forking) when another run's is installed, then the task."""
    if _STATE["token"] != token:
        import importlib

        if token not in _STATE:
            raise RuntimeError("this Dask worker has not received the run's state (its plugin); "
                               "is it running the same limitcase version as the client?")
        values = pickle.loads(_STATE[token])
        for (module, attr), value in values.items():
            setattr(importlib.import_module(module), attr, value)
        _STATE["token"] = token
    mark_worker()  # tasks inside run in this process: no pools of pools
    _STATE["tasks"] += 1
    fn, args = pickle.loads(task)
    return fn(*args)


def _run_chunk(fn: Callable, chunk: Sequence[Any]) -> list[Any]:
    """Run on a Dask worker: ``fn(t)`` for each task of one chunk of :meth:`DaskPool.map`."""
    return [fn(t) for t in chunk]


def chunked(tasks: Sequence[Any], chunks: int) -> list[list[Any]]:
    """``tasks`` cut into at most ``chunks`` contiguous runs of sizes differing by at most
    one, in order (none empty)."""
    n = len(tasks)
    k = max(1, min(int(chunks), n))
    size, extra = divmod(n, k)
    out, start = [], 0
    for i in range(k):
        stop = start + size + (1 if i < extra else 0)
        if stop > start:
            out.append(list(tasks[start:stop]))
        start = stop
    return out


def _pickle_state(inherit: Sequence[tuple[str, str]]) -> bytes:
    """The module globals named in ``inherit`` as one cloudpickle payload. Modules the
    loader imported from files (``limitcase_user_*``) go by value: the workers cannot
    import them; classes built at run time (mutants) go by value anyway."""
    import importlib
    import sys

    import cloudpickle

    for name, module in list(sys.modules.items()):
        if name.startswith("limitcase_user_") and module is not None:
            try:
                cloudpickle.register_pickle_by_value(module)
            except ValueError:  # pragma: no cover - already registered
                pass
    values = {(m, a): getattr(importlib.import_module(m), a) for m, a in inherit}
    return cloudpickle.dumps(values)


class DaskCluster:
    """A connection to a Dask distributed scheduler (``tcp://host:port``) or a local
    cluster on the loopback address (``local`` / ``local:N``), opened on first use and
    closed at the end of :func:`use_scheduler`."""

    def __init__(self, address: str) -> None:
        self.address = str(address).strip()
        self._client: Any = None
        self._cluster: Any = None

    @property
    def client(self) -> Any:
        if self._client is None:
            self._client, self._cluster = _connect(self.address)
        return self._client

    def pool(self, inherit: Sequence[tuple[str, str]] = (), task_timeout: float | None = None) -> "DaskPool":
        """A pool on this cluster (what :func:`limitcase.workers.open_pool` returns)."""
        return DaskPool(self, inherit, task_timeout)

    def close(self) -> None:
        if self._client is not None:
            self._client.close()
            self._client = None
        if self._cluster is not None:
            self._cluster.close()
            self._cluster = None


def _connect(address: str) -> tuple[Any, Any]:
    try:
        from distributed import Client, LocalCluster
    except ImportError as exc:
        raise ParamError(f"--scheduler {address}: Dask's distributed cannot be imported ({exc}); "
                         "pip install 'limitcase[dask]' (or pip install 'dask[distributed]')") from None
    n_local = _local_workers(address)
    if n_local is not None:
        import dask

        # each nanny takes the variables to set before spawning its worker (now and when it
        # replaces one that died) from its config when it is made, an environment variable
        # of this process taking precedence, and writes them into this process's
        # environment (an earlier cluster's MALLOC_TRIM_THRESHOLD_=65536 would win): ours go
        # in both for the start, then this process's environment is put back
        environ = dict(dask.config.get("distributed.nanny.pre-spawn-environ", default=None) or {})
        environ.update(WORKER_MALLOC_ENV)
        saved = {k: os.environ.get(k) for k in WORKER_MALLOC_ENV}
        os.environ.update(WORKER_MALLOC_ENV)
        try:
            with dask.config.set({"distributed.scheduler.allowed-failures": DASK_ALLOWED_FAILURES,
                                  "distributed.nanny.pre-spawn-environ": environ,
                                  # the workers' sampling profiler (a thread reading the task's
                                  # stack every 10 ms) cost them about 5% of their CPU in one measurement
                                  "distributed.worker.profile.enabled": False}):
                cluster = LocalCluster(n_workers=n_local, threads_per_worker=1, processes=True, host="127.0.0.1",
                                       dashboard_address="127.0.0.1:0", silence_logs=40)
        finally:
            for k, v in saved.items():
                if v is None:
                    os.environ.pop(k, None)
                else:
                    os.environ[k] = v
        return Client(cluster, set_as_default=False), cluster
    try:
        return Client(address, timeout=30, set_as_default=False), None
    except (OSError, TimeoutError, ValueError) as exc:
        raise ParamError(f"--scheduler {address}: cannot reach a Dask scheduler there ({exc})") from exc


def _local_workers(address: str) -> int | None:
    """N of ``local:N`` (``local``: every core), ``None`` for another address; a bad N is
    bad input, named."""
    if address != LOCAL_PREFIX and not address.startswith(LOCAL_PREFIX + ":"):
        return None
    text = address[len(LOCAL_PREFIX) + 1:] or str(default_workers())
    if not text.isdigit() or int(text) < 1:
        raise ParamError(f"--scheduler {address}: expected local or local:N with N >= 1 worker processes")
    return int(text)


@contextmanager
def use_scheduler(address: str | None) -> Iterator[DaskCluster | None]:
    """Within the block, pools opened by :func:`open_pool` run their tasks on the Dask
    cluster at ``address`` (``None``: the local process pool, as without the block)."""
    if not address:
        yield None
        return
    _local_workers(address)  # a bad local:N fails here, before any work
    backend = DaskCluster(address)
    push_backend(backend)
    try:
        yield backend
    finally:
        pop_backend(backend)
        backend.close()


def dask_available() -> bool:
    """Whether ``distributed`` can be imported here."""
    try:
        import distributed  # noqa: F401
    except ImportError:
        return False
    return True


class DaskPool:
    """The pool's interface on a Dask cluster. Tasks are pickled (cloudpickle) and run on
    the cluster's workers; the module globals that forked workers would inherit are named
    in ``inherit`` and shipped once per worker. A worker that dies has its task re-run
    elsewhere by the scheduler (up to :data:`DASK_ALLOWED_FAILURES` times); after that
    the task is lost: :class:`WorkerLost`, or ``on_lost`` when given. A task past its time
    limit is given up (``on_lost``, reason ``"timeout"``); its worker finishes it unseen."""

    remote = True

    def __init__(self, backend: DaskCluster, inherit: Sequence[tuple[str, str]] = (),
                 task_timeout: float | None = None) -> None:
        import uuid

        self.client = backend.client
        self.task_timeout = task_timeout
        info = self.client.scheduler_info()
        self.workers = max(1, sum(int(w.get("nthreads", 1)) for w in info.get("workers", {}).values()))
        self.token = uuid.uuid4().hex
        self._plugin = RunState(self.token, _pickle_state(inherit))
        for attempt in range(REGISTER_ATTEMPTS):
            try:  # a worker restarting (its nanny replacing it) may drop the connection once
                self.client.register_plugin(self._plugin, name=self._plugin.name)
                break
            except OSError:  # distributed's CommClosedError is an OSError
                if attempt == REGISTER_ATTEMPTS - 1:
                    raise
                time.sleep(1.0)

    def _submit(self, fn: Callable, args: tuple) -> Any:
        import cloudpickle

        return self.client.submit(_remote_call, self.token, cloudpickle.dumps((fn, tuple(args))), pure=False)

    def map(self, fn: Callable, tasks: Iterable) -> Iterator[Any]:
        """``fn(t)`` for each task, in task order. The tasks go in :data:`CHUNKS_PER_THREAD`
        contiguous chunks per worker thread, all submitted at once (one Dask task per
        chunk: the scheduler's cost per task is paid a few dozen times, not once per
        case); each chunk's results are yielded as soon as it and those before it are in."""
        tasks = list(tasks)
        futures = [self._submit(_run_chunk, (fn, chunk)) for chunk in chunked(tasks, self.workers * CHUNKS_PER_THREAD)]
        try:
            for f in futures:
                yield from self._value(f)
        finally:
            self.client.cancel([f for f in futures if not f.done()])

    def _value(self, future: Any) -> Any:
        from distributed import KilledWorker

        try:
            return future.result()
        except KilledWorker as exc:
            raise WorkerLost(f"a task's Dask worker died each time the scheduler ran it ({exc}); "
                             "re-run without --scheduler to see the error in this process") from None

    def run(self, initial: Sequence[Task], on_done: Callable[[Any], Sequence[Task]],
            on_lost: Callable[[Lost], Sequence[Task]] | None = None) -> None:
        """As :meth:`limitcase.workers.ForkedPool.run`: results go to ``on_done`` as they come, which may add tasks."""
        from distributed import KilledWorker

        live: dict[Any, tuple[Callable, tuple, float | None, float]] = {}
        queue: collections.deque = collections.deque()
        ready: queue_module.SimpleQueue = queue_module.SimpleQueue()  # futures done, put by their callbacks

        def put(tasks: Sequence[Task]) -> None:
            queue.extend(tasks)

        def fill() -> None:
            # one task per worker thread in flight, as the forked pool: a time limit then
            # counts from (about) the start of the task, not from its wait in a queue
            while queue and len(live) < self.workers:
                fn, args, limit = split_task(queue.popleft())
                limit = limit if limit is not None else self.task_timeout
                future = self._submit(fn, args)
                live[future] = (fn, args, limit, time.monotonic())
                future.add_done_callback(ready.put)

        try:
            put(initial)
            fill()
            while live:
                # wait for a finished task (its future's callback puts it here) or the next
                # time limit, whichever comes first: no polling
                deadlines = [t0 + limit for (_, _, limit, t0) in live.values() if limit is not None]
                wait_for = max(0.0, min(deadlines) - time.monotonic()) if deadlines else None
                try:
                    finished = [ready.get(timeout=wait_for)]
                except queue_module.Empty:
                    finished = []
                while True:
                    try:
                        finished.append(ready.get_nowait())
                    except queue_module.Empty:
                        break
                for f in finished:
                    if f not in live:  # given up (time limit) before it finished
                        continue
                    fn, args, limit, t0 = live.pop(f)
                    try:
                        value = f.result()
                    except KilledWorker as exc:
                        detail = (f"its Dask worker died each time the scheduler ran it (re-run up to the "
                                  f"scheduler's allowed-failures limit): {exc}")
                        if on_lost is None:
                            raise WorkerLost(detail) from None
                        put(on_lost(Lost(fn, args, "died", time.monotonic() - t0, detail)))
                        continue
                    put(on_done(value))
                now = time.monotonic()
                for f, (fn, args, limit, t0) in list(live.items()):
                    if limit is not None and now - t0 >= limit and not f.done():
                        live.pop(f)
                        f.cancel()
                        lost = Lost(fn, args, "timeout", now - t0,
                                    f"given up after {now - t0:.1f} s, past the time limit of {limit:g} s")
                        if on_lost is None:
                            raise WorkerLost(lost.detail)
                        put(on_lost(lost))
                fill()
        except BaseException:
            self.client.cancel(list(live))
            raise

    def close(self) -> None:
        try:
            self.client.unregister_worker_plugin(self._plugin.name)
        except Exception:  # noqa: BLE001 - a cluster already gone has nothing to forget
            pass

    def __enter__(self) -> "DaskPool":
        return self

    def __exit__(self, *exc: Any) -> None:
        self.close()
