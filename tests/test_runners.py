"""The runner contract: every runner gives the same stored rows for the same study."""

from __future__ import annotations

import io
import os

import pytest
from helpers import stored_rows

from prunebench.evaluate import EvaluationSettings
from prunebench.execute import GroupRunner, Progress, conduct
from prunebench.runners import (
    DaskRunner,
    GroupTask,
    InProcessRunner,
    PoolRunner,
    Runner,
    make_runner,
    run_task,
)
from prunebench.study import parse_study

STUDY = """\
name = "runner-contract"
seed = 21
datasets = ["iris", "diabetes"]
[outer]
repeats = 1
folds = 3
[factors]
max_depth = ["none", 2]
inner_folds = [3]
rule = ["min", "1se"]
"""


def quiet():
    return Progress(0, io.StringIO())


@pytest.fixture(scope="module")
def study():
    return parse_study(STUDY)


@pytest.fixture(scope="module")
def in_process_rows(study, tmp_path_factory):
    db = tmp_path_factory.mktemp("contract") / "in-process.sqlite"
    summary = conduct(study, db, progress=quiet())
    assert summary.done == 8 and summary.failed == 0
    return stored_rows(db)


@pytest.fixture(scope="module")
def threaded_cluster():
    distributed = pytest.importorskip("distributed")
    cluster = distributed.LocalCluster(
        n_workers=2, threads_per_worker=1, processes=False, dashboard_address=None
    )
    client = distributed.Client(cluster)
    yield client
    client.close()
    cluster.close()


def _tasks(study):
    settings = EvaluationSettings.of(study)
    tasks = []
    for g in study.groups():
        name, params, manifest = study.dataset_specs[g.dataset]
        fingerprint = study.datasets[g.dataset].fingerprint
        tasks.append(GroupTask(g, name, params, manifest, fingerprint, settings))
    return tasks


@pytest.mark.parametrize("kind", ["pool", "dask"])
def test_every_runner_stores_the_in_process_rows(kind, study, in_process_rows, tmp_path, request):
    db = tmp_path / f"{kind}.sqlite"
    if kind == "pool":
        if len(os.sched_getaffinity(0)) < 2:
            pytest.skip("a pool of two workers needs two CPUs here")
        summary = conduct(study, db, workers=2, progress=quiet())
    else:
        summary = conduct(
            study, db, cluster=request.getfixturevalue("threaded_cluster"), progress=quiet()
        )
    assert summary.done == 8 and summary.failed == 0
    rows = stored_rows(db)
    assert len(rows["folds"]) == 8 * 3 * 2 and rows["curves"]
    assert rows == in_process_rows


def test_the_runners_yield_one_outcome_per_task_from_their_own_processes(study, threaded_cluster):
    tasks = _tasks(study)
    expected = {t.group.group_id: run_task(t).result.folds for t in tasks}
    for runner in (InProcessRunner(), PoolRunner(2), DaskRunner(threaded_cluster)):
        assert isinstance(runner, Runner)
        with runner:
            outcomes = list(runner.outcomes(tasks))
        assert sorted(o.group.group_id for o in outcomes) == sorted(expected)
        for outcome in outcomes:
            assert outcome.error is None
            got = [{k: v for k, v in r.items() if k != "fit_seconds"} for r in outcome.result.folds]
            want = [
                {k: v for k, v in r.items() if k != "fit_seconds"}
                for r in expected[outcome.group.group_id]
            ]
            assert got == want
        pids = {o.pid for o in outcomes}
        if isinstance(runner, PoolRunner):
            assert os.getpid() not in pids  # evaluated by the workers, not here
        else:
            assert pids == {os.getpid()}  # this process (Dask's threads live here too)


def test_make_runner_chooses_by_workers_and_cluster(threaded_cluster):
    assert isinstance(make_runner(1), InProcessRunner)
    pool = make_runner(3, close_fds=(7,))
    assert isinstance(pool, PoolRunner) and pool.workers == 3 and pool.close_fds == (7,)
    assert isinstance(make_runner(5, threaded_cluster), DaskRunner)


def test_group_runner_hands_one_settings_object_to_every_task(study, tmp_path):
    from prunebench.execute import ConductSummary
    from prunebench.store import ResultStore

    with ResultStore(tmp_path / "s.sqlite", lock=True) as store:
        runner = GroupRunner(store, study, ConductSummary(tmp_path), quiet())
        tasks = [runner.task(g) for g in study.groups()]
    assert {t.settings for t in tasks} == {EvaluationSettings(21, 1, 3, None)}
    with pytest.raises(AttributeError):  # frozen: one value, shared safely
        tasks[0].settings.seed = 1
