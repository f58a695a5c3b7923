"""The one pool of worker processes every command shares (``check``, ``report``, ``mutate``).

Why a pool of our own. The workers are *forked*, so they inherit what the parent has
loaded: products defined in the user's own files and mutant classes built at run time,
which cannot be pickled. Each worker has its own pipe and runs one task at a time, so the
parent always knows which task a worker holds. That gives three things a stock executor
does not:

- **Ctrl-C ends a run within moments.** Workers ignore SIGINT (the terminal sends it to
  the whole process group; only the parent acts on it). On ``KeyboardInterrupt`` the
  parent drops the queued tasks, terminates every worker (SIGTERM, then SIGKILL after a
  grace period) and re-raises: no hang on a half-shut pool, no worker traceback.
- **A per-task time limit.** A task that outlasts its limit has its worker terminated and
  replaced; the caller is told (``on_lost``) and the run goes on.
- **A dead worker is noticed.** A worker that dies (killed, out of memory) is seen through
  its process sentinel; the run stops with an error naming it (or, with ``on_lost``, that
  task is reported lost and a fresh worker takes the next one), never waits for ever.

Where ``fork`` is not available, or inside a worker (no pools of pools), or for one worker,
the work runs in this process (:class:`InlinePool`, same results; a :class:`RuntimeWarning`
says so when more workers were asked for). The inline pool enforces the time limit with
``SIGALRM`` when it runs in the main thread of a POSIX process.
"""

from __future__ import annotations

import collections
import multiprocessing
import pickle
import signal
import threading
import time
import traceback
import warnings
from contextlib import contextmanager
from dataclasses import dataclass
from multiprocessing.connection import wait as wait_ready
from typing import Any, Callable, Iterable, Iterator, Sequence

from .settings import default_workers

__all__ = [
    "Lost",
    "Task",
    "TaskTimeout",
    "WorkerLost",
    "ForkedPool",
    "InlinePool",
    "open_pool",
    "push_backend",
    "pop_backend",
    "active_backend",
    "split_task",
    "mark_worker",
    "default_workers",
    "in_worker",
]

GRACE_SECONDS = 2.0
"""How long a terminated worker gets to exit before it is killed."""

Task = tuple  # (fn, args) or (fn, args, time_limit_seconds)


class WorkerLost(RuntimeError):
    """A worker died or overran its time limit and nobody asked to be told (``on_lost``)."""


class TaskTimeout(BaseException):
    """Raised inside a task run in this process when its time limit passes.

    A ``BaseException``, so a task's own ``except Exception`` (a check run that turns any
    error into an error row) does not swallow the limit."""


@dataclass(frozen=True)
class Lost:
    """A task whose result will never come: ``reason`` is ``"timeout"`` or ``"died"``;
    ``seconds`` the wall time it had run; ``detail`` a sentence for the report."""

    fn: Callable
    args: tuple
    reason: str
    seconds: float
    detail: str


_IN_WORKER = False


def _mark_worker() -> None:
    global _IN_WORKER
    _IN_WORKER = True


def in_worker() -> bool:
    """Whether this process is one of the pool's workers (or a daemon process)."""
    return _IN_WORKER or multiprocessing.current_process().daemon


def _split(task: Task) -> tuple[Callable, tuple, float | None]:
    if len(task) == 3:
        return task[0], tuple(task[1]), task[2]
    return task[0], tuple(task[1]), None


# ----------------------------------------------------------------------------------------
# in this process


@contextmanager
def _alarm(seconds: float | None) -> Iterator[None]:
    """Raise :class:`TaskTimeout` in this thread after ``seconds`` (when possible)."""
    usable = (seconds is not None and seconds > 0 and hasattr(signal, "setitimer")
              and threading.current_thread() is threading.main_thread())
    if not usable:
        yield
        return

    def ring(signum: int, frame: Any) -> None:
        raise TaskTimeout(f"the task ran past its time limit of {seconds:g} s")

    old = signal.signal(signal.SIGALRM, ring)
    signal.setitimer(signal.ITIMER_REAL, float(seconds))  # type: ignore[arg-type]
    try:
        yield
    finally:
        signal.setitimer(signal.ITIMER_REAL, 0.0)
        signal.signal(signal.SIGALRM, old)


class InlinePool:
    """Runs every task in this process, in order."""

    workers = 1

    def __init__(self, task_timeout: float | None = None) -> None:
        self.task_timeout = task_timeout

    def map(self, fn: Callable, tasks: Iterable) -> Iterator[Any]:
        """``fn(t)`` for each task, lazily, in order."""
        return (fn(t) for t in tasks)

    def run(self, initial: Sequence[Task], on_done: Callable[[Any], Sequence[Task]],
            on_lost: Callable[[Lost], Sequence[Task]] | None = None) -> None:
        """Run ``initial`` tasks; each result goes to ``on_done``, which returns further tasks."""
        queue = collections.deque(initial)
        while queue:
            fn, args, limit = _split(queue.popleft())
            limit = limit if limit is not None else self.task_timeout
            t0 = time.monotonic()
            try:
                with _alarm(limit):
                    result = fn(*args)
            except TaskTimeout as exc:
                lost = Lost(fn, args, "timeout", time.monotonic() - t0, str(exc))
                if on_lost is None:
                    raise WorkerLost(lost.detail) from None
                queue.extend(on_lost(lost))
                continue
            queue.extend(on_done(result))

    def close(self) -> None:
        pass

    def __enter__(self) -> "InlinePool":
        return self

    def __exit__(self, *exc: Any) -> None:
        self.close()


# ----------------------------------------------------------------------------------------
# forked workers


def _worker_main(conn: Any) -> None:
    """A worker's loop: receive ``(tid, fn, args)``, send ``(tid, ok, value)`` back."""
    signal.signal(signal.SIGINT, signal.SIG_IGN)  # the parent handles Ctrl-C
    if hasattr(signal, "pthread_sigmask"):
        signal.pthread_sigmask(signal.SIG_UNBLOCK, {signal.SIGINT})
    _mark_worker()
    while True:
        try:
            msg = conn.recv()
        except (EOFError, OSError, KeyboardInterrupt):
            return
        if msg is None:
            return
        tid, fn, args = msg
        try:
            reply = (tid, True, fn(*args))
        except BaseException as exc:  # sent back and raised in the parent
            text = traceback.format_exc()
            try:
                pickle.dumps(exc)
                err: BaseException = exc
            except Exception:
                err = RuntimeError(f"{type(exc).__name__}: {exc}")
            reply = (tid, False, (err, text))
        try:
            conn.send(reply)
        except (EOFError, OSError, BrokenPipeError):
            return
        except Exception as exc:  # the result cannot be pickled
            conn.send((tid, False, (RuntimeError(f"the task's result cannot be sent back: {exc}"), "")))


@contextmanager
def _sigint_held() -> Iterator[None]:
    """Hold SIGINT back around a fork: the child starts with it blocked (and ignores it
    before unblocking); a Ctrl-C that arrives meanwhile reaches the parent just after,
    instead of being lost or reaching a half-started worker."""
    if not hasattr(signal, "pthread_sigmask"):  # pragma: no cover - not POSIX
        yield
        return
    signal.pthread_sigmask(signal.SIG_BLOCK, {signal.SIGINT})
    try:
        yield
    finally:
        signal.pthread_sigmask(signal.SIG_UNBLOCK, {signal.SIGINT})


class _Worker:
    def __init__(self, ctx: Any) -> None:
        self.conn, child = ctx.Pipe(duplex=True)
        self.proc = ctx.Process(target=_worker_main, args=(child,), daemon=True)
        with _sigint_held():
            self.proc.start()
        child.close()
        self.task: tuple[int, Callable, tuple, float | None] | None = None
        self.started = 0.0

    def give(self, tid: int, fn: Callable, args: tuple, limit: float | None) -> None:
        self.task = (tid, fn, args, limit)
        self.started = time.monotonic()
        self.conn.send((tid, fn, args))

    def stop(self, grace: float = GRACE_SECONDS) -> None:
        """Terminate now (SIGTERM, SIGKILL after ``grace`` seconds)."""
        if self.proc.is_alive():
            self.proc.terminate()
            self.proc.join(grace)
            if self.proc.is_alive():
                self.proc.kill()
                self.proc.join(grace)
        self.conn.close()

    def retire(self) -> None:
        """Ask an idle worker to finish, then make sure it did."""
        try:
            self.conn.send(None)
        except (OSError, ValueError):
            pass
        self.proc.join(GRACE_SECONDS)
        self.stop()


class ForkedPool:
    """``workers`` forked processes, one task each at a time (see the module docstring)."""

    def __init__(self, workers: int, task_timeout: float | None = None) -> None:
        self.workers = workers
        self.task_timeout = task_timeout
        self._ctx = multiprocessing.get_context("fork")
        self._pool: list[_Worker] = []
        self.replaced = 0
        try:
            for _ in range(workers):
                self._pool.append(_Worker(self._ctx))
        except BaseException:
            self.terminate()
            raise

    # -- the driver --------------------------------------------------------------------

    def _results(self, queue: collections.deque, on_lost: Callable[[Lost], None] | None
                 ) -> Iterator[tuple[int, Any]]:
        """Keep the workers busy from ``queue`` (``(tid, fn, args, limit)``, which the
        caller may extend between results) and yield ``(tid, result)`` as results come in.
        On any exception, Ctrl-C included, every worker is terminated before it propagates."""
        try:
            while True:
                for w in self._pool:
                    if w.task is None and queue:
                        tid, fn, args, limit = queue.popleft()
                        w.give(tid, fn, args, limit if limit is not None else self.task_timeout)
                busy = [w for w in self._pool if w.task is not None]
                if not busy:
                    return
                deadlines = [w.started + w.task[3] for w in busy if w.task is not None and w.task[3] is not None]
                wait_for = max(0.0, min(deadlines) - time.monotonic()) if deadlines else None
                ready = set(wait_ready([w.conn for w in busy] + [w.proc.sentinel for w in busy], wait_for))
                for w in busy:
                    assert w.task is not None
                    tid, fn, args, limit = w.task
                    if w.conn in ready:
                        try:
                            _, ok, value = w.conn.recv()
                        except (EOFError, OSError):
                            ok, value = None, None
                        if ok is not None:
                            w.task = None
                            if not ok:
                                exc, text = value
                                if text:
                                    exc.add_note("in a worker process:\n" + text.rstrip())
                                raise exc
                            yield tid, value
                            continue
                    if w.conn in ready or w.proc.sentinel in ready:
                        self._lose(w, "died", on_lost)
                    elif limit is not None and time.monotonic() - w.started >= limit:
                        self._lose(w, "timeout", on_lost)
        except BaseException:
            self.terminate()
            raise

    def _lose(self, w: _Worker, reason: str, on_lost: Callable[[Lost], None] | None) -> None:
        assert w.task is not None
        tid, fn, args, limit = w.task
        seconds = time.monotonic() - w.started
        w.stop(grace=0.5)
        code = w.proc.exitcode
        if reason == "timeout":
            detail = f"stopped after {seconds:.1f} s, past the time limit of {limit:g} s"
        else:
            how = f"signal {-code}" if code is not None and code < 0 else f"exit code {code}"
            detail = f"the worker process died ({how}) after {seconds:.1f} s"
        if on_lost is None:
            raise WorkerLost(f"{detail}; re-run with workers=1 (--workers 1) to see the error in this process")
        self._pool[self._pool.index(w)] = _Worker(self._ctx)
        self.replaced += 1
        on_lost(Lost(fn, tuple(args), reason, seconds, detail))

    # -- the two ways in ---------------------------------------------------------------

    def map(self, fn: Callable, tasks: Iterable) -> Iterator[Any]:
        """``fn(t)`` for each task, in task order, each as soon as it and those before it
        are in. A dead worker raises :class:`WorkerLost` (a ``RuntimeError``)."""
        queue = collections.deque((i, fn, (t,), None) for i, t in enumerate(tasks))
        done: dict[int, Any] = {}
        next_out = 0
        for tid, value in self._results(queue, None):
            done[tid] = value
            while next_out in done:
                yield done.pop(next_out)
                next_out += 1

    def run(self, initial: Sequence[Task], on_done: Callable[[Any], Sequence[Task]],
            on_lost: Callable[[Lost], Sequence[Task]] | None = None) -> None:
        """Run ``initial`` tasks ``(fn, args[, time_limit])``; each result goes to
        ``on_done``, which may return further tasks (queued at once, so no worker waits
        for a whole phase). A task that overruns its limit or whose worker dies goes to
        ``on_lost`` (which may return further tasks); without ``on_lost`` it raises
        :class:`WorkerLost`."""
        queue: collections.deque = collections.deque()
        counter = [0]

        def put(tasks: Sequence[Task]) -> None:
            for task in tasks:
                fn, args, limit = _split(task)
                queue.append((counter[0], fn, args, limit))
                counter[0] += 1

        put(initial)
        lost_cb = None if on_lost is None else (lambda lost: put(on_lost(lost)))
        for _, value in self._results(queue, lost_cb):
            put(on_done(value))

    # -- shutting down -----------------------------------------------------------------

    def terminate(self) -> None:
        """Stop every worker now, whatever it is doing."""
        for w in self._pool:
            if w.proc.is_alive():
                w.proc.terminate()
        for w in self._pool:
            w.stop()
        self._pool = []

    def close(self) -> None:
        """Let idle workers finish; stop any still busy (a run cut short)."""
        for w in self._pool:
            if w.task is None:
                w.retire()
            else:
                w.stop()
        self._pool = []

    def __enter__(self) -> "ForkedPool":
        return self

    def __exit__(self, *exc: Any) -> None:
        self.close()


def open_pool(workers: int, tasks_hint: int = 2, *, task_timeout: float | None = None,
              stacklevel: int = 3, inherit: Sequence[tuple[str, str]] = ()) -> Any:
    """A pool of ``workers`` forked processes, or this process where that is not possible
    or not worth it (one worker, one task, inside a worker, no ``fork``); inside a
    :func:`limitcase.cluster.use_scheduler` block, the Dask cluster's workers (whatever ``workers`` says).

    ``task_timeout``: the default time limit of a task, in seconds (``None``: none).
    ``inherit``: ``(module, name)`` of the module globals the tasks read, which forked
    workers inherit and a Dask cluster is sent."""
    if tasks_hint <= 1 or in_worker():  # inside a worker: no pools of pools
        return InlinePool(task_timeout)
    backend = active_backend()
    if backend is not None:
        return backend.pool(inherit, task_timeout)
    if workers <= 1:
        return InlinePool(task_timeout)
    if "fork" not in multiprocessing.get_all_start_methods():
        warnings.warn(
            f"workers={workers}: this platform cannot fork worker processes (which inherit the loaded "
            "products); running in one process. The numbers are the same.",
            RuntimeWarning,
            stacklevel=stacklevel,
        )
        return InlinePool(task_timeout)
    try:
        return ForkedPool(workers, task_timeout)
    except OSError as exc:  # pragma: no cover - resource limits
        warnings.warn(f"workers={workers}: cannot start worker processes ({exc}); running in one process",
                      RuntimeWarning, stacklevel=stacklevel)
        return InlinePool(task_timeout)



# ----------------------------------------------------------------------------------------
# other backends (a Dask cluster: limitcase.cluster)

_BACKENDS: list[Any] = []  # active backends, innermost last: objects with .pool(inherit, task_timeout)


def push_backend(backend: Any) -> None:
    """Make ``backend`` (an object with ``pool(inherit, task_timeout)``) the one
    :func:`open_pool` uses, until :func:`pop_backend`. :func:`limitcase.cluster.use_scheduler`
    is the way in."""
    _BACKENDS.append(backend)


def pop_backend(backend: Any) -> None:
    """Undo :func:`push_backend`."""
    _BACKENDS.remove(backend)


def active_backend() -> Any:
    """The innermost backend pushed, or ``None`` (the local process pool)."""
    return _BACKENDS[-1] if _BACKENDS else None


split_task = _split
mark_worker = _mark_worker
