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
    assert tables == {
        "studies",
        "datasets",
        "trials",
        "growths",
        "unpruned_folds",
        "pruned_folds",
        "curves",
        "environments",
    }
    views = {r[0] for r in conn.execute("SELECT name FROM sqlite_master WHERE type='view'")}
    assert views == {"folds", "arm_summary", "fold_differences"}
    # each result once: 2 growth settings x 3 folds unpruned, 4 trials x 3 folds pruned
    assert conn.execute("SELECT COUNT(*) FROM unpruned_folds").fetchone()[0] == 2 * 3
    assert conn.execute("SELECT COUNT(*) FROM pruned_folds").fetchone()[0] == 4 * 3
    assert conn.execute("SELECT COUNT(*) FROM folds").fetchone()[0] == 4 * 3 * 2
    assert conn.execute("SELECT COUNT(*) FROM growths").fetchone()[0] == 2
    without_rowid = {
        name
        for name, sql in conn.execute("SELECT name, sql FROM sqlite_master WHERE type='table'")
        if sql.rstrip().endswith("WITHOUT ROWID")
    }
    assert without_rowid == {"unpruned_folds", "pruned_folds", "curves"}
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
            store.db.conn.execute("DELETE FROM pruned_folds")


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


def _columns(conn) -> dict:
    names = [
        r[0] for r in conn.execute("SELECT name FROM sqlite_master WHERE type IN ('table', 'view')")
    ]
    return {n: [(r[1], r[2], r[3]) for r in conn.execute(f"PRAGMA table_info({n})")] for n in names}


def _rows(conn, sql):
    return sorted(conn.execute(sql).fetchall(), key=repr)


def test_a_previous_release_database_is_upgraded_and_answers_as_before(tmp_path):
    # tests/fixtures/previous_release.sqlite was written by 0.1.0 (schema 1, one fold row per
    # trial and arm); the upgrade must keep every answer of folds and the views, row for row
    import shutil
    from pathlib import Path

    old = Path(__file__).with_name("fixtures") / "previous_release.sqlite"
    copy = shutil.copy(old, tmp_path / "old.sqlite")
    before = sqlite3.connect(old)
    assert before.execute("PRAGMA user_version").fetchone()[0] == 1
    fold_columns = [r[1] for r in before.execute("PRAGMA table_info(folds)")]
    # unpruned timings differed between the old groups that grew the same tree: left out
    no_timing = ", ".join(f'"{c}"' for c in fold_columns if c != "fit_seconds")
    # the views gained columns (select_by, class_weight, the new metrics): the old ones answer
    differences = ", ".join(
        f'"{r[1]}"' for r in before.execute("PRAGMA table_info(fold_differences)")
    )
    summary_columns = ", ".join(
        f'"{r[1]}"' for r in before.execute("PRAGMA table_info(arm_summary)")
    )
    queries = [
        f"SELECT {no_timing} FROM folds",
        "SELECT trial_id, \"repeat\", fold, fit_seconds FROM folds WHERE arm = 'pruned'",
        f"SELECT {differences} FROM fold_differences",
        "SELECT * FROM curves",
        "SELECT * FROM trials",
    ]
    expected = [_rows(before, q) for q in queries]
    summary_sql = f"SELECT {summary_columns} FROM arm_summary ORDER BY trial_id, arm"
    summary = before.execute(summary_sql).fetchall()
    before.close()

    with ResultStore(copy) as store:
        assert store.integrity() == "ok"
    after = sqlite3.connect(copy)
    assert after.execute("PRAGMA user_version").fetchone()[0] == SCHEMA_VERSION == 2
    assert after.execute("PRAGMA foreign_key_check").fetchall() == []
    for query, rows in zip(queries[:-1], expected[:-1], strict=True):
        assert _rows(after, query) == rows, query
    # the trials keep every column and value; the added select_by and class_weight are the
    # levels every 0.1.0 trial had, the added growth_id names one growth row each
    trials = _rows(after, "SELECT * FROM trials")
    assert [t[:-3] for t in trials] == expected[-1]
    assert {t[-2] for t in trials} == {"none"} and {t[-3] for t in trials} == {"error", "mse"}
    assert all(t[-1] is not None for t in trials)
    # 3 data sets x 2 criteria (1 for diabetes) x 2 depths grow distinct trees
    assert after.execute("SELECT COUNT(*) FROM growths").fetchone()[0] == (2 + 2 + 1) * 2
    assert after.execute("SELECT COUNT(*) FROM unpruned_folds").fetchone()[0] == 10 * 2 * 3
    got = after.execute(summary_sql).fetchall()
    assert len(got) == len(summary) == 80 * 2
    for new, was in zip(got, summary, strict=True):
        # means of the same values summed in another order: equal to rounding
        for a, b in zip(new, was, strict=True):
            assert a == (pytest.approx(b, rel=1e-12, abs=1e-15) if isinstance(b, float) else b)
    # decision's tree-shape columns are in the view; the old rows have none recorded
    names = [r[1] for r in after.execute("PRAGMA table_info(folds)")]
    assert {"root_feature", "features_used"} <= set(names)
    assert after.execute("SELECT COUNT(*) FROM folds WHERE root_feature IS NOT NULL").fetchone()[
        0
    ] == 0
    # the upgraded file has the schema of a new one, column for column
    ResultStore(tmp_path / "new.sqlite").close()
    fresh = sqlite3.connect(tmp_path / "new.sqlite")
    assert _columns(after) == _columns(fresh)
    after.close()
    fresh.close()


def test_an_old_database_is_read_without_the_shape_columns(tmp_path):
    import shutil
    from pathlib import Path

    from prunebench.results import load_folds

    old = Path(__file__).with_name("fixtures") / "previous_release.sqlite"
    copy = tmp_path / "old.sqlite"
    shutil.copy(old, copy)
    with ResultStore(copy, readonly=True) as store:
        folds = load_folds(store)
    assert "root_feature" not in folds and len(folds) > 0


def test_the_upgraded_fixture_takes_the_same_study_again_without_changes(tmp_path):
    # conducting the fixture's study into its upgraded database finds every trial done
    import io
    import shutil
    from pathlib import Path

    from prunebench.execute import Progress, conduct
    from prunebench.study import load_study

    fixtures = Path(__file__).with_name("fixtures")
    shutil.copy(fixtures / "previous_release.toml", tmp_path / "study.toml")
    db = shutil.copy(fixtures / "previous_release.sqlite", tmp_path / "old.sqlite")
    summary = conduct(load_study(tmp_path / "study.toml"), db, progress=Progress(0, io.StringIO()))
    assert (summary.done, summary.skipped) == (0, 80)


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
    # (the stored rows themselves: test_a_previous_release_database_is_upgraded_and_...)
    assert conn.execute("SELECT COUNT(*) FROM folds WHERE auc IS NOT NULL").fetchone() == (0,)
    assert conn.execute("SELECT COUNT(*) FROM arm_summary").fetchone()[0] > 0
