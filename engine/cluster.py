"""Sweeps on a dask.distributed cluster: one task per frequency.

Glossary
--------
local cluster
    ``--workers N``: N worker processes on this machine, started for the run
    and closed at its end. Scheduler, workers and dashboard listen on
    127.0.0.1 only (the dashboard on a free port). Each worker runs one task
    at a time with one BLAS, OpenMP and numba thread, so N workers share the
    cores instead of fighting over them.
existing cluster
    ``--scheduler ADDRESS`` or ``--scheduler-file PATH``: a cluster started
    with dask's own commands (``dask scheduler``, ``dask worker``); only the
    client connects and disconnects, the cluster stays.
task
    ``run.solve_frequency(problem, frequency)``. The problem is sent to the
    workers once; each solution comes back to the client as soon as it is
    ready. A task whose worker dies is run again on another worker (dask
    moves it; ``ALLOWED_FAILURES`` deaths at most), a task that raises is
    retried ``RETRIES`` times. Only the client writes files.
"""

from __future__ import annotations

import contextlib
import logging
import os
from collections.abc import Iterator, Sequence
from typing import Any

from .problem import Problem
from .results import FrequencySolution
from .run import solve_frequency
from .sweep import StopRequest

__all__ = ["ALLOWED_FAILURES", "RETRIES", "THREAD_VARIABLES", "DaskExecutor", "dask_setup", "open_executor"]

#: Retries of a task that raised (a transient failure on one worker).
RETRIES = 2
#: How many workers may die while running the same task before it is given up.
ALLOWED_FAILURES = 4
#: Environment of each local worker: one thread for BLAS, OpenMP and numba.
THREAD_VARIABLES = {
    "OMP_NUM_THREADS": "1",
    "OPENBLAS_NUM_THREADS": "1",
    "MKL_NUM_THREADS": "1",
    "NUMBA_NUM_THREADS": "1",
}
#: Environment of each local worker beyond the threads: the client reports, workers keep quiet.
WORKER_QUIET = {"DASK_LOGGING__DISTRIBUTED": "error"}

_log = logging.getLogger("sectionwave.cluster")


def dask_setup(worker: Any) -> None:
    """Preload of local workers: ignore SIGINT.

    Ctrl-C at the terminal reaches the whole process group, but only the
    client decides when to stop (after the frequency under way, then it
    closes the cluster).
    """
    import signal
    import threading

    if threading.current_thread() is threading.main_thread():
        signal.signal(signal.SIGINT, signal.SIG_IGN)


def _solve_task(problem: Problem, frequency_hz: float) -> FrequencySolution:
    """The task a worker runs (module level, so it pickles by name)."""
    return solve_frequency(problem, frequency_hz)


class DaskExecutor:
    """Solve frequencies as tasks of a ``distributed.Client``.

    Parameters
    ----------
    client
        A connected client.
    description
        Words for reports.
    """

    def __init__(self, client: Any, description: str) -> None:
        self.client = client
        self.description = description

    @property
    def workers(self) -> int:
        """Workers connected now (at least 1)."""
        return max(1, len(self.client.scheduler_info().get("workers", {})))

    def solve(
        self, problem: Problem, frequencies_hz: Sequence[float], stop: StopRequest
    ) -> Iterator[FrequencySolution]:
        """Submit one task per frequency and yield each solution as it completes."""
        from distributed import as_completed

        if not frequencies_hz:
            return
        [shared] = self.client.scatter([problem], broadcast=True, hash=False)
        futures = [
            self.client.submit(
                _solve_task, shared, float(f), key=f"sectionwave-frequency-{n}-{float(f)!r}",
                retries=RETRIES, pure=False,
            )
            for n, f in enumerate(frequencies_hz)
        ]
        stopping = False
        try:
            for future in as_completed(futures, loop=self.client.loop):
                if future.status != "finished" and stopping:
                    continue  # cancelled by the stop below
                yield future.result()
                if stop.requested and not stopping:
                    # finish the frequencies under way on the workers, drop the queued ones
                    stopping = True
                    self.client.cancel([f for f in futures if f.key not in self._running()])
        finally:
            self.client.cancel(futures)
            self.client.cancel([shared])


    def _running(self) -> set[str]:
        """Keys of the tasks the workers are running now."""
        try:
            return {str(k) for keys in self.client.processing().values() for k in keys}
        except Exception:  # noqa: BLE001 - a scheduler that cannot say: stop everything
            return set()


def _local_cluster(workers: int) -> Any:
    """A cluster of ``workers`` processes on loopback, one thread each."""
    import dask
    from distributed import LocalCluster

    # workers inherit the variables set when they start: set them for the nanny's spawn
    with dask.config.set({"distributed.scheduler.allowed-failures": ALLOWED_FAILURES,
                          "distributed.nanny.pre-spawn-environ": {**THREAD_VARIABLES, **WORKER_QUIET}}):
        return LocalCluster(
            n_workers=workers,
            threads_per_worker=1,
            processes=True,
            host="127.0.0.1",
            dashboard_address="127.0.0.1:0",
            env={**THREAD_VARIABLES, **WORKER_QUIET},
            preload=[__name__],
        )


@contextlib.contextmanager
def open_executor(
    *, workers: int | None = None, scheduler: str | None = None, scheduler_file: str | os.PathLike[str] | None = None
) -> Iterator[DaskExecutor]:
    """Connect to a cluster (or start a local one) for the duration of the block.

    Parameters
    ----------
    workers
        Start a local cluster of this many worker processes, closed at the end.
    scheduler
        Address of an existing scheduler (``tcp://host:port``).
    scheduler_file
        Scheduler file written by ``dask scheduler --scheduler-file``.

    Yields
    ------
    DaskExecutor
    """
    import dask
    from distributed import Client

    cluster = None
    with dask.config.set({"distributed.scheduler.allowed-failures": ALLOWED_FAILURES}):
        if workers is not None:
            cluster = _local_cluster(workers)
            client = Client(cluster, set_as_default=False)
            description = f"dask, local cluster of {workers} worker(s) on 127.0.0.1"
        elif scheduler_file is not None:
            client = Client(scheduler_file=str(scheduler_file), set_as_default=False)
            description = f"dask, scheduler from {scheduler_file}"
        else:
            client = Client(scheduler, set_as_default=False)
            description = f"dask, scheduler at {scheduler}"
    _log.info("%s; dashboard %s", description, client.dashboard_link)
    try:
        yield DaskExecutor(client, description)
    finally:
        with contextlib.suppress(Exception):
            client.close()
        if cluster is not None:
            cluster.close()
