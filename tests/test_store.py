"""Tests of the results database (prunebench.store)."""

from __future__ import annotations

import os
import sqlite3
import subprocess
import sys

import pytest

from prunebench.evaluate import EvaluationSettings, evaluate_group
from prunebench.store import SCHEMA_VERSION, ResultStore, StoreError
from prunebench.study import parse_study

STUDY = """\
name = "store-unit"
seed = 4
datasets = ["iris"]
[outer]
repeats = 1
folds = 3
[factors]
max_depth = ["none", 2]
inner_folds = [3]
rule = ["min", "1se"]
"""


@pytest.fixture
def filled(tmp_path):
    study = parse_study(STUDY)
    path = tmp_path / "r.sqlite"
    with ResultStore(path) as store:
        store.register_study(study)
        for group in study.groups():
            settings = EvaluationSettings(seed=study.seed, repeats=1, folds=3)
            result = evaluate_group(group, study.datasets["iris"], settings)
            store.save_group(result, group.trials, "t0", "t1")
    return study, path


def test_schema_tables_columns_and_version(filled):
    _, path = filled
    conn = sqlite3.connect(path)
    tables = {r[0] for r in conn.execute("SELECT name FROM sqlite_master WHERE type='table'")}
    assert tables == {"studies", "datasets", "trials", "folds", "curves", "environments"}
    views = {r[0] for r in conn.execute("SELECT name FROM sqlite_master WHERE type='view'")}
    assert views == {"arm_summary", "fold_differences"}
    columns = {r[1]: r[2] for r in conn.execute("PRAGMA table_info(trials)")}
    assert columns["max_depth"] == "INTEGER" and columns["criterion"] == "TEXT"
    for factor in (
        "criterion",
        "max_depth",
        "min_samples_leaf",
        "inner_folds",
        "rule",
        "prune_risk",
    ):
        assert factor in columns
    fold_columns = {r[1] for r in conn.execute("PRAGMA table_info(folds)")}
    for metric in (
        "error",
        "accuracy",
        "balanced_accuracy",
        "log_loss",
        "brier",
        "mse",
        "mae",
        "r2",
        "n_leaves",
        "depth",
        "alpha",
        "fit_seconds",
        "test_fingerprint",
    ):
        assert metric in fold_columns
    assert conn.execute("PRAGMA user_version").fetchone()[0] == SCHEMA_VERSION
    indexes = {r[0] for r in conn.execute("SELECT name FROM sqlite_master WHERE type='index'")}
    assert "trials_study_status" in indexes


def test_unlimited_depth_is_null_and_rows_are_complete(filled):
    study, path = filled
    conn = sqlite3.connect(path)
    depths = {r[0] for r in conn.execute("SELECT DISTINCT max_depth FROM trials")}
    assert depths == {None, 2}
    assert conn.execute("SELECT COUNT(*) FROM trials WHERE status = 'done'").fetchone()[0] == 4
    # 4 trials x 3 outer folds x 2 arms
    assert conn.execute("SELECT COUNT(*) FROM folds").fetchone()[0] == 24


def test_views_agree_with_the_folds_table(filled):
    _, path = filled
    conn = sqlite3.connect(path)
    diff = conn.execute(
        'SELECT trial_id, "repeat", fold, error, n_leaves FROM fold_differences'
    ).fetchall()
    assert len(diff) == 12
    for trial_id, repeat, fold, d_error, d_leaves in diff:
        rows = dict(
            (arm, (error, leaves))
            for arm, error, leaves in conn.execute(
                'SELECT arm, error, n_leaves FROM folds WHERE trial_id=? AND "repeat"=? AND fold=?',
                (trial_id, repeat, fold),
            )
        )
        assert d_error == pytest.approx(rows["pruned"][0] - rows["unpruned"][0])
        assert d_leaves == rows["pruned"][1] - rows["unpruned"][1]
    summary = conn.execute("SELECT trial_id, arm, n_folds, error FROM arm_summary").fetchall()
    assert len(summary) == 8
    for trial_id, arm, n_folds, error in summary:
        expected = conn.execute(
            "SELECT AVG(error) FROM folds WHERE trial_id=? AND arm=?", (trial_id, arm)
        ).fetchone()[0]
        assert n_folds == 3 and error == pytest.approx(expected)


def test_registering_again_adds_nothing_and_changed_seed_is_refused(filled):
    study, path = filled
    with ResultStore(path) as store:
        store.register_study(study)
        assert len(store.statuses(study.study_id)) == 4
        changed = parse_study(STUDY.replace("seed = 4", "seed = 5"))
        with pytest.raises(StoreError, match="seed 4 -> 5"):
            store.register_study(changed)
        changed = parse_study(STUDY.replace("folds = 3", "folds = 4"))
        with pytest.raises(StoreError, match="outer 1x3 -> 1x4"):
            store.register_study(changed)


def test_newer_schema_and_foreign_files_are_refused(tmp_path):
    newer = tmp_path / "newer.sqlite"
    conn = sqlite3.connect(newer)
    conn.execute(f"PRAGMA user_version = {SCHEMA_VERSION + 1}")
    conn.close()
    with pytest.raises(StoreError, match="newer prunebench"):
        ResultStore(newer)
    foreign = tmp_path / "foreign.sqlite"
    conn = sqlite3.connect(foreign)
    conn.execute("CREATE TABLE recipes (x)")
    conn.close()
    with pytest.raises(StoreError, match="not a prunebench results database"):
        ResultStore(foreign)
    garbage = tmp_path / "garbage.sqlite"
    garbage.write_bytes(b"this is not a database" * 100)
    with pytest.raises(StoreError, match="is damaged"):
        ResultStore(garbage)
    assert garbage.read_bytes() == b"this is not a database" * 100


def test_second_writer_is_refused(tmp_path):
    path = tmp_path / "r.sqlite"
    with ResultStore(path, lock=True):
        with pytest.raises(StoreError, match="being written by another 'prunebench conduct'"):
            ResultStore(path, lock=True)
    with ResultStore(path, lock=True):  # released on close
        pass


def test_readonly_store_refuses_writes(filled):
    _, path = filled
    with ResultStore(path, readonly=True) as store:
        assert store.integrity() == "ok"
        with pytest.raises(sqlite3.OperationalError):
            store.db.conn.execute("DELETE FROM folds")


def test_a_writer_uses_wal_and_leaves_one_self_contained_file(tmp_path):
    path = tmp_path / "j.sqlite"
    with ResultStore(path) as store:
        store.register_study(parse_study(STUDY))
        assert store.db.conn.execute("PRAGMA journal_mode").fetchone()[0] == "wal"
        assert path.with_name("j.sqlite-wal").exists()
    # closed: back in rollback-journal mode, no -wal or -shm beside it
    assert sorted(p.name for p in tmp_path.iterdir()) == ["j.sqlite"]
    conn = sqlite3.connect(f"file:{path}?mode=ro", uri=True)
    assert conn.execute("PRAGMA journal_mode").fetchone()[0] == "delete"
    conn.close()
    # reading creates nothing either
    with ResultStore(path, readonly=True) as store:
        assert len(store.statuses(parse_study(STUDY).study_id)) == 4
    assert sorted(p.name for p in tmp_path.iterdir()) == ["j.sqlite"]


def test_write_hook_runs_inside_the_open_transaction(tmp_path):
    study = parse_study(STUDY)
    path = tmp_path / "h.sqlite"
    seen = []

    def look_from_outside():
        # another connection does not see the group yet: the transaction is still open
        other = sqlite3.connect(f"file:{path}?mode=ro", uri=True)
        seen.append(other.execute("SELECT COUNT(*) FROM folds").fetchone()[0])
        other.close()

    with ResultStore(path, write_hook=look_from_outside) as store:
        store.register_study(study)
        group = study.groups()[0]
        settings = EvaluationSettings(seed=study.seed, repeats=1, folds=3)
        store.save_group(
            evaluate_group(group, study.datasets["iris"], settings), group.trials, "t0", "t1"
        )
        assert store.db.conn.execute("SELECT COUNT(*) FROM folds").fetchone()[0] == 12
    assert seen == [0]
    with ResultStore(path) as store:  # no hook unless one is given
        assert store.write_hook is None


def test_a_lock_whose_holder_died_is_taken_over(tmp_path):
    # the holder forks a child that keeps the lock file open (as an orphaned worker did),
    # then dies: the lock names a dead process and is stale
    path = tmp_path / "stale.sqlite"
    child_pid = tmp_path / "child.pid"
    code = (
        "import os, sys, time\n"
        "from prunebench.store import ResultStore\n"
        f"store = ResultStore({str(path)!r}, lock=True)\n"
        "pid = os.fork()\n"
        "if pid == 0:\n"
        "    time.sleep(120); os._exit(0)\n"
        f"open({str(child_pid)!r}, 'w').write(str(pid))\n"
        "os._exit(0)\n"
    )
    subprocess.run([sys.executable, "-c", code], check=True, timeout=120)
    orphan = int(child_pid.read_text())
    try:
        assert "pid" in path.with_name("stale.sqlite.lock").read_text()
        os.kill(orphan, 0)  # the orphan is alive and still holds the old lock file
        with ResultStore(path, lock=True):
            assert f"pid {os.getpid()}" in path.with_name("stale.sqlite.lock").read_text()
            # a living holder is still respected
            with pytest.raises(StoreError, match="being written by another"):
                ResultStore(path, lock=True)
    finally:
        os.kill(orphan, 9)
    # nothing of the takeover is left behind but the lock file and its guard
    assert sorted(p.name for p in tmp_path.iterdir()) == [
        "child.pid",
        "stale.sqlite",
        "stale.sqlite.lock",
        "stale.sqlite.lock.takeover",
    ]


def test_a_lock_named_by_a_living_process_is_not_taken(tmp_path):
    path = tmp_path / "alive.sqlite"
    holder = subprocess.Popen(
        [
            sys.executable,
            "-c",
            f"from prunebench.store import ResultStore\nimport sys\n"
            f"s = ResultStore({str(path)!r}, lock=True)\nprint('held', flush=True)\n"
            "sys.stdin.read()\n",
        ],
        stdin=subprocess.PIPE,
        stdout=subprocess.PIPE,
        text=True,
    )
    try:
        assert holder.stdout.readline().strip() == "held"
        with pytest.raises(StoreError, match=f"pid {holder.pid}"):
            ResultStore(path, lock=True)
    finally:
        holder.stdin.close()
        holder.wait(timeout=60)
    with ResultStore(path, lock=True):  # its holder ended normally: free
        pass


def _schema(path):
    import re

    conn = sqlite3.connect(path)
    rows = conn.execute("SELECT type, name, sql FROM sqlite_master WHERE type != 'table'")
    others = sorted((kind, name, re.sub(r"\s+", " ", sql or "")) for kind, name, sql in rows)
    tables = [r[0] for r in conn.execute("SELECT name FROM sqlite_master WHERE type = 'table'")]
    columns = {
        t: sorted(tuple(r[1:]) for r in conn.execute(f"PRAGMA table_info({t})")) for t in tables
    }
    return others, columns, conn.execute("PRAGMA user_version").fetchone()[0]


def test_the_previous_release_upgrades_to_the_new_schema(tmp_path):
    # a database written by 0.1.0 (tests/fixtures/previous_release.sqlite, schema 1) is
    # upgraded on opening: the same columns (name, type, NOT NULL, default), indexes and
    # views as a new database, its trials at the levels they had (alpha chosen by error
    # or mse, unweighted trees) and NULL for the metrics it did not store
    import shutil
    from pathlib import Path

    old = Path(__file__).with_name("fixtures") / "previous_release.sqlite"
    assert _schema(old)[2] == 1
    copy = shutil.copy(old, tmp_path / "old.sqlite")
    before = sqlite3.connect(copy).execute("SELECT * FROM folds ORDER BY 1, 2, 3, 4").fetchall()
    ResultStore(copy).close()
    ResultStore(tmp_path / "new.sqlite").close()
    assert _schema(copy) == _schema(tmp_path / "new.sqlite")
    assert _schema(copy)[2] == SCHEMA_VERSION == 2
    conn = sqlite3.connect(copy)
    levels = conn.execute(
        "SELECT d.task = 'regression', t.select_by, t.class_weight, COUNT(*) "
        "FROM trials t JOIN datasets d USING (dataset_id) GROUP BY 1, 2, 3 ORDER BY 1"
    ).fetchall()
    assert [row[:3] for row in levels] == [(0, "error", "none"), (1, "mse", "none")]
    old_columns = [r[1] for r in sqlite3.connect(old).execute("PRAGMA table_info(folds)")]
    kept = conn.execute(
        f"SELECT {', '.join(f'[{c}]' for c in old_columns)} FROM folds ORDER BY 1, 2, 3, 4"
    ).fetchall()
    assert kept == before  # the stored rows are untouched
    assert conn.execute("SELECT COUNT(*) FROM folds WHERE auc IS NOT NULL").fetchone() == (0,)
    assert conn.execute("SELECT COUNT(*) FROM arm_summary").fetchone()[0] > 0
