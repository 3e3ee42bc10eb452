"""Running a study: trial groups through a runner, one writer, resumable.

The sweep process is the only writer.  It records every trial as ``pending``,
hands the unfinished groups to a runner (:mod:`prunebench.runners`: this
process, a local pool or Dask), and stores each group's rows with its ``done``
status in one transaction as the group finishes, so a crash or a kill leaves
only whole groups behind and the next run picks up where this one stopped.
Ctrl-C (SIGINT), SIGTERM and a lost worker end the workers and raise
:class:`~prunebench.exceptions.ConductStopped`, which says how many trials are
stored and that the same command resumes.
"""

from __future__ import annotations

import contextlib
import os
import signal
import sys
import threading
import time
from collections.abc import Callable, Iterator
from dataclasses import dataclass, field
from pathlib import Path
from typing import TextIO

from .evaluate import EvaluationSettings
from .exceptions import ConductError, ConductStopped, WorkerLost
from .progress import duration_text
from .runners import GroupTask, Outcome, make_runner
from .store import ResultStore
from .study import Study, TrialGroup

__all__ = [
    "ConductError",
    "ConductSummary",
    "GroupRunner",
    "Progress",
    "conduct",
    "default_database",
    "estimated_seconds",
    "plan",
    "plan_summary",
    "usable_workers",
]



def default_database(study: Study) -> Path:
    """The study's own ``database``, or ``<study file stem>.sqlite`` beside it."""
    if study.database is not None:
        return study.database
    if study.path is not None:
        return study.path.with_suffix(".sqlite")
    return Path(f"{study.name}.sqlite")


@dataclass
class ConductSummary:
    """What one ``conduct`` run did.

    Attributes
    ----------
    database : Path
    total, done, failed, skipped : int
        Trials in the study; finished by this run; failed in this run; already done.
    failed_before : int
        Trials that failed in an earlier run and were not run again (no ``retry_failed``).
    groups_run : int
    seconds : float
    write_seconds : float
        Time spent storing results.
    n_fits : int
        Trees grown by this run.
    """

    database: Path
    total: int = 0
    done: int = 0
    failed: int = 0
    skipped: int = 0
    failed_before: int = 0
    groups_run: int = 0
    seconds: float = 0.0
    write_seconds: float = 0.0
    n_fits: int = 0
    errors: list[str] = field(default_factory=list)
    search: dict | None = None


class Progress:
    """A progress line: trials done / total, rate and ETA, on a stream.

    On a terminal the line is redrawn in place; elsewhere (a log file) a line is
    written at most every ``every`` seconds and at the end.
    """

    def __init__(self, total: int, stream: TextIO | None = None, every: float = 10.0) -> None:
        self.total = total
        self.stream = stream if stream is not None else sys.stderr
        self.every = every
        self.done = 0
        self.failed = 0
        self.start = time.monotonic()
        self._last = 0.0
        self._tty = hasattr(self.stream, "isatty") and self.stream.isatty()

    def line(self) -> str:
        """The current progress text."""
        elapsed = time.monotonic() - self.start
        finished = self.done + self.failed
        rate = finished / elapsed * 60 if elapsed > 0 else 0.0
        remaining = self.total - finished
        eta = remaining / (finished / elapsed) if finished and elapsed > 0 else float("nan")
        eta_text = "?" if eta != eta else duration_text(eta)
        failed = f", {self.failed} failed" if self.failed else ""
        return (
            f"trials {finished}/{self.total}{failed} | {rate:.1f} trials/min | "
            f"elapsed {duration_text(elapsed)} | ETA {eta_text}"
        )

    def update(self, done: int = 0, failed: int = 0) -> None:
        """Count finished trials and redraw if due."""
        self.done += done
        self.failed += failed
        now = time.monotonic()
        if self._tty:
            self.stream.write("\r" + self.line() + "\x1b[K")
            self.stream.flush()
        elif now - self._last >= self.every or self.done + self.failed >= self.total:
            self.stream.write(self.line() + "\n")
            self.stream.flush()
            self._last = now

    def note(self, text: str | None) -> None:
        """Write a one-line note (e.g. a clamped worker count) on the progress stream."""
        if text:
            self.stream.write(f"note: {text}\n")
            self.stream.flush()

    def close(self) -> None:
        """End the line on a terminal."""
        if self._tty:
            self.stream.write("\n")
            self.stream.flush()


def plan(study: Study) -> list[dict]:
    """Per data set: trials, groups, tree fits and a time, calibrated per growth setting.

    Every group (the trials that share the grown trees: one data set and growth
    setting) is timed on its first outer fold, evaluated as ``conduct`` evaluates it
    (its trees, selections and scores); the estimate multiplies that by the outer
    folds, so a depth-capped setting is calibrated on depth-capped trees.  Timing
    one outer fold costs ``1 / (repeats x folds)`` of the study's time.

    Parameters
    ----------
    study : Study

    Returns
    -------
    list of dict
        ``dataset``, ``task``, ``rows``, ``features``, ``trials``, ``groups``, ``fits``
        (each outer fold grows T_max and the fold trees of each distinct inner fold
        count once), ``seconds`` and ``group_seconds`` (the estimate of every group).
    """
    from .evaluate import growth_fits, time_outer_fold

    settings = EvaluationSettings.of(study)
    groups = study.groups()
    outer = study.repeats * study.folds
    out = []
    for key, data in study.datasets.items():
        mine = [g for g in groups if g.dataset == key]
        group_seconds = [outer * time_outer_fold(g, data, settings) for g in mine]
        out.append(
            {
                "dataset": key,
                "task": data.task,
                "rows": int(len(data.y)),
                "features": int(data.X.shape[1]),
                "trials": sum(len(g.trials) for g in mine),
                "groups": len(mine),
                "fits": sum(outer * growth_fits(g) for g in mine),
                "seconds": float(sum(group_seconds)),
                "group_seconds": group_seconds,
            }
        )
    return out


def estimated_seconds(rows: list[dict], workers: int) -> float:
    """The study's time with ``workers`` running groups side by side.

    Groups are handed out longest first to the worker that frees up first, as the
    pool does with the groups in turn; the estimate is the last worker's finish.

    Parameters
    ----------
    rows : list of dict
        From :func:`plan`.
    workers : int
    """
    import heapq

    finish = [0.0] * max(workers, 1)
    for seconds in sorted((s for r in rows for s in r["group_seconds"]), reverse=True):
        heapq.heapreplace(finish, finish[0] + seconds)
    return max(finish)


def plan_summary(study: Study, workers: tuple[int, ...] | list[int] = (1,)) -> dict:
    """The plan of a study as one value: what ``prunebench check --json`` prints.

    Parameters
    ----------
    study : Study
    workers : sequence of int
        Worker counts to estimate the time for.

    Returns
    -------
    dict
        ``study``, ``datasets`` (the rows of :func:`plan` without ``group_seconds``),
        ``trials``, ``groups``, ``n_fits`` and ``seconds`` (worker count -> estimated
        seconds).
    """
    rows = plan(study)
    return {
        "study": study.name,
        "datasets": [{k: v for k, v in r.items() if k != "group_seconds"} for r in rows],
        "trials": len(study.trials()),
        "groups": len(study.groups()),
        "n_fits": sum(r["fits"] for r in rows),
        "seconds": {str(w): estimated_seconds(rows, w) for w in dict.fromkeys(workers)},
    }


def usable_workers(workers: int) -> tuple[int, str | None]:
    """The number of local worker processes to start for ``workers`` asked, with a note.

    More processes than the CPUs this process may use only compete for the same
    CPUs (each with its own copy of the data), so a larger count is clamped to the
    CPU count and the note says so.

    Parameters
    ----------
    workers : int

    Returns
    -------
    (int, str or None)
        The count to use and, when it differs from the one asked, why.
    """
    if workers < 1:
        raise ConductError(f"workers must be at least 1; got {workers}")
    try:
        cpus = len(os.sched_getaffinity(0))
    except AttributeError:  # not on Linux
        cpus = os.cpu_count() or 1
    if workers <= cpus:
        return workers, None
    return cpus, (
        f"workers = {workers} is more than the {cpus} CPUs here; using {cpus} (more worker "
        "processes would only compete for the same CPUs, each with its own copy of the data)"
    )


class GroupRunner:
    """Runs trial groups through a runner and stores each outcome as it arrives.

    The only writer.  Which runner evaluates the groups (this process, a local
    pool, a Dask cluster) is chosen by :func:`prunebench.runners.make_runner`.

    Parameters
    ----------
    store : ResultStore
        Open for writing, with the conducting lock held.
    study : Study
    summary : ConductSummary
        Counts are added to it.
    progress : Progress
    workers : int
        Worker processes; 1 runs the groups in this process.
    on_group : callable, optional
        Called with each outcome after it is stored.
    cluster : str or distributed.Client, optional
        A Dask scheduler address (or a connected client): groups run on its workers
        instead of a local pool; a lost worker's groups are rerun by the scheduler.
    """

    def __init__(
        self, store, study, summary, progress, workers=1, on_group=None, cluster=None
    ) -> None:
        self.store, self.study, self.summary = store, study, summary
        self.progress, self.on_group = progress, on_group
        self.settings = EvaluationSettings.of(study)
        close = () if store.lock_fd is None else (store.lock_fd,)
        self.runner = make_runner(workers, cluster, close_fds=close)

    @property
    def workers(self) -> int:
        """How many groups run at the same time."""
        return self.runner.workers

    def __enter__(self) -> GroupRunner:
        self.runner.__enter__()
        return self

    def __exit__(self, *exc) -> None:
        try:
            self.runner.__exit__(*exc)
        finally:
            self.progress.close()

    def task(self, group: TrialGroup) -> GroupTask:
        """Everything a worker needs to evaluate ``group``."""
        name, params, manifest = self.study.dataset_specs[group.dataset]
        return GroupTask(
            group=group,
            dataset_name=name,
            dataset_params=params,
            manifest=manifest,
            fingerprint=self.study.datasets[group.dataset].fingerprint,
            settings=self.settings,
        )

    def run(self, groups: list[TrialGroup]) -> list[Outcome]:
        """Evaluate groups (in parallel when there are workers) and store each outcome."""
        tasks = [self.task(g) for g in groups]
        return [self._store(outcome) for outcome in self.runner.outcomes(tasks)]

    def _store(self, outcome: Outcome) -> Outcome:
        t0 = time.perf_counter()
        n = len(outcome.group.trials)
        if outcome.error is None:
            self.store.save_group(
                outcome.result, outcome.group.trials, outcome.started, outcome.finished
            )
            self.summary.done += n
            self.summary.n_fits += outcome.result.n_fits
            self.progress.update(done=n)
        else:
            self.store.save_failure(
                outcome.group.trials,
                outcome.error,
                outcome.started,
                outcome.finished,
                outcome.seconds,
            )
            self.summary.failed += n
            self.summary.errors.append(outcome.error.strip().splitlines()[-1])
            self.progress.update(failed=n)
        self.summary.write_seconds += time.perf_counter() - t0
        self.summary.groups_run += 1
        if self.on_group is not None:
            self.on_group(outcome)
        return outcome


class _Signalled(BaseException):
    """SIGINT or SIGTERM arrived: unwind (not an ``Exception``, so no trial records it)."""

    def __init__(self, signum: int) -> None:
        super().__init__(signum)
        self.signum = signum


@contextlib.contextmanager
def _stop_on_signals() -> Iterator[None]:
    """Turn the first SIGINT or SIGTERM into :class:`_Signalled`; ignore more until done.

    Signal handlers can only be set from the main thread; elsewhere Ctrl-C still
    arrives as ``KeyboardInterrupt``.
    """
    if threading.current_thread() is not threading.main_thread():
        yield
        return
    wanted = (signal.SIGINT, signal.SIGTERM)

    def handler(signum, frame):
        for s in wanted:
            signal.signal(s, signal.SIG_IGN)  # a second Ctrl-C must not break the cleanup
        raise _Signalled(signum)

    previous = {s: signal.signal(s, handler) for s in wanted}
    try:
        yield
    finally:
        for s, old in previous.items():
            signal.signal(s, old)


def _stopped(reason: BaseException, store: ResultStore, study: Study) -> ConductStopped:
    """The one line a stopped conduct ends with: why, what is stored, how to resume."""
    statuses = store.statuses(study.study_id)
    done = sum(status == "done" for status in statuses.values())
    if isinstance(reason, WorkerLost):
        why, code = "a worker process died while it ran a trial group", 1
    elif isinstance(reason, _Signalled) and reason.signum == signal.SIGTERM:
        why, code = "stopped by SIGTERM", 128 + signal.SIGTERM
    else:
        why, code = "interrupted (SIGINT)", 128 + signal.SIGINT
    return ConductStopped(
        f"{why}; {done} of {len(statuses)} trials are stored in {store.path}; "
        "running the same command again resumes",
        exit_code=code,
    )


def conduct(
    study: Study,
    database: str | Path | None = None,
    *,
    workers: int = 1,
    retry_failed: bool = False,
    progress: Progress | None = None,
    on_group: Callable[[Outcome], None] | None = None,
    cluster=None,
) -> ConductSummary:
    """Run or resume a study; store every trial group as it finishes.

    A study with a ``[search]`` section runs its search instead of the full grid
    (see :mod:`prunebench.search`).

    Parameters
    ----------
    study : Study
        A validated study (see :func:`prunebench.study.load_study`).
    database : str or Path, optional
        The results database; default :func:`default_database`.
    workers : int, default=1
        Worker processes; 1 runs the groups in this process.  More than the CPUs
        here are clamped to the CPU count (see :func:`usable_workers`), with a note
        on the progress stream.
    retry_failed : bool, default=False
        Run failed trials again.
    progress : Progress, optional
        Where to show progress; default a :class:`Progress` on stderr.
    on_group : callable, optional
        Called with each outcome after it is stored (used by tests and tools).
    cluster : str or distributed.Client, optional
        Run the groups on a Dask cluster (scheduler address); this process stays the
        only writer, so the database is the same as for a local run.

    Returns
    -------
    ConductSummary

    Raises
    ------
    ConductStopped
        On SIGINT (exit code 130), SIGTERM (143) or a lost worker process (1): the
        workers are ended, every finished group is kept, and the message says how
        many trials are stored.
    """
    note = None
    if cluster is None:
        workers, note = usable_workers(workers)
    path = Path(database) if database is not None else default_database(study)
    start = time.perf_counter()
    summary = ConductSummary(database=path)
    with ResultStore(path, lock=True) as store:
        store.register_study(study)
        try:
            with _stop_on_signals():
                _run(
                    study,
                    store,
                    path,
                    summary,
                    workers,
                    retry_failed,
                    progress,
                    on_group,
                    cluster,
                    note,
                )
        except (_Signalled, KeyboardInterrupt, WorkerLost) as reason:
            raise _stopped(reason, store, study) from None
    summary.seconds = time.perf_counter() - start
    return summary


def _run(study, store, path, summary, workers, retry_failed, progress, on_group, cluster, note):
    """The body of :func:`conduct`: the search, or every unfinished trial group."""
    if study.search is not None:
        from .search import run_search

        progress = progress or Progress(study.search.configurations * len(study.datasets))
        progress.note(note)
        with GroupRunner(store, study, summary, progress, workers, on_group, cluster) as runner:
            summary.search = run_search(study, store, runner, path)
        summary.total = len(store.statuses(study.study_id))
        summary.skipped = summary.total - summary.done - summary.failed
        return
    statuses = store.statuses(study.study_id)
    wanted = {"pending", "failed"} if retry_failed else {"pending"}
    groups = [g for g in study.groups() if any(statuses[t.trial_id] in wanted for t in g.trials)]
    summary.total = len(study.trials())
    todo = sum(len(g.trials) for g in groups)
    if not retry_failed:  # failures of earlier runs are neither run nor finished
        run = {t.trial_id for g in groups for t in g.trials}
        summary.failed_before = sum(
            1 for t in study.trials() if statuses[t.trial_id] == "failed" and t.trial_id not in run
        )
    summary.skipped = summary.total - todo - summary.failed_before
    progress = progress or Progress(todo)
    progress.total = todo
    progress.note(note)
    with GroupRunner(store, study, summary, progress, workers, on_group, cluster) as runner:
        runner.run(groups)
