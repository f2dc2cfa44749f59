"""Local worker processes: N live processes, each solving one case at a time, killed at a time limit.

A thread cannot be stopped and a ``concurrent.futures`` pool cannot cancel a running task, so
each worker is a process of its own with a pipe to this one. A worker that overruns the time
limit is terminated and replaced; one that dies is reported and replaced; the others go on.
Workers are forked from a server process that has imported the solver (``forkserver``), so a
worker starts quickly and never inherits this process's threads.
"""

from __future__ import annotations

import logging
import multiprocessing
import os
import signal
import time
from collections import deque
from collections.abc import Hashable, Iterator, Sequence
from dataclasses import dataclass, field
from multiprocessing.connection import Connection, wait
from typing import Any

from fieldenergy.batch._work import Outcome, compute, prepare_worker

log = logging.getLogger(__name__)

#: Seconds a terminated worker gets to exit before it is killed outright.
_TERMINATE_GRACE_S = 2.0

Job = tuple[Hashable, tuple[Any, ...]]


def _serve(conn: Connection, n_threads: int) -> None:
    """Worker process: warm up, say ready, then solve each job received until told to stop."""
    signal.signal(signal.SIGINT, signal.SIG_IGN)  # Ctrl-C is the parent's to handle; it stops us
    prepare_worker(n_threads)
    conn.send("ready")
    while True:
        try:
            job = conn.recv()
        except EOFError:  # the batch process is gone
            return
        if job is None:
            return
        conn.send(compute(*job))


def _context() -> Any:
    if "forkserver" in multiprocessing.get_all_start_methods():
        ctx = multiprocessing.get_context("forkserver")
        ctx.set_forkserver_preload(["fieldenergy.batch._work"])
        return ctx
    return multiprocessing.get_context("spawn")


@dataclass(slots=True)
class _Worker:
    process: Any
    conn: Connection
    is_ready: bool = False
    key: Hashable | None = None
    job: tuple[Any, ...] | None = None
    started: float = field(default_factory=time.perf_counter)

    @classmethod
    def start(cls, ctx: Any, n_threads: int) -> _Worker:
        parent, child = ctx.Pipe()
        process = ctx.Process(target=_serve, args=(child, n_threads), name="fieldenergy-batch-worker", daemon=True)
        process.start()
        child.close()  # so that this end sees EOF when the worker dies
        return cls(process, parent)

    def stop(self, grace: float = 0.0) -> None:
        """End the process: wait ``grace`` seconds, terminate, then kill if it does not exit in time."""
        self.process.join(grace)
        if self.process.is_alive():
            self.process.terminate()
            self.process.join(_TERMINATE_GRACE_S)
            if self.process.is_alive():
                self.process.kill()
        self.process.join()
        self.conn.close()


def run_local(jobs: Sequence[Job], n_jobs: int, timeout: float | None) -> Iterator[tuple[Hashable, Outcome]]:
    """Solve ``jobs`` (key, (case, options)) in up to ``n_jobs`` processes; yield (key, outcome) as they end.

    Parameters
    ----------
    jobs
        The jobs; each key is yielded once with its outcome.
    n_jobs
        Number of worker processes.
    timeout
        Largest wall time of one solve (s), counted from when a warmed-up worker receives the
        job; ``None`` for no limit.
    """
    if not jobs:
        return
    ctx = _context()
    n_threads = max(1, (os.cpu_count() or 1) // n_jobs)
    pending: deque[Job] = deque(jobs)
    workers = [_Worker.start(ctx, n_threads) for _ in range(min(n_jobs, len(pending)))]
    try:
        while workers:
            deadline = _next_deadline(workers, timeout)
            wait([w.conn for w in workers] + [w.process.sentinel for w in workers], deadline)
            for worker in list(workers):
                yield from _service(worker, workers, pending, ctx, n_threads, timeout)
    finally:
        for worker in workers:
            worker.stop()


def _next_deadline(workers: list[_Worker], timeout: float | None) -> float | None:
    busy = [w.started for w in workers if w.key is not None]
    if timeout is None or not busy:
        return None
    return max(0.0, min(busy) + timeout - time.perf_counter())


def _service(
    worker: _Worker,
    workers: list[_Worker],
    pending: deque[Job],
    ctx: Any,
    n_threads: int,
    timeout: float | None,
) -> Iterator[tuple[Hashable, Outcome]]:
    """Handle whatever happened to one worker: a message, its death, or an overrun."""
    try:
        message = worker.conn.recv() if worker.conn.poll() else None
    except (EOFError, OSError):
        message = None
    if message == "ready":
        worker.is_ready = True
    elif isinstance(message, Outcome):
        yield worker.key, message
        worker.key = worker.job = None
    elif not worker.process.is_alive():
        yield from _lost(worker, workers, pending, ctx, n_threads)
        return
    elif worker.key is not None and timeout is not None and time.perf_counter() - worker.started >= timeout:
        log.info("stopping %r after the time limit of %g s", worker.key, timeout)
        outcome = Outcome("timeout", f"stopped after the time limit of {timeout:g} s", timeout)
        yield worker.key, outcome
        _replace(worker, workers, pending, ctx, n_threads)
        return
    if worker.is_ready and worker.key is None:
        _assign(worker, workers, pending)


def _assign(worker: _Worker, workers: list[_Worker], pending: deque[Job]) -> None:
    """Give an idle worker the next job, or let it go when there is none."""
    if not pending:
        workers.remove(worker)
        try:
            worker.conn.send(None)
        except OSError:
            pass
        worker.stop(grace=_TERMINATE_GRACE_S)
        return
    worker.key, worker.job = pending.popleft()
    worker.started = time.perf_counter()
    try:
        worker.conn.send(worker.job)
    except OSError:  # it died just now; the job waits for the next worker
        pending.appendleft((worker.key, worker.job))
        worker.key = worker.job = None


def _lost(
    worker: _Worker, workers: list[_Worker], pending: deque[Job], ctx: Any, n_threads: int
) -> Iterator[tuple[Hashable, Outcome]]:
    code = worker.process.exitcode
    if not worker.is_ready:
        worker.stop()
        workers.remove(worker)
        raise RuntimeError(f"a batch worker process failed to start (exit code {code})")
    if worker.key is not None:
        elapsed = time.perf_counter() - worker.started
        yield worker.key, Outcome("failed", f"the worker process ended unexpectedly (exit code {code})", elapsed)
    _replace(worker, workers, pending, ctx, n_threads)


def _replace(worker: _Worker, workers: list[_Worker], pending: deque[Job], ctx: Any, n_threads: int) -> None:
    """Stop a worker and start a fresh one in its place if jobs remain."""
    worker.stop()
    index = workers.index(worker)
    if pending:
        workers[index] = _Worker.start(ctx, n_threads)
    else:
        del workers[index]
