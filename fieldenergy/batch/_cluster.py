"""Solving a batch's cases on an existing Dask distributed cluster.

The cases are read here and sent to the workers; each worker runs
:func:`fieldenergy.batch._work.compute` and sends the outcome back, and the caller writes
the files. At most as many cases are in flight as the cluster has worker threads, so a case
starts about when it is submitted; the time limit is counted from then. A case that overruns
it is cancelled and reported as ``timeout``, and its worker is restarted through its nanny
so that the runaway solve stops (a worker without a nanny keeps computing until the solve
ends, since a thread cannot be stopped).
"""

from __future__ import annotations

import logging
import threading
import time
import uuid
from collections import deque
from collections.abc import Hashable, Iterator, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from fieldenergy.batch._work import Outcome, compute
from fieldenergy.batch.errors import BatchError

log = logging.getLogger(__name__)

#: Seconds to wait for the scheduler to answer when connecting.
CONNECT_TIMEOUT_S = 20.0

Job = tuple[Hashable, tuple[Any, ...]]


@dataclass(frozen=True, slots=True)
class ClusterAddress:
    """Where the scheduler of a Dask cluster is: its ``address`` or a ``scheduler_file``."""

    address: str | None = None
    scheduler_file: str | None = None

    def __post_init__(self) -> None:
        if (self.address is None) == (self.scheduler_file is None):
            raise ValueError("give exactly one of address and scheduler_file")

    def describe(self) -> str:
        """The address or file, for messages."""
        return self.address or f"the scheduler file {self.scheduler_file}"


def _connect(where: ClusterAddress) -> Any:
    try:
        from distributed import Client
    except ImportError:
        raise BatchError(
            "running on a cluster needs the Dask distributed package: pip install 'fieldenergy[cluster]'"
        ) from None
    if where.scheduler_file is not None and not Path(where.scheduler_file).is_file():
        raise BatchError(f"{where.scheduler_file}: no such scheduler file")
    try:
        client = Client(
            where.address, scheduler_file=where.scheduler_file, timeout=CONNECT_TIMEOUT_S, set_as_default=False
        )
    except (OSError, TimeoutError, ValueError) as exc:
        raise BatchError(f"cannot reach the cluster scheduler at {where.describe()}: {exc}") from None
    if not client.nthreads():
        client.close()
        raise BatchError(f"the cluster at {where.describe()} has no workers; start some with 'dask worker ADDRESS'")
    return client


def run_cluster(
    jobs: Sequence[Job], where: ClusterAddress, timeout: float | None
) -> Iterator[tuple[Hashable, Outcome]]:
    """Solve ``jobs`` (key, (case, options)) on the cluster; yield (key, outcome) as they end.

    Raises
    ------
    BatchError
        If Dask distributed is not installed, or the scheduler cannot be reached or has no workers.
    """
    if not jobs:
        return
    client = _connect(where)
    finished = threading.Event()  # set by any future that ends
    try:
        slots = sum(client.nthreads().values())
        pending: deque[Job] = deque(jobs)
        running: dict[Any, tuple[Hashable, float]] = {}
        while pending or running:
            while pending and len(running) < slots:
                key, job = pending.popleft()
                future = client.submit(compute, *job, pure=False, key=f"fieldenergy-case-{uuid.uuid4().hex}")
                future.add_done_callback(lambda _: finished.set())
                running[future] = (key, time.perf_counter())
            finished.wait(_remaining(running, timeout))
            finished.clear()
            for future in [f for f in running if f.done()]:
                key, started = running.pop(future)
                yield key, _outcome(future, started)
            for future in _expired(running, timeout):
                key, _ = running.pop(future)
                _stop(client, future)
                yield key, Outcome("timeout", f"stopped after the time limit of {timeout:g} s", float(timeout or 0.0))
    finally:
        for future in running:
            future.cancel()
        client.close()


def _remaining(running: dict[Any, tuple[Hashable, float]], timeout: float | None) -> float | None:
    if timeout is None or not running:
        return None
    first = min(started for _, started in running.values())
    return max(0.0, first + timeout - time.perf_counter())


def _expired(running: dict[Any, tuple[Hashable, float]], timeout: float | None) -> list[Any]:
    if timeout is None:
        return []
    now = time.perf_counter()
    return [f for f, (_, started) in running.items() if now - started >= timeout]


def _outcome(future: Any, started: float) -> Outcome:
    """The outcome of a finished future; a lost worker or a cancelled task becomes a failure."""
    elapsed = time.perf_counter() - started
    if future.status == "error":
        exc = future.exception()
        return Outcome("failed", f"on the cluster: {type(exc).__name__}: {exc}", elapsed)
    if future.status == "cancelled":
        return Outcome("failed", "cancelled on the cluster", elapsed)
    return future.result()


def _stop(client: Any, future: Any) -> None:
    """Cancel an overrun case and restart the worker computing it, if it has a nanny."""
    try:
        workers = [addr for addr, keys in client.processing().items() if future.key in keys]
    except Exception:  # noqa: BLE001 - the scheduler may be busy; cancelling still frees the slot
        workers = []
    future.cancel()
    if not workers:
        return
    try:
        status = client.restart_workers(workers, raise_for_error=False)
    except Exception as exc:  # noqa: BLE001 - a worker without a nanny cannot be restarted
        status = {w: exc for w in workers}
    for worker, state in status.items():
        if state != "OK":
            log.warning("worker %s could not be restarted (%s); the overrun solve runs on there", worker, state)
