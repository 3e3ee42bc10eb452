"""Running a study: trial groups on a local process pool, one writer, resumable.

The sweep process is the only writer.  It records every trial as ``pending``,
hands the unfinished groups to workers (or runs them itself with one worker),
and stores each group's rows with its ``done`` status in one transaction as the
group finishes, so a crash or a kill leaves only whole groups behind and the
next run picks up where this one stopped.
"""

from __future__ import annotations

import sys
import time
import traceback
from collections.abc import Callable
from concurrent.futures import ProcessPoolExecutor, as_completed
from dataclasses import dataclass, field
from pathlib import Path
from typing import TextIO

from .datasets import load_dataset, register_manifest
from .evaluate import GroupResult, evaluate_group
from .exceptions import ConductError
from .store import ResultStore, utc_now
from .study import Study, TrialGroup

__all__ = ["ConductSummary", "GroupRunner", "Progress", "conduct", "default_database", "plan"]



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
        eta_text = "?" if eta != eta else _duration(eta)
        failed = f", {self.failed} failed" if self.failed else ""
        return (
            f"trials {finished}/{self.total}{failed} | {rate:.1f} trials/min | "
            f"elapsed {_duration(elapsed)} | ETA {eta_text}"
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

    def close(self) -> None:
        """End the line on a terminal."""
        if self._tty:
            self.stream.write("\n")
            self.stream.flush()


def _duration(seconds: float) -> str:
    seconds = int(round(seconds))
    h, rest = divmod(seconds, 3600)
    m, s = divmod(rest, 60)
    return f"{h}h{m:02d}m" if h else f"{m}m{s:02d}s"


@dataclass
class _Task:
    group: TrialGroup
    dataset_name: str
    dataset_params: dict
    manifest: str | None
    fingerprint: str
    seed: int
    repeats: int
    folds: int
    time_limit: float | None = None


@dataclass
class _Outcome:
    group: TrialGroup
    result: GroupResult | None
    error: str | None
    started: str
    finished: str
    seconds: float


def _run_task(task: _Task) -> _Outcome:
    """Evaluate one group; any exception becomes the outcome's error text."""
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
        result = evaluate_group(
            task.group, data, task.seed, task.repeats, task.folds, task.time_limit
        )
        return _Outcome(task.group, result, None, started, utc_now(), time.perf_counter() - t0)
    except Exception:  # noqa: BLE001 - a failed trial keeps its traceback; the sweep goes on
        return _Outcome(
            task.group, None, traceback.format_exc(), started, utc_now(), time.perf_counter() - t0
        )


def plan(study: Study) -> list[dict]:
    """Per data set: trials, tree fits and a rough time, from one calibration fit each.

    The calibration grows one unlimited-depth tree with the study's first criterion on
    an outer-training share of the rows (best of three); the estimate multiplies it by
    the fits, so depth-limited or large-leaf levels make it pessimistic.

    Parameters
    ----------
    study : Study

    Returns
    -------
    list of dict
        ``dataset``, ``task``, ``rows``, ``features``, ``trials``, ``fits`` (each outer
        fold grows T_max and one tree per inner fold) and ``seconds``.
    """
    import numpy as np
    from sklearn.tree import DecisionTreeClassifier, DecisionTreeRegressor

    groups = study.groups()
    out = []
    for key, data in study.datasets.items():
        task = study.task_of(key)
        model = DecisionTreeClassifier if task == "classification" else DecisionTreeRegressor
        n = int(len(data.y) * (study.folds - 1) / study.folds)
        rows = np.random.default_rng(0).permutation(len(data.y))[:n]
        per_fit = float("inf")
        for _ in range(3):
            t0 = time.perf_counter()
            model(criterion=study.factors[task]["criterion"][0], random_state=0).fit(
                data.X[rows], data.y[rows]
            )
            per_fit = min(per_fit, time.perf_counter() - t0)
        mine = [g for g in groups if g.dataset == key]
        fits = sum(study.repeats * study.folds * (1 + g.inner_folds) for g in mine)
        out.append(
            {
                "dataset": key,
                "task": data.task,
                "rows": int(len(data.y)),
                "features": int(data.X.shape[1]),
                "trials": sum(len(g.trials) for g in mine),
                "fits": fits,
                "seconds": fits * per_fit,
            }
        )
    return out


class GroupRunner:
    """Runs trial groups and stores each outcome as it arrives; the only writer.

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
        self.progress, self.workers, self.on_group = progress, workers, on_group
        self.cluster = cluster
        self._pool = None
        self._client = None
        self._own_client = False

    def __enter__(self) -> GroupRunner:
        if self.cluster is not None:
            try:
                from distributed import Client
            except ImportError:
                raise ConductError(
                    "--cluster needs Dask's distributed scheduler: pip install 'prunebench[dask]'"
                ) from None
            if isinstance(self.cluster, str):
                try:
                    self._client = Client(self.cluster, timeout="10s")
                except OSError as err:
                    raise ConductError(
                        f"cannot reach the Dask scheduler at {self.cluster}: {err}"
                    ) from None
                self._own_client = True
            else:
                self._client = self.cluster
            self.workers = max(len(self._client.scheduler_info().get("workers", {})), 1)
        elif self.workers > 1:
            self._pool = ProcessPoolExecutor(max_workers=self.workers)
        return self

    def __exit__(self, *exc) -> None:
        if self._pool is not None:
            self._pool.shutdown(cancel_futures=True)
        if self._own_client:
            self._client.close()
        self.progress.close()

    def _task(self, g: TrialGroup) -> _Task:
        name, params, manifest = self.study.dataset_specs[g.dataset]
        return _Task(
            group=g,
            dataset_name=name,
            dataset_params=params,
            manifest=manifest,
            fingerprint=self.study.datasets[g.dataset].fingerprint,
            seed=self.study.seed,
            repeats=self.study.repeats,
            folds=self.study.folds,
            time_limit=self.study.time_limit,
        )

    def run(self, groups: list[TrialGroup]) -> list[_Outcome]:
        """Evaluate groups (in parallel when there are workers) and store each outcome."""
        tasks = [self._task(g) for g in groups]
        outcomes = []
        if self._client is not None:
            from distributed import as_completed as completed

            futures = {
                self._client.submit(_run_task, task, pure=False, retries=2): task for task in tasks
            }
            for future in completed(list(futures)):
                try:
                    outcome = future.result()
                except Exception:  # noqa: BLE001 - e.g. every worker it ran on was lost
                    task = futures[future]
                    now = utc_now()
                    outcome = _Outcome(task.group, None, traceback.format_exc(), now, now, 0.0)
                outcomes.append(self._store(outcome))
        elif self._pool is None or len(tasks) <= 1:
            for task in tasks:
                outcomes.append(self._store(_run_task(task)))
        else:
            futures = [self._pool.submit(_run_task, task) for task in tasks]
            for future in as_completed(futures):
                outcomes.append(self._store(future.result()))
        return outcomes

    def _store(self, outcome: _Outcome) -> _Outcome:
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


def conduct(
    study: Study,
    database: str | Path | None = None,
    *,
    workers: int = 1,
    retry_failed: bool = False,
    progress: Progress | None = None,
    on_group: Callable[[_Outcome], None] | None = None,
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
        Worker processes; 1 runs the groups in this process.
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
    """
    if workers < 1:
        raise ConductError(f"--workers must be at least 1; got {workers}")
    path = Path(database) if database is not None else default_database(study)
    start = time.perf_counter()
    summary = ConductSummary(database=path)
    with ResultStore(path, lock=True) as store:
        store.register_study(study)
        if study.search is not None:
            from .search import run_search

            progress = progress or Progress(study.search.configurations * len(study.datasets))
            with GroupRunner(store, study, summary, progress, workers, on_group, cluster) as runner:
                summary.search = run_search(study, store, runner, path)
            summary.total = len(store.statuses(study.study_id))
            summary.skipped = summary.total - summary.done - summary.failed
        else:
            statuses = store.statuses(study.study_id)
            wanted = {"pending", "failed"} if retry_failed else {"pending"}
            groups = [
                g for g in study.groups() if any(statuses[t.trial_id] in wanted for t in g.trials)
            ]
            summary.total = len(study.trials())
            todo = sum(len(g.trials) for g in groups)
            summary.skipped = summary.total - todo
            progress = progress or Progress(todo)
            progress.total = todo
            with GroupRunner(store, study, summary, progress, workers, on_group, cluster) as runner:
                runner.run(groups)
    summary.seconds = time.perf_counter() - start
    return summary
