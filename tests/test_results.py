"""Tests of the one reader (prunebench.results) and the read commands: SQL, which study, folds."""

from __future__ import annotations

import functools
import hashlib
import io
import json
import sqlite3

import pandas as pd
import pytest
from click.testing import CliRunner

from prunebench import open_results, results
from prunebench.cli import main
from prunebench.exceptions import InvalidParameterError
from prunebench.execute import Progress, conduct
from prunebench.store import ResultStore
from prunebench.study import parse_study
from prunebench.vocabulary import metric_names


def _digest(path):
    return hashlib.sha256(path.read_bytes()).hexdigest()


@pytest.mark.parametrize(
    "statement",
    [
        "INSERT INTO folds (trial_id) VALUES ('x')",
        "UPDATE trials SET status = 'pending'",
        "DELETE FROM folds",
        "DROP TABLE folds",
        "CREATE TABLE notes (x)",
        "ALTER TABLE trials ADD COLUMN note TEXT",
        "ATTACH DATABASE 'other.sqlite' AS other",
        "PRAGMA user_version = 99",
        "PRAGMA journal_mode = DELETE",
        "REPLACE INTO studies (study_id) VALUES ('x')",
        "WITH doomed AS (SELECT trial_id FROM trials) DELETE FROM folds",
        "  delete from curves;",
        "VACUUM",
        "SELECT 1; DELETE FROM folds",
        "SELECT 1; -- note\nDELETE FROM folds",
        "/* a comment first */ DELETE FROM folds",
        "WITH x AS (SELECT 1) UPDATE sqlite_master SET sql = ''",
        "SELECT * FROM pragma_table_info('trials'); DROP TABLE folds",
        "BEGIN",
    ],
)
def test_sql_refuses_every_kind_of_write_and_leaves_the_file_alone(statement, small_db):
    before = _digest(small_db)
    result = CliRunner().invoke(main, ["sql", "--db", str(small_db), statement])
    assert result.exit_code == 2, result.output
    assert result.output.startswith("error: ") and result.output.count("\n") == 1
    assert "refused" in result.output or "one statement" in result.output
    assert _digest(small_db) == before


def test_sql_reads_with_json_and_csv(small_db):
    query = "SELECT rule, COUNT(*) AS n FROM trials GROUP BY rule ORDER BY rule"
    as_json = json.loads(
        CliRunner().invoke(main, ["sql", "--db", str(small_db), query, "--json"]).output
    )
    assert as_json == [{"rule": "1se", "n": 24}, {"rule": "min", "n": 24}]
    as_csv = CliRunner().invoke(main, ["sql", "--db", str(small_db), query, "--csv"]).output
    assert as_csv.splitlines() == ["rule,n", "1se,24", "min,24"]
    pragma = CliRunner().invoke(main, ["sql", "--db", str(small_db), "PRAGMA table_info(folds)"])
    assert pragma.exit_code == 0 and "test_fingerprint" in pragma.output
    broken = CliRunner().invoke(main, ["sql", "--db", str(small_db), "SELECT nope FROM folds"])
    assert broken.exit_code == 2 and "no such column" in broken.output


@pytest.mark.parametrize(
    "query",
    [
        "SELECT name FROM pragma_table_info('trials')",
        "SELECT name FROM pragma_table_info('trials'); -- note",
    ],
)
def test_sql_runs_pragma_functions_and_queries_with_a_trailing_comment(query, small_db):
    before = _digest(small_db)
    result = CliRunner().invoke(main, ["sql", "--db", str(small_db), query, "--csv"])
    assert result.exit_code == 0, result.output
    # the reference: SQLite's own PRAGMA table_info, read with the standard library
    conn = sqlite3.connect(small_db)
    expected = [r[1] for r in conn.execute("PRAGMA table_info(trials)")]
    conn.close()
    assert result.output.splitlines() == ["name", *expected]
    note = CliRunner().invoke(main, ["sql", "--db", str(small_db), "SELECT 1 AS one; -- note"])
    assert note.exit_code == 0 and note.output.split() == ["one", "1"]
    assert _digest(small_db) == before


def test_sql_prints_integers_as_integers_and_null_as_blank(small_db):
    # the fixture sweeps max_depth "none" (stored as NULL) and 3
    query = "SELECT DISTINCT max_depth, inner_folds FROM trials ORDER BY max_depth, inner_folds"
    run = functools.partial(CliRunner().invoke, main, ["sql", "--db", str(small_db), query])
    as_csv = CliRunner().invoke(main, ["sql", "--db", str(small_db), query, "--csv"]).output
    assert as_csv.splitlines() == ["max_depth,inner_folds", ",3", ",4", "3,3", "3,4"]
    as_json = json.loads(
        CliRunner().invoke(main, ["sql", "--db", str(small_db), query, "--json"]).output
    )
    assert as_json[0] == {"max_depth": None, "inner_folds": 3}
    assert as_json[-1] == {"max_depth": 3, "inner_folds": 4}
    table = run().output.splitlines()
    assert [line.split() for line in table] == [
        ["max_depth", "inner_folds"], ["3"], ["4"], ["3", "3"], ["3", "4"]
    ]
    assert "NaN" not in run().output and ".0" not in run().output


TINY = """\
name = "tiny"
seed = 4
database = "results/tiny.sqlite"
datasets = ["iris", "wine"]
[outer]
repeats = 1
folds = 3
[factors]
max_depth = ["none", 2]
inner_folds = [3]
"""


@pytest.fixture(scope="module")
def tiny_study(tmp_path_factory):
    """A conducted study file whose ``database`` key puts the results in a subfolder."""
    folder = tmp_path_factory.mktemp("tiny")
    study = folder / "tiny.toml"
    study.write_text(TINY)
    result = CliRunner().invoke(main, ["conduct", str(study)])
    assert result.exit_code == 0, result.output
    return study, folder / "results" / "tiny.sqlite"


@pytest.mark.parametrize(
    "command",
    [
        ["compare"],
        ["compare", "--csv"],
        ["rank", "--json"],
        ["progress"],
        ["sql", "SELECT COUNT(*) AS n FROM trials"],
    ],
)
def test_read_commands_accept_the_study_file_for_its_database(command, tiny_study):
    study, db = tiny_study
    name, *rest = command
    reference = CliRunner().invoke(main, [name, "--db", str(db), *rest])
    assert reference.exit_code == 0, reference.output
    ways = [[name, "--db", str(study), *rest]]
    if name != "sql":  # sql's argument is the query
        ways += [[name, str(study), *rest], [name, str(db), *rest]]
    for args in ways:
        result = CliRunner().invoke(main, args)
        assert result.exit_code == 0, (args, result.output)
        if name != "progress":  # its rate line depends on the time
            assert result.output == reference.output, args


def test_export_accepts_the_study_file_for_its_database(tiny_study, tmp_path):
    study, db = tiny_study
    result = CliRunner().invoke(main, ["export", "--db", str(study), "--out", str(tmp_path)])
    assert result.exit_code == 0, result.output
    assert len(pd.read_csv(tmp_path / "trials.csv")) == len(open_results(db).trials()) == 4


def test_a_file_that_is_no_results_database_is_named_so(tmp_path):
    study = tmp_path / "fresh.toml"
    study.write_text(TINY.replace('database = "results/tiny.sqlite"\n', ""))
    notes = tmp_path / "notes.csv"
    notes.write_text("a,b\n1,2\n")
    for args, says in [
        (["compare", "--db", str(study)], f"the database it names, {tmp_path / 'fresh.sqlite'}"),
        (["rank", str(study)], "is a study file, not a results database"),
        (["sql", "--db", str(notes), "SELECT 1"], "not a results database"),
        (["recommend", "--db", str(notes)], "neither an SQLite file nor a study file"),
    ]:
        result = CliRunner().invoke(main, args)
        assert result.exit_code != 0
        assert result.output.startswith("error: ") and result.output.count("\n") == 1
        assert says in result.output, result.output
        assert "damaged" not in result.output
    assert sorted(p.name for p in tmp_path.iterdir()) == ["fresh.toml", "notes.csv"]


def test_results_path_of_a_study_file_is_where_conduct_writes(tmp_path):
    from prunebench.execute import default_database
    from prunebench.study import load_study

    for text in (TINY, TINY.replace('database = "results/tiny.sqlite"\n', "")):
        study = tmp_path / "s.toml"
        study.write_text(text)
        expected = default_database(load_study(study))
        expected.parent.mkdir(exist_ok=True)
        sqlite3.connect(expected).close()  # an empty SQLite file is enough to be found
        assert results.results_path(study) == expected
        assert results.results_path(expected) == expected


def test_arm_means_match_a_hand_aggregation(mixed_db):
    with ResultStore(mixed_db, readonly=True) as store:
        study_id = store.query("SELECT study_id FROM studies")[0]["study_id"]
        table = results.arm_means(store, study_id)
    conn = sqlite3.connect(mixed_db)
    assert len(table) == 4 * 2 * 2
    for row in table.itertuples():
        metric = "mse" if row.dataset == "diabetes" else "error"
        expected = conn.execute(
            f"SELECT AVG(f.{metric}) FROM folds f JOIN trials t USING (trial_id) "
            "JOIN datasets d USING (dataset_id) WHERE d.name=? AND t.rule=? AND f.arm=?",
            (row.dataset, row.rule, row.arm),
        ).fetchone()[0]
        assert row.value == pytest.approx(expected)


@pytest.fixture(scope="module")
def two_studies(mixed_db, tmp_path_factory):
    import shutil

    copy = tmp_path_factory.mktemp("two") / "two.sqlite"
    shutil.copy(mixed_db, copy)
    other = parse_study(
        'name = "other-unit"\nseed = 1\ndatasets = ["iris"]\n[outer]\nrepeats = 1\n'
        "folds = 3\n[factors]\ninner_folds = [3]\n"
    )
    conduct(other, copy, progress=Progress(0, io.StringIO()))
    return copy


@pytest.mark.parametrize("command", ["compare", "rank", "recommend", "progress"])
def test_every_command_has_one_policy_for_which_study(two_studies, command):
    several = CliRunner().invoke(main, [command, "--db", str(two_studies)])
    assert several.exit_code == 2
    assert several.output.strip() == (
        f"error: {two_studies} holds several studies (stats-unit, other-unit); "
        "pick one with --study ..."
    )
    missing = CliRunner().invoke(main, [command, "--db", str(two_studies), "--study", "nope"])
    assert missing.exit_code == 2
    assert "no study named 'nope'; it holds stats-unit, other-unit" in missing.output
    named = CliRunner().invoke(main, [command, "--db", str(two_studies), "--study", "other-unit"])
    assert named.exit_code == 0, named.output


def test_a_named_study_is_the_one_read(two_studies):
    named = CliRunner().invoke(
        main, ["compare", "--db", str(two_studies), "--study", "other-unit", "--json"]
    )
    assert {r["dataset"] for r in json.loads(named.output)} == {"iris"}


def test_resolve_study_names_keyword_parameters(two_studies):
    with ResultStore(two_studies, readonly=True) as store:
        with pytest.raises(results.QueryError, match=r"pick one with study=\.\.\."):
            results.resolve_study(store)
        assert results.resolve_study(store, "other-unit")["name"] == "other-unit"


def test_load_folds_columns_and_types(small_db):
    with ResultStore(small_db, readonly=True) as store:
        folds = results.load_folds(store)
    assert list(folds.columns[:9]) == [
        "dataset",
        "task",
        "trial_id",
        "criterion",
        "max_depth",
        "min_samples_leaf",
        "inner_folds",
        "rule",
        "prune_risk",
    ]
    assert str(folds["max_depth"].dtype) == "Int64" and folds["max_depth"].isna().any()
    assert folds["n_leaves"].dtype.kind == "i" and folds["error"].dtype.kind == "f"
    # every finished trial's folds, once per arm: 16 configurations x 3 datasets x 6 folds
    assert (
        len(folds) == 48 * 6 * 2
        and not folds.duplicated(["trial_id", "repeat", "fold", "arm"]).any()
    )


def test_load_folds_in_chunks_equals_one_read(mixed_db, monkeypatch):
    # Chunks of 7 rows: some hold only the regression set's rows, whose classification
    # metrics are all NULL, and some only unlimited depths; the frame must still have
    # the dtypes and values of one read.
    with ResultStore(mixed_db, readonly=True) as store:
        whole = results.load_folds(store)
        monkeypatch.setattr(results, "_READ_CHUNK", 7)
        chunked = results.load_folds(store)
    assert whole["error"].isna().any() and whole["mse"].isna().any()
    pd.testing.assert_frame_equal(chunked, whole)
    assert whole["error"].dtype == "float64" and str(whole["max_depth"].dtype) == "Int64"


def test_load_folds_reads_only_the_metrics_asked_for(mixed_db):
    with ResultStore(mixed_db, readonly=True) as store:
        whole = results.load_folds(store)
        some = results.load_folds(store, metrics=["mse", "error", "mse"])
        with pytest.raises(InvalidParameterError, match="metrics"):
            results.load_folds(store, metrics=["bogus"])
    gone = [m for m in metric_names() if m not in ("error", "mse")]
    assert "auc" in gone and not set(gone) & set(some.columns)
    pd.testing.assert_frame_equal(some, whole.drop(columns=gone))


def test_conduct_table_pivots_the_arm_means(mixed_db):
    with ResultStore(mixed_db, readonly=True) as store:
        study_id = results.resolve_study(store)["study_id"]
        long = results.arm_means(store, study_id)
    wide = results.conduct_table(mixed_db, study_id)
    row = long[(long["dataset"] == "diabetes") & (long["rule"] == "min")]
    got = wide.loc[("diabetes", "min", "mse")]
    assert got["pruned"] == pytest.approx(row.loc[row["arm"] == "pruned", "value"].item())
    assert got["leaves_unpruned"] == pytest.approx(
        row.loc[row["arm"] == "unpruned", "n_leaves"].item()
    )


# ---- decision settings, trial counts, effects and the recommendation ------------------


def _copy_with(tmp_path, source, *statements):
    import shutil

    path = tmp_path / "copy.sqlite"
    shutil.copy(source, path)
    conn = sqlite3.connect(path)
    with conn:
        for statement in statements:
            conn.execute(statement)
    conn.close()
    return path


def test_decision_settings_come_from_the_stored_study_and_flags_override(small_db, tmp_path):
    path = _copy_with(
        tmp_path,
        small_db,
        "UPDATE studies SET study_text = study_text || "
        "'\n[decision]\nmetric = \"brier\"\nmargin = 0.03\nalpha = 0.1\n'",
    )
    with ResultStore(path, readonly=True) as store:
        stored = results.decision_settings(store)
        assert stored == {
            "alpha": 0.1,
            "metric": {"classification": "brier"},
            "margin": {"classification": 0.03},
        }
        # another metric: its own default margin (0.02 for log loss), not brier's 0.03
        flag = results.decision_settings(store, metric="log_loss")
        assert flag["metric"] == {"classification": "log_loss"}
        assert flag["margin"] == {"classification": 0.02} and flag["alpha"] == 0.1
        both = results.decision_settings(store, margin=0.05, alpha=0.2)
        assert both["margin"] == {"classification": 0.05} and both["alpha"] == 0.2
        with pytest.raises(results.QueryError, match="'mse'.*use one of error"):
            results.decision_settings(store, metric="mse")
    # every read command reads it: effects' rows are on brier, with its margin
    out = CliRunner().invoke(main, ["effects", "--db", str(path), "--json"])
    assert out.exit_code == 0, out.output
    assert {r["metric"] for r in json.loads(out.output)} == {"brier", "n_leaves"}
    rec = json.loads(CliRunner().invoke(main, ["recommend", "--db", str(path), "--json"]).output)
    assert rec[0]["metric"] == "brier" and rec[0]["margin"] == 0.03 and rec[0]["alpha"] == 0.1
    args = ["recommend", "--db", str(path), "--json", "--alpha", "0.2"]
    flag = json.loads(CliRunner().invoke(main, args).output)
    assert flag[0]["alpha"] == 0.2
    bad = CliRunner().invoke(main, ["recommend", "--db", str(path), "--alpha", "2"])
    assert bad.exit_code == 2 and "alpha" in bad.output and len(bad.output.splitlines()) == 1


def test_load_folds_has_the_tree_shape(small_db):
    with ResultStore(small_db, readonly=True) as store:
        folds = results.load_folds(store)
    assert str(folds["root_feature"].dtype) == "Int64"
    assert folds["features_used"].map(type).eq(str).all()


def test_recommend_on_an_unfinished_study_says_counts_first_and_names_undecided(
    mixed_db, tmp_path
):
    # issue 12 item 4: the regression trials pending, two classification trials failed
    path = _copy_with(
        tmp_path,
        mixed_db,
        "UPDATE trials SET status = 'pending' WHERE dataset_id IN "
        "(SELECT dataset_id FROM datasets WHERE task = 'regression')",
        "UPDATE trials SET status = 'failed' WHERE trial_id IN (SELECT trial_id FROM trials "
        "t JOIN datasets d USING (dataset_id) WHERE d.task != 'regression' "
        "ORDER BY trial_id LIMIT 2)",
    )
    conn = sqlite3.connect(path)
    counts = dict(
        conn.execute(
            "SELECT d.task = 'regression', COUNT(*) FROM trials JOIN datasets d "
            "USING (dataset_id) GROUP BY 1"
        ).fetchall()
    )
    with ResultStore(path, readonly=True) as store:
        got = results.trial_counts(store)
    assert got == {
        "classification": {"done": counts[0] - 2, "failed": 2, "pending": 0},
        "regression": {"done": 0, "failed": 0, "pending": counts[1]},
    }
    text = CliRunner().invoke(main, ["recommend", "--db", str(path)])
    assert text.exit_code == 0, text.output
    head = text.output.split("\n\n")[0]  # what comes before the first family's block
    first = head.splitlines()
    assert first[0].startswith("trials: classification: ")
    assert f"{counts[0] - 2} done, 2 failed, 0 pending" in first[0]
    assert f"regression: 0 done, 0 failed, {counts[1]} pending" in " ".join(first)
    assert any(line.startswith("warning: the study is not complete") for line in first)
    assert "could not decide: regression (no finished trial)" in " ".join(first)
    args = ["recommend", "--db", str(path), "--json"]
    records = json.loads(CliRunner().invoke(main, args).output)
    by = {r["family"]: r for r in records}
    assert by["regression"]["decided"] is False and by["regression"]["config"] is None
    assert by["regression"]["trials"] == got["regression"]
    assert by["classification"]["decided"] is True
    assert by["classification"]["trials"] == got["classification"]


def test_conduct_table_p_values_are_the_corrected_t_of_the_paired_fold_differences(small_db):
    # recomputed here from the folds (not the view the table reads): per outer fold the
    # pruned - unpruned error averaged over the rule's configurations, then the corrected t
    from prunebench.results import conduct_table, load_folds
    from prunebench.stats import corrected_ttest

    with ResultStore(small_db, readonly=True) as store:
        folds = load_folds(store)
        study_id = store.query("SELECT study_id FROM studies")[0]["study_id"]
    table = conduct_table(small_db, study_id)
    keys = ["trial_id", "repeat", "fold"]
    pruned = folds[folds["arm"] == "pruned"].set_index(keys)
    unpruned = folds[folds["arm"] == "unpruned"].set_index(keys)
    diff = pruned.assign(d=pruned["error"] - unpruned["error"]).reset_index()
    per_fold = diff.groupby(["dataset", "rule", "repeat", "fold"]).agg(
        d=("d", "mean"), n_train=("n_train", "mean"), n_test=("n_test", "mean")
    )
    for (dataset, rule), g in per_fold.groupby(level=["dataset", "rule"]):
        expected = corrected_ttest(g["d"], g["n_train"], g["n_test"]).p_value
        assert table.loc[(dataset, rule, "error"), "p_value"] == pytest.approx(expected, abs=1e-12)
