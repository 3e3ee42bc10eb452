"""Tests of searches for a robust default with Optuna (prunebench.search)."""

from __future__ import annotations

import csv
import io
import re
import signal
import sqlite3
import subprocess
import sys

import numpy as np
import optuna
import pytest
from click.testing import CliRunner
from helpers import start_and_wait

from prunebench.cli import main
from prunebench.execute import Progress, conduct
from prunebench.search import search_storage_path
from prunebench.study import StudyError, load_study


def _data(folder, seeds=(0, 1)):
    """Synthetic sets a depth-2 tree fits exactly: y = (a > 0.5) and (b > 0.3)."""
    entries = []
    tag = re.sub(r"\W", "", folder.name)[-12:]  # dataset names are global in a process
    for seed in seeds:
        rng = np.random.default_rng(seed)
        X = rng.uniform(size=(300, 4))
        y = ((X[:, 0] > 0.5) & (X[:, 1] > 0.3)).astype(int)
        with open(folder / f"and{seed}.csv", "w", newline="") as f:
            w = csv.writer(f)
            w.writerow(["a", "b", "c", "d", "y"])
            w.writerows([[*(f"{v:.5f}" for v in X[i]), y[i]] for i in range(len(y))])
        entries.append(
            f'[[dataset]]\nname = "and_{tag}_{seed}"\nfile = "and{seed}.csv"\ntarget = "y"\n'
            'task = "binary"\nsource = "synthetic: y = (a > 0.5) and (b > 0.3)"\n'
        )
    (folder / "and.toml").write_text("\n".join(entries))
    return [f"and_{tag}_{s}" for s in seeds]


def _study(folder, sampler="tpe", configurations=10, extra="", space=None):
    names = _data(folder)
    datasets = ", ".join(f'{{ manifest = "and.toml", name = "{n}" }}' for n in names)
    space = space or (
        "max_depth = [1, 2]\nmin_samples_leaf = { low = 1, high = 150, log = true }\n"
        "se = { low = 0.0, high = 2.0 }\ninner_folds = [3]\n"
    )
    path = folder / "search.toml"
    path.write_text(
        f'name = "search-unit"\nseed = 5\ndatasets = [{datasets}]\n[outer]\nrepeats = 1\n'
        f'folds = 3\n[search]\nsampler = "{sampler}"\nconfigurations = {configurations}\n'
        f"{extra}[search.space]\n{space}"
    )
    return path


def test_search_finds_the_depth_two_tree(tmp_path):
    study = load_study(_study(tmp_path))
    db = tmp_path / "r.sqlite"
    summary = conduct(study, db, progress=Progress(0, io.StringIO()))
    found = summary.search
    assert found["configurations"] == 10
    assert found["best"]["max_depth"] == 2 and found["best"]["min_samples_leaf"] < 60
    assert found["best_value"] < 0.1 and found["ci_low"] <= found["best_value"] <= found["ci_high"]
    # Optuna's storage sits beside the results file, and its tables never inside it
    assert search_storage_path(db).exists()
    tables = {
        r[0]
        for r in sqlite3.connect(db).execute("SELECT name FROM sqlite_master WHERE type = 'table'")
    }
    assert not any(t.startswith(("trial_", "study_", "alembic", "version_info")) for t in tables)
    # every proposed configuration is ordinary trials: the statistics read them
    result = CliRunner().invoke(main, ["compare", "--db", str(db), "--json"])
    assert result.exit_code == 0
    depth_one = (
        sqlite3.connect(db)
        .execute(
            "SELECT AVG(f.error) FROM folds f JOIN trials t USING (trial_id) "
            "WHERE f.arm = 'pruned' AND t.max_depth = 1"
        )
        .fetchone()[0]
    )
    # the seeded search tries depth 1 (its startup proposals are random over [1, 2]); one
    # split cannot fit (a > 0.5) and (b > 0.3): about 0.15 of the rows stay wrong
    assert depth_one is not None and depth_one > 0.1


def test_early_stopping_is_reported_as_such(tmp_path):
    path = _stop_study(tmp_path)
    result = CliRunner().invoke(main, ["conduct", str(path)])
    assert result.exit_code == 0, result.output
    assert "stopped early" in result.output
    storage = optuna.load_study(
        study_name="stop-unit", storage=f"sqlite:///{search_storage_path(tmp_path / 'stop.sqlite')}"
    )
    pruned = [t for t in storage.trials if t.state == optuna.trial.TrialState.PRUNED]
    assert pruned and all(t.params["max_depth"] == 1 for t in pruned)


def _stop_study(folder):
    """A random search on four sets where early stopping ends the depth-1 configurations."""
    names = _data(folder, seeds=(0, 1, 2, 3))
    datasets = ", ".join(f'{{ manifest = "and.toml", name = "{n}" }}' for n in names)
    path = folder / "stop.toml"
    path.write_text(
        f'name = "stop-unit"\nseed = 3\ndatasets = [{datasets}]\n[outer]\nrepeats = 1\nfolds = 3\n'
        '[search]\nsampler = "random"\nconfigurations = 12\n[search.space]\nmax_depth = [1, 2]\n'
        "inner_folds = [3]\n"
    )
    return path


def test_configurations_stopped_early_leave_no_trial_pending(tmp_path):
    path = _stop_study(tmp_path)
    db = tmp_path / "stop.sqlite"
    first = CliRunner().invoke(main, ["conduct", str(path)])
    assert first.exit_code == 0, first.output
    assert "stopped early" in first.output and ", 0 failed;" in first.output
    conn = sqlite3.connect(db)
    statuses = dict(conn.execute("SELECT status, COUNT(*) FROM trials GROUP BY status"))
    conn.close()
    # the data sets a stopped configuration did not reach were never recorded
    done = statuses.pop("done")
    assert statuses == {}
    # on a fresh database nothing was finished before this run
    assert f"{done} trials done, 0 failed, 0 already finished, of {done};" in first.output
    progress = CliRunner().invoke(main, ["progress", str(db), "--watch", "1"])
    assert progress.exit_code == 0 and progress.output.count("study 'stop-unit'") == 1
    assert f"{done} done, 0 failed, 0 pending of {done} trials" in progress.output
    assert "ETA 0m00s" in progress.output
    advice = CliRunner().invoke(main, ["recommend", "--db", str(db)])
    assert advice.exit_code == 0, advice.output
    assert "not complete" not in advice.output
    again = CliRunner().invoke(main, ["conduct", str(path)])
    assert again.exit_code == 0, again.output
    assert f"0 trials done, 0 failed, {done} already finished, of {done};" in again.output


def test_an_interrupted_configuration_is_resumed_and_not_counted_as_failed(tmp_path):
    # what a kill leaves: Optuna's record of the running configuration, and its trials
    # pending in the results database
    from prunebench.search import _complete_levels, _suggest
    from prunebench.store import ResultStore

    study = load_study(_study(tmp_path, configurations=4))
    db = tmp_path / "r.sqlite"
    storage = f"sqlite:///{search_storage_path(db)}"
    running = optuna.create_study(study_name=study.name, storage=storage).ask()
    levels = _complete_levels(study, _suggest(running, study.search.space))
    stale = [study.trial_group(key, levels).trials[0] for key in study.datasets]
    with ResultStore(db, lock=True) as store:
        store.register_study(study)
        store.add_trials(study, stale)
    summary = conduct(study, db, progress=Progress(0, io.StringIO()))
    assert (summary.search["configurations"], summary.search["failed"]) == (4, 0)
    interrupted, resumed = optuna.load_study(study_name=study.name, storage=storage).trials[:2]
    assert interrupted.state == optuna.trial.TrialState.FAIL
    assert resumed.params == interrupted.params  # proposed again, first
    conn = sqlite3.connect(db)
    assert conn.execute("SELECT COUNT(*) FROM trials WHERE status != 'done'").fetchone()[0] == 0
    assert summary.done == summary.total  # nothing was finished before this run
    conn.close()


def test_grid_sampler_covers_the_grid_once(tmp_path):
    path = _study(
        tmp_path,
        sampler="grid",
        configurations=50,
        space="max_depth = [1, 2, 3]\nse = [0.0, 1.0]\ninner_folds = [3]\n",
        extra="early_stopping = false\n",
    )
    summary = conduct(load_study(path), tmp_path / "g.sqlite", progress=Progress(0, io.StringIO()))
    assert summary.search["configurations"] == 6
    rules = {
        r[0]
        for r in sqlite3.connect(tmp_path / "g.sqlite").execute("SELECT DISTINCT rule FROM trials")
    }
    assert rules == {"0se", "1se"}


def test_search_resumes_after_kill_9_without_repeating_configurations(tmp_path):
    path = _study(tmp_path, configurations=14)
    db = tmp_path / "search.sqlite"
    cmd = [sys.executable, "-m", "prunebench.cli", "conduct", str(path)]
    proc = start_and_wait(cmd, db, at_least=7)
    proc.send_signal(signal.SIGKILL)
    proc.wait()
    conn = sqlite3.connect(db)
    before = dict(conn.execute("SELECT trial_id, finished FROM trials WHERE status = 'done'"))
    conn.close()
    result = subprocess.run(cmd, capture_output=True, text=True, timeout=300)
    assert result.returncode == 0, result.stderr
    # Optuna's record of the configuration the kill interrupted is no failed configuration
    assert "of them stopped early, 0 failed;" in result.stdout
    conn = sqlite3.connect(db)
    after = dict(conn.execute("SELECT trial_id, finished FROM trials WHERE status = 'done'"))
    # nothing finished before the kill ran again
    assert all(after[t] == f for t, f in before.items())
    assert conn.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
    storage = optuna.load_study(
        study_name="search-unit", storage=f"sqlite:///{search_storage_path(db)}"
    )
    ended = [
        t
        for t in storage.trials
        if t.state in (optuna.trial.TrialState.COMPLETE, optuna.trial.TrialState.PRUNED)
    ]
    assert len(ended) == 14
    configurations = conn.execute(
        "SELECT COUNT(*) FROM (SELECT DISTINCT max_depth, min_samples_leaf, rule FROM trials)"
    ).fetchone()[0]
    distinct_params = {tuple(sorted(t.params.items())) for t in ended}
    assert configurations == len(
        {
            (p[0], p[1], round(p[2], 2))
            for p in (
                (dict(t)["max_depth"], dict(t)["min_samples_leaf"], dict(t)["se"])
                for t in distinct_params
            )
        }
    )


@pytest.mark.parametrize(
    "search, phrase",
    [
        ('[search]\nsampler = "anneal"\n[search.space]\nmax_depth = [1]\n', "not a sampler"),
        ("[search]\nconfigurations = 0\n[search.space]\nmax_depth = [1]\n", ">= 1"),
        ("[search]\n[search.space]\nsplitter = ['best']\n", "not searchable"),
        ("[search]\n[search.space]\nse = { low = 2, high = 1 }\n", "low < high"),
        (
            '[search]\nsampler = "grid"\n[search.space]\nse = { low = 0, high = 1 }\n',
            "list of choices",
        ),
        ("[search]\n[search.space]\ncriterion = ['variance']\n", "criterion"),
        ("[search]\n[search.space]\nmax_depth = [1]\n[factors]\nrule = ['min']\n", "remove"),
    ],
)
def test_bad_search_sections(search, phrase, tmp_path):
    path = tmp_path / "bad.toml"
    path.write_text('name = "bad"\nseed = 1\ndatasets = ["iris"]\n' + search)
    with pytest.raises(StudyError, match=phrase):
        load_study(path)
