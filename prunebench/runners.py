"""Where trial groups are evaluated: in this process, a local process pool, or Dask.

Each runner is a small strategy behind :class:`Runner`: it takes
:class:`GroupTask` values (a trial group, how to load its data set, and one
:class:`~prunebench.evaluate.EvaluationSettings`) and yields an
:class:`Outcome` per task as each finishes.  Runners never write: the sweep
process stores what they yield (see :mod:`prunebench.execute`), so every runner
gives the same database.

Pool workers end when the sweep process ends, however it ends: each runs a
watchdog thread that exits as soon as its parent changes (the parent died and the
worker was handed to another process), ignores Ctrl-C (the sweep decides), and
closes its inherited copy of the conducting lock.
"""

from __future__ import annotations

import os
import signal
import threading
import time
import traceback
from abc import ABC, abstractmethod
from collections.abc import Iterable, Iterator
from concurrent.futures import ProcessPoolExecutor, as_completed
from concurrent.futures.process import BrokenProcessPool
from dataclasses import dataclass

from .datasets import load_dataset, register_manifest
from .evaluate import EvaluationSettings, GroupResult, evaluate_group
from .exceptions import RunnerError, WorkerLost
from .store import utc_now
from .study import TrialGroup

__all__ = [
    "DaskRunner",
    "GroupTask",
    "InProcessRunner",
    "Outcome",
    "PoolRunner",
    "Runner",
    "make_runner",
    "run_task",
]

#: seconds between a pool worker's checks that its parent is still there
WATCH_INTERVAL = 0.5


@dataclass(frozen=True)
class GroupTask:
    """One trial group and everything a worker needs to evaluate it anywhere.

    Attributes
    ----------
    group : TrialGroup
    dataset_name : str
        Registry name of the data set (workers load it themselves).
    dataset_params : dict
    manifest : str, optional
        A manifest file to register first (data sets from files).
    fingerprint : str
        The sweep's fingerprint of the data set; a worker's copy must match it.
    settings : EvaluationSettings
    """

    group: TrialGroup
    dataset_name: str
    dataset_params: dict
    manifest: str | None
    fingerprint: str
    settings: EvaluationSettings


@dataclass
class Outcome:
    """What evaluating one group gave: its rows, or the error text (a traceback).

    Attributes
    ----------
    group : TrialGroup
    result : GroupResult or None
    error : str or None
    started, finished : str
        ISO 8601 UTC times.
    seconds : float
    pid : int
        The process that evaluated the group.
    """

    group: TrialGroup
    result: GroupResult | None
    error: str | None
    started: str
    finished: str
    seconds: float
    pid: int = 0


def run_task(task: GroupTask) -> Outcome:
    """Evaluate one group; any exception becomes the outcome's error text.

    Parameters
    ----------
    task : GroupTask

    Returns
    -------
    Outcome
    """
    started, t0 = utc_now(), time.perf_counter()
    try:
        if task.manifest is not None:
            register_manifest(task.manifest)
        data = load_dataset(task.dataset_name, **task.dataset_params)
        if data.fingerprint != task.fingerprint:
            raise RuntimeError(
                f"dataset {task.dataset_name!r} loaded in a worker differs from the sweep's "
                "(fingerprints differ)"
            )
        result = evaluate_group(task.group, data, task.settings)
        error = None
    except Exception:  # noqa: BLE001 - a failed trial keeps its traceback; the sweep goes on
        result, error = None, traceback.format_exc()
    seconds = time.perf_counter() - t0
    return Outcome(task.group, result, error, started, utc_now(), seconds, os.getpid())


class Runner(ABC):
    """Evaluates trial groups somewhere and yields their outcomes as they finish.

    Use as a context manager: entering starts the workers, leaving ends them (at
    once, when leaving on an exception such as an interrupt).
    """

    #: how many groups can run at the same time
    workers: int = 1

    def __enter__(self) -> Runner:
        self.start()
        return self

    def __exit__(self, exc_type, *exc) -> None:
        if exc_type is None:
            self.close()
        else:
            self.stop()

    def start(self) -> None:  # noqa: B027 - most runners have nothing to start
        """Start the workers."""

    def close(self) -> None:  # noqa: B027 - nor anything to end
        """End the workers after their work is done."""

    def stop(self) -> None:
        """End the workers now, dropping any group still running."""
        self.close()

    @abstractmethod
    def outcomes(self, tasks: Iterable[GroupTask]) -> Iterator[Outcome]:
        """Evaluate the tasks; yield one outcome per task, in the order they finish."""


class InProcessRunner(Runner):
    """Runs the groups one after another in this process."""

    workers = 1

    def outcomes(self, tasks: Iterable[GroupTask]) -> Iterator[Outcome]:
        for task in tasks:
            yield run_task(task)


def _worker_start(close_fds: tuple[int, ...]) -> None:
    """Set up a pool worker: no inherited lock, Ctrl-C left to the sweep, a parent watchdog."""
    for fd in close_fds:
        try:
            os.close(fd)  # the child's copy only: the sweep keeps its lock
        except OSError:
            pass
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    signal.signal(signal.SIGTERM, signal.SIG_DFL)
    parent = os.getppid()
    threading.Thread(target=_watch_parent, args=(parent,), daemon=True).start()


def _watch_parent(parent: int) -> None:
    while os.getppid() == parent:
        time.sleep(WATCH_INTERVAL)
    os._exit(1)  # the sweep process is gone: nobody will store this worker's result


class PoolRunner(Runner):
    """Runs the groups on a local pool of worker processes.

    Parameters
    ----------
    workers : int
        Worker processes (at least 2; use :class:`InProcessRunner` for one).
    close_fds : tuple of int, default=()
        File descriptors each worker closes at start (the conducting lock, so a
        worker never holds it).
    """

    def __init__(self, workers: int, close_fds: tuple[int, ...] = ()) -> None:
        self.workers = workers
        self.close_fds = tuple(close_fds)
        self._pool: ProcessPoolExecutor | None = None

    def start(self) -> None:
        self._pool = ProcessPoolExecutor(
            max_workers=self.workers, initializer=_worker_start, initargs=(self.close_fds,)
        )

    def close(self) -> None:
        if self._pool is not None:
            self._pool.shutdown(cancel_futures=True)
            self._pool = None

    def stop(self) -> None:
        if self._pool is None:
            return
        # the executor has no public way to end running work: end its processes
        for process in list(getattr(self._pool, "_processes", {}).values()):
            if process.is_alive():
                process.terminate()
        self._pool.shutdown(wait=True, cancel_futures=True)
        self._pool = None

    def outcomes(self, tasks: Iterable[GroupTask]) -> Iterator[Outcome]:
        tasks = list(tasks)
        if len(tasks) <= 1:  # not worth a round trip to a worker
            yield from InProcessRunner().outcomes(tasks)
            return
        futures = [self._pool.submit(run_task, task) for task in tasks]
        try:
            for future in as_completed(futures):
                yield future.result()
        except BrokenProcessPool as err:
            raise WorkerLost(str(err)) from None


class DaskRunner(Runner):
    """Runs the groups on a Dask distributed cluster.

    Parameters
    ----------
    cluster : str or distributed.Client
        A scheduler address, or a connected client (left open at the end).
    retries : int, default=2
        How often the scheduler reruns a group whose worker was lost.
    """

    def __init__(self, cluster, retries: int = 2) -> None:
        self.cluster = cluster
        self.retries = retries
        self._client = None
        self._own_client = False
        self._futures: list = []

    def start(self) -> None:
        try:
            from distributed import Client
        except ImportError:
            raise RunnerError(
                "a cluster needs Dask's distributed scheduler: pip install 'prunebench[dask]'"
            ) from None
        if isinstance(self.cluster, str):
            try:
                self._client = Client(self.cluster, timeout="10s")
            except OSError as err:
                raise RunnerError(
                    f"cannot reach the Dask scheduler at {self.cluster}: {err}"
                ) from None
            self._own_client = True
        else:
            self._client = self.cluster
        self.workers = max(len(self._client.scheduler_info().get("workers", {})), 1)

    def close(self) -> None:
        if self._own_client and self._client is not None:
            self._client.close()
        self._client = None

    def stop(self) -> None:
        if self._client is not None and self._futures:
            self._client.cancel(self._futures)
        self.close()

    def outcomes(self, tasks: Iterable[GroupTask]) -> Iterator[Outcome]:
        from distributed import as_completed as completed

        tasks = list(tasks)
        submitted = {
            self._client.submit(run_task, task, pure=False, retries=self.retries): task
            for task in tasks
        }
        self._futures = list(submitted)
        for future in completed(self._futures):
            try:
                outcome = future.result()
            except Exception:  # noqa: BLE001 - e.g. every worker it ran on was lost
                now, group = utc_now(), submitted[future].group
                outcome = Outcome(group, None, traceback.format_exc(), now, now, 0.0)
            yield outcome
        self._futures = []


def make_runner(workers: int = 1, cluster=None, close_fds: tuple[int, ...] = ()) -> Runner:
    """The runner for a ``conduct``: Dask if a cluster is given, else a pool or this process.

    Parameters
    ----------
    workers : int, default=1
        Local worker processes; 1 runs the groups in this process.
    cluster : str or distributed.Client, optional
    close_fds : tuple of int, default=()
        Passed to :class:`PoolRunner`.

    Returns
    -------
    Runner
    """
    if cluster is not None:
        return DaskRunner(cluster)
    if workers > 1:
        return PoolRunner(workers, close_fds)
    return InProcessRunner()
