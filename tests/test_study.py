"""Tests of study files (prunebench.study): parsing, validation messages, expansion into trials."""

from __future__ import annotations

import pytest
from click.testing import CliRunner
from helpers import GOOD

from prunebench.cli import main
from prunebench.study import StudyError, load_study, parse_study


def test_good_study_expands_into_trials_and_groups():
    study = parse_study(GOOD)
    trials = study.trials()
    # 2 datasets x 2 criteria x 2 depths x 1 leaf x 1 inner x 1 risk x 3 rules
    assert len(trials) == 24
    groups = study.groups()
    assert len(groups) == 8
    assert all(len(g.trials) == 3 and g.rules == ["min", "1se", "0.5se"] for g in groups)
    assert len({t.trial_id for t in trials}) == 24
    assert {t.max_depth for t in trials} == {None, 3}
    assert {t.prune_risk for t in trials} == {"error"}  # the classification default
    # ids are deterministic: the same file gives the same ids
    assert [t.trial_id for t in parse_study(GOOD).trials()] == [t.trial_id for t in trials]


def test_trial_ids_depend_on_name_data_and_levels():
    base = {t.trial_id for t in parse_study(GOOD).trials()}
    renamed = {t.trial_id for t in parse_study(GOOD.replace('"unit"', '"other"')).trials()}
    assert not base & renamed
    # adding a level keeps every existing id and adds new ones
    more = {t.trial_id for t in parse_study(GOOD.replace("[3]", "[3, 5]")).trials()}
    assert base < more and len(more) == 48


def test_outer_defaults_to_ten_by_ten():
    study = parse_study(GOOD.replace("repeats = 2\nfolds = 3\n", ""))
    assert (study.repeats, study.folds) == (10, 10)


def test_dataset_tables_are_accepted():
    text = GOOD.replace('datasets = ["iris", "wine"]', 'datasets = [{ name = "iris" }, "wine"]')
    assert set(parse_study(text).datasets) == {"iris", "wine"}


# Each case: a change to GOOD, the key the message must name, and a phrase of it.
MALFORMED = [
    ("unknown top key", ("seed = 5", 'seed = 5\ncolour = "red"'), "colour", "not a study key"),
    ("missing name", ('name = "unit"\n', ""), "name", "missing"),
    ("seed not integer", ("seed = 5", 'seed = "five"'), "seed", "integer"),
    ("negative seed", ("seed = 5", "seed = -1"), "seed", "integer"),
    ("folds below 2", ("folds = 3", "folds = 1"), "outer.folds", ">= 2"),
    ("repeats zero", ("repeats = 2", "repeats = 0"), "outer.repeats", ">= 1"),
    ("unknown outer key", ("folds = 3", "folds = 3\nshuffle = true"), "outer.shuffle", "outer key"),
    (
        "unknown factor",
        ('rule = ["min", "1se", "0.5se"]', 'splitter = ["best"]'),
        "factors.splitter",
        "not a factor",
    ),
    ("bad rule", ('"0.5se"]', '"2sd"]'), "factors.rule", "not a rule"),
    ("bad criterion", ('"entropy"]', '"variance"]'), "factors.criterion", "criterion"),
    (
        "regression risk on classification",
        ("[factors]", '[factors]\nprune_risk = ["squared_error"]'),
        "factors.prune_risk",
        "risk",
    ),
    ("depth zero", ('["none", 3]', '["none", 0]'), "factors.max_depth", "depth"),
    ("depth as text", ('["none", 3]', '["unlimited"]'), "factors.max_depth", "depth"),
    (
        "leaf size float",
        ("[factors]", "[factors]\nmin_samples_leaf = [0.5]"),
        "factors.min_samples_leaf",
        "leaf size",
    ),
    ("inner folds 1", ("inner_folds = [3]", "inner_folds = [1]"), "factors.inner_folds", ">= 2"),
    ("unknown dataset", ('"wine"]', '"winequality"]'), "datasets", "unknown dataset"),
    ("empty datasets", ('datasets = ["iris", "wine"]', "datasets = []"), "datasets", "non-empty"),
    (
        "folds beyond smallest class",
        ("folds = 3", "folds = 60"),
        "outer.folds",
        "rows of class 0, the smallest class",  # a plain label, not np.int64(0)
    ),
    (
        "inner folds beyond smallest class",
        ("inner_folds = [3]", "inner_folds = [40]"),
        "factors.inner_folds",
        "smallest class",
    ),
    (
        "empty level list",
        ('criterion = ["gini", "entropy"]', "criterion = []"),
        "factors.criterion",
        "at least one level",
    ),
    ("repeated level", ('["none", 3]', "[3, 3]"), "factors.max_depth", "repeated"),
    ("not TOML", ("seed = 5", "seed = = 5"), None, "not valid TOML"),
    ("bad name", ('name = "unit"', 'name = "my study!"'), "name", "letters"),
    (
        "tree fits beyond the limit",
        ("repeats = 2", "repeats = 1000000000"),
        "max_tree_fits",
        "allow it with max_tree_fits = ",
    ),
    (
        "max_tree_fits not an integer",
        ("seed = 5", 'seed = 5\nmax_tree_fits = "many"'),
        "max_tree_fits",
        "integer >= 1",
    ),
    (
        "leaf beyond the outer-training part",
        ("inner_folds = [3]", "inner_folds = [3]\nmin_samples_leaf = [1, 101]"),
        "factors.min_samples_leaf",
        "100 rows of the smallest outer-training part of dataset 'iris'",
    ),
]


@pytest.mark.parametrize("case", MALFORMED, ids=[c[0] for c in MALFORMED])
def test_malformed_studies_give_one_line_exit_2_and_touch_no_database(case, tmp_path):
    _, (old, new), key, phrase = case
    assert old in GOOD
    study_file = tmp_path / "bad.toml"
    study_file.write_text(GOOD.replace(old, new, 1))
    existing = tmp_path / "kept.sqlite"
    existing.write_bytes(b"results that must not change")
    for args in (
        ["check", str(study_file)],
        ["conduct", str(study_file), "--db", str(existing)],
        ["conduct", str(study_file)],
    ):
        result = CliRunner().invoke(main, args)
        assert result.exit_code == 2, (args, result.output)
        message = result.output.strip()
        assert "\n" not in message, message
        assert message.startswith(f"error: {study_file}")
        if key:
            assert f"key '{key}'" in message, message
        assert phrase in message, message
    assert existing.read_bytes() == b"results that must not change"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["bad.toml", "kept.sqlite"]


def test_messages_carry_the_line_of_the_key(tmp_path):
    study_file = tmp_path / "bad.toml"
    study_file.write_text(GOOD.replace('"0.5se"]', '"2sd"]'))
    with pytest.raises(StudyError) as err:
        load_study(study_file)
    line = GOOD.splitlines().index('rule = ["min", "1se", "0.5se"]') + 1
    assert str(err.value).startswith(f"{study_file}:{line}: key 'factors.rule'")


def test_missing_and_undecodable_files(tmp_path):
    with pytest.raises(StudyError, match="no such study file"):
        load_study(tmp_path / "absent.toml")
    latin = tmp_path / "latin.toml"
    latin.write_bytes(GOOD.replace("a small study", "caf\xe9").encode("latin-1"))
    with pytest.raises(StudyError, match="not UTF-8"):
        load_study(latin)


def test_database_is_resolved_beside_the_study(tmp_path):
    study_file = tmp_path / "sub" / "s.toml"
    study_file.parent.mkdir()
    study_file.write_text('database = "../out/r.sqlite"\n' + GOOD)
    assert load_study(study_file).database == tmp_path / "out" / "r.sqlite"


def test_example_studies_are_valid():
    from pathlib import Path

    folder = Path(__file__).resolve().parents[1] / "studies"
    files = sorted(folder.glob("*.toml"))
    assert {f.stem for f in files} >= {"quickstart", "overnight", "search", "team-data"}
    for f in files:
        study = load_study(f)
        assert study.trials() or study.search is not None


def test_study_still_offers_every_name_it_exported():
    # other modules and tests import these from prunebench.study; the functions that
    # moved out are the same objects, not copies
    from prunebench import study, study_checks, study_decision

    assert all(hasattr(study, name) for name in study.__all__)
    assert study.decision_of_text is study_decision.decision_of_text
    assert study.levels_of_text is study_decision.levels_of_text
    assert study.MAX_TREE_FITS == study_checks.MAX_TREE_FITS == 10_000_000
