"""Tests of the tables and views as pandas frames: notebooks and exports (prunebench.tables)."""

from __future__ import annotations

import sqlite3
from pathlib import Path

import pandas as pd
import pytest
from click.testing import CliRunner

from prunebench import open_results
from prunebench.cli import main
from prunebench.tables import TABLES, VIEWS


def test_open_results_round_trips_what_the_store_wrote(small_db):
    results = open_results(small_db)
    conn = sqlite3.connect(small_db)
    # every table and view the store makes is readable here and exported
    stored = conn.execute(
        "SELECT type, name FROM sqlite_master WHERE type IN ('table', 'view') "
        "AND name NOT LIKE 'sqlite_%'"
    ).fetchall()
    assert sorted(name for kind, name in stored if kind == "table") == sorted(TABLES)
    assert sorted(name for kind, name in stored if kind == "view") == sorted(VIEWS)
    for name in TABLES + VIEWS:
        ours = results.table(name)
        cursor = conn.execute(f'SELECT * FROM "{name}"')
        raw = cursor.fetchall()
        assert list(ours.columns) == [c[0] for c in cursor.description]
        assert len(ours) == len(raw)

        def native(v):
            return None if pd.isna(v) else (v.item() if hasattr(v, "item") else v)

        rebuilt = [tuple(native(v) for v in row) for row in ours.itertuples(index=False)]
        assert sorted(rebuilt, key=repr) == sorted(raw, key=repr), name
        for a, b in zip(sorted(rebuilt, key=repr), sorted(raw, key=repr), strict=True):
            assert [type(x) for x in a] == [type(x) for x in b], name
    assert len(results.folds()) == 48 * 6 * 2
    assert set(results.comparison()["verdict"]) <= {
        "pruned better",
        "unpruned better",
        "no evidence either way",
    }
    assert results.ranking()[0]["family"] == "classification"
    rec = results.recommendation()[0]
    assert rec["config"]["criterion"] in ("gini", "entropy")
    # the stored study is read as the command reads it: bundled data, so not the team's own
    assert rec["own_data"] is False and "costs" in rec


def test_export_writes_every_table(small_db, tmp_path):
    result = CliRunner().invoke(main, ["export", "--db", str(small_db), "--out", str(tmp_path)])
    assert result.exit_code == 0, result.output
    for name in TABLES + VIEWS:
        frame = pd.read_csv(tmp_path / f"{name}.csv")
        assert len(frame) == len(open_results(small_db).table(name))
    pytest.importorskip("pyarrow")
    CliRunner().invoke(
        main,
        ["export", "--db", str(small_db), "--out", str(tmp_path / "pq"), "--format", "parquet"],
    )
    folds = pd.read_parquet(tmp_path / "pq" / "folds.parquet")
    assert len(folds) == 48 * 6 * 2


def test_export_refuses_to_replace_files_unless_overwrite(small_db, tmp_path):
    out = tmp_path / "out"
    out.mkdir()
    (out / "trials.csv").write_text("mine\n")
    args = ["export", "--db", str(small_db), "--out", str(out)]
    refused = CliRunner().invoke(main, args)
    assert refused.exit_code == 2
    assert refused.output.startswith("error: ") and refused.output.count("\n") == 1
    assert "trials.csv" in refused.output and "--overwrite" in refused.output
    # nothing written: the file kept, no other table exported
    assert sorted(p.name for p in out.iterdir()) == ["trials.csv"]
    assert (out / "trials.csv").read_text() == "mine\n"
    replaced = CliRunner().invoke(main, [*args, "--overwrite"])
    assert replaced.exit_code == 0, replaced.output
    assert len(pd.read_csv(out / "trials.csv")) == len(open_results(small_db).trials())


def test_export_writes_each_file_whole_or_not_at_all(small_db, tmp_path, monkeypatch):
    real = pd.DataFrame.to_csv

    def fails_on_folds(frame, target, *args, **kwargs):
        if "test_fingerprint" in frame.columns:  # the folds table
            Path(target).write_text("half a fi")
            raise OSError(28, "No space left on device")
        return real(frame, target, *args, **kwargs)

    monkeypatch.setattr(pd.DataFrame, "to_csv", fails_on_folds)
    result = CliRunner().invoke(main, ["export", "--db", str(small_db), "--out", str(tmp_path)])
    assert result.exit_code == 2
    assert result.output.count("\n") == 1 and "folds.csv" in result.output
    assert "No space left" in result.output
    names = {p.name for p in tmp_path.iterdir()}
    assert "folds.csv" not in names and not any(n.endswith(".partial") for n in names)


def test_results_effects_use_the_study_files_reference_levels(small_db):
    from prunebench.effects import factor_effects

    opened = open_results(small_db)
    table = opened.effects()
    # tests/conftest.py's SMALL_STUDY lists gini, "none", 3 folds and "min" first
    expected = factor_effects(
        opened.fold_rows(),
        {"criterion": ["gini", "entropy"], "max_depth": [None, 3], "inner_folds": [3, 4],
         "rule": ["min", "1se"]},
    )
    pd.testing.assert_frame_equal(table, expected)
    assert set(table.loc[table["factor"] == "rule", "reference"]) == {"min"}
    inter = opened.effects(interactions=True)
    assert {"by", "by_level", "flagged"} <= set(inter.columns)


def test_effects_of_a_search_take_the_smallest_level_seen_as_the_reference(tmp_path, search_db):
    # a search lists no levels: a factor's reference is the smallest level its
    # configurations have (no cap last); a grid search crosses them, so each is paired
    study = tmp_path / "grid.toml"
    study.write_text(
        'name = "grid-effects"\nseed = 2\ndatasets = ["iris", "wine"]\n[outer]\nrepeats = 1\n'
        'folds = 3\n[search]\nsampler = "grid"\nearly_stopping = false\n[search.space]\n'
        'max_depth = ["none", 2]\nse = [1.0, 0.0]\ninner_folds = [3]\n'
    )
    db = tmp_path / "grid.sqlite"
    assert CliRunner().invoke(main, ["conduct", str(study), "--db", str(db)]).exit_code == 0
    table = open_results(db).effects()
    references = dict(zip(table["factor"], table["reference"], strict=False))
    assert references == {"pruning": "unpruned", "max_depth": 2, "rule": "0se"}
    assert set(table.loc[table["factor"] == "max_depth", "level"].map(pd.isna)) == {True}
    # a random search pairs no level with its reference: pruning's contrast alone
    for database in (db, search_db):
        result = CliRunner().invoke(main, ["effects", "--db", str(database)])
        assert result.exit_code == 0, result.output
        assert "pruned vs unpruned" in result.output
