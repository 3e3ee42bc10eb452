"""Tests of the results database's schema and upgrade steps (prunebench.schema)."""

from __future__ import annotations

import sqlite3

import pytest

from prunebench.evaluate import EvaluationSettings, evaluate_group
from prunebench.schema import SCHEMA_VERSION
from prunebench.store import ResultStore
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
