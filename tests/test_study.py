"""Tests of study files: validation messages, expansion into trials and groups."""

from __future__ import annotations

import textwrap

import pytest
from click.testing import CliRunner

from prunebench.cli import main
from prunebench.study import StudyError, load_study, parse_study

GOOD = """\
name = "unit"
description = "a small study"
seed = 5
datasets = ["iris", "wine"]

[outer]
repeats = 2
folds = 3

[factors]
criterion = ["gini", "entropy"]
max_depth = ["none", 3]
inner_folds = [3]
rule = ["min", "1se", "0.5se"]
"""


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


def test_mixed_tasks_need_per_task_factors():
    mixed = GOOD.replace('["iris", "wine"]', '["iris", "diabetes"]')
    with pytest.raises(StudyError, match=r"factors.criterion.*'gini' does not fit the regression"):
        parse_study(mixed)
    per_task = mixed.replace('criterion = ["gini", "entropy"]\n', "") + textwrap.dedent(
        """
        [factors.classification]
        criterion = ["gini", "entropy"]

        [factors.regression]
        criterion = ["squared_error"]
        min_samples_leaf = [5]
        """
    )
    study = parse_study(per_task)
    reg = [t for t in study.trials() if t.dataset == "diabetes"]
    assert {t.criterion for t in reg} == {"squared_error"}
    assert {t.prune_risk for t in reg} == {"squared_error"}
    assert {t.min_samples_leaf for t in reg} == {5}
    cls = [t for t in study.trials() if t.dataset == "iris"]
    assert {t.criterion for t in cls} == {"gini", "entropy"}


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
    ("folds beyond smallest class", ("folds = 3", "folds = 60"), "outer.folds", "smallest class"),
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


def test_max_tree_fits_bounds_the_plan_exactly():
    # the reference count: every trial group's outer folds, each growing the full tree and
    # one tree per inner fold, from the expansion in trials.py
    study = parse_study(GOOD)
    fits = sum(study.repeats * study.folds * (1 + g.inner_folds) for g in study.groups())
    assert fits == 8 * 2 * 3 * (1 + 3)
    allowed = GOOD.replace("seed = 5", f"seed = 5\nmax_tree_fits = {fits}")
    assert parse_study(allowed).repeats == 2
    with pytest.raises(StudyError, match=f"{fits} tree fits, more than max_tree_fits = {fits - 1}"):
        parse_study(GOOD.replace("seed = 5", f"seed = 5\nmax_tree_fits = {fits - 1}"))


def test_a_huge_plan_runs_only_when_the_study_says_so():
    huge = GOOD.replace("repeats = 2", "repeats = 1000000000")
    with pytest.raises(StudyError) as refused:
        parse_study(huge, source="huge.toml")
    # the line of the number that made the plan huge
    line = GOOD.splitlines().index("repeats = 2") + 1
    assert str(refused.value).startswith(f"huge.toml:{line}: key 'max_tree_fits': ")
    assert "96,000,000,000 tree fits" in str(refused.value)
    said = parse_study(huge.replace("seed = 5", "seed = 5\nmax_tree_fits = 96000000000"))
    assert said.repeats == 1_000_000_000


def test_the_largest_leaf_may_fill_the_smallest_outer_training_part():
    # iris: 150 rows in 3 outer folds of 50, so every outer-training part has 100 rows
    text = GOOD.replace("inner_folds = [3]", "inner_folds = [3]\nmin_samples_leaf = [100]")
    study = parse_study(text)
    assert study.factors["classification"]["min_samples_leaf"] == [100]


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


def test_friedman_mse_is_a_regression_criterion_a_study_can_sweep(tmp_path):
    # the pruning engine handles friedman_mse (its impurity is the node's squared error);
    # studies now accept it too, and its trees are grown, pruned and stored
    import io
    import sqlite3

    from prunebench.execute import Progress, conduct

    study = parse_study(
        'name = "fmse"\nseed = 1\ndatasets = ["diabetes"]\n[outer]\nrepeats = 1\nfolds = 3\n'
        '[factors]\ncriterion = ["squared_error", "friedman_mse"]\ninner_folds = [3]\n'
    )
    assert study.factors["regression"]["criterion"] == ["squared_error", "friedman_mse"]
    db = tmp_path / "r.sqlite"
    summary = conduct(study, db, progress=Progress(0, io.StringIO()))
    assert (summary.done, summary.failed) == (2, 0)
    rows = sqlite3.connect(db).execute(
        "SELECT t.criterion, COUNT(*), MIN(f.mse) FROM folds f JOIN trials t USING (trial_id) "
        "WHERE f.arm = 'pruned' GROUP BY t.criterion"
    )
    counts = {c: (n, m) for c, n, m in rows}
    assert counts["friedman_mse"][0] == 3 and counts["friedman_mse"][1] > 0
    with pytest.raises(StudyError, match="'friedman_mse' is not a classification criterion"):
        parse_study(
            'name = "x"\nseed = 1\ndatasets = ["iris"]\n[factors]\ncriterion = ["friedman_mse"]\n'
        )


# ---- the [decision] section ------------------------------------------------------------

def test_decision_defaults_follow_the_design():
    from prunebench.study import decision_of_text

    # DESIGN.md "Decision": error / mse, margins 0.01 of error and 1% of the unpruned MSE,
    # alpha 0.05
    assert decision_of_text(GOOD, ["classification"]) == {
        "alpha": 0.05,
        "metric": {"classification": "error"},
        "margin": {"classification": 0.01},
    }
    both = decision_of_text("[decision]\nmetric = 'log_loss'\n", ["classification"])
    assert both["margin"] == {"classification": 0.02}  # log loss's own default margin


def test_decision_per_family_and_overall():
    from prunebench.study import decision_of_text

    text = (
        "[decision]\nalpha = 0.1\nmargin = 0.03\n"
        "[decision.classification]\nmetric = 'brier'\n"
        "[decision.regression]\nmetric = 'mae'\nmargin = 0.05\n"
    )
    got = decision_of_text(text, ["classification", "regression"])
    assert got == {
        "alpha": 0.1,
        "metric": {"classification": "brier", "regression": "mae"},
        "margin": {"classification": 0.03, "regression": 0.05},
    }
    parse_study(GOOD + "\n[decision]\nmetric = 'accuracy'\nmargin = 0.02\nalpha = 0.5\n")


@pytest.mark.parametrize(
    "section, key, words",
    [
        ("alpha = 0.7", "decision.alpha", "(0, 0.5]"),
        ("alpha = 0", "decision.alpha", "(0, 0.5]"),
        ("alpha = true", "decision.alpha", "(0, 0.5]"),
        ("margin = -0.01", "decision.margin", "> 0"),
        ("margin = 'wide'", "decision.margin", "> 0"),
        ("metric = 'mse'", "decision.metric", "not a classification metric"),
        ("metric = 'bogus'", "decision.metric", "use one of error"),
        ("cutoff = 1", "decision.cutoff", "not a decision key"),
        ("[decision.regression]\nmetric = 'mse'", "decision.regression", "no regression"),
        ("[decision.classification]\nalpha = 0.1", "decision.classification.alpha", "not a"),
    ],
)
def test_bad_decision_sections_give_one_line_naming_the_key(section, key, words, tmp_path):
    path = tmp_path / "s.toml"
    path.write_text(GOOD + "\n[decision]\n" + section + "\n")
    result = CliRunner().invoke(main, ["check", str(path)])
    assert result.exit_code == 2
    message = result.output.strip()
    assert len(message.splitlines()) == 1
    assert f"key '{key}'" in message and words in message and str(path) in message


def test_a_metric_for_both_families_must_suit_both(tmp_path):
    from prunebench.study import decision_of_text

    with pytest.raises(StudyError, match=r"decision\.metric.*\[decision\.regression\]"):
        decision_of_text("[decision]\nmetric = 'brier'\n", ["classification", "regression"])


def test_levels_of_text_keep_the_files_order():
    from prunebench.study import levels_of_text

    levels = levels_of_text(GOOD, "classification")
    assert levels["criterion"] == ["gini", "entropy"] and levels["max_depth"] == ["none", 3]
    assert levels["rule"] == ["min", "1se", "0.5se"]
    assert levels["min_samples_leaf"] == [1]  # the vocabulary's default


# ---- [costs], smoothing and the factors that choose alpha and weight the classes ------------

COSTS = """\
name = "costs-unit"
seed = 3
{top}
datasets = ["yeast4", "rare_logistic"{more}]
[outer]
repeats = 1
folds = 3
[factors]
inner_folds = [3]
{factors}
{costs}
"""
KEEL_LOSS = "loss = { positive = { negative = 10 }, negative = { positive = 1 } }"
SIM_LOSS = "loss = { 1 = { 0 = 4 }, 0 = { 1 = 1 } }"


def _costs(costs: str, factors: str = "", more: str = "") -> str:
    top = ""
    if costs.startswith("smoothing"):  # a top-level key comes before the tables
        top, _, costs = costs.partition("\n")
    return COSTS.format(costs=costs, factors=factors, more=more, top=top)


def test_costs_are_read_per_dataset_in_class_order():
    study = parse_study(
        _costs(
            f'smoothing = "laplace"\n[costs]\n{KEEL_LOSS}\npriors = {{ negative = 0.8, '
            f'positive = 0.2 }}\n[costs.rare_logistic]\n{SIM_LOSS}\npriors = "equal"',
            'select_by = ["error", "auc"]\nclass_weight = ["none", "balanced"]',
        )
    )
    # rows: true class, columns: predicted class, in the data set's sorted labels
    assert study.costs["yeast4"] == (
        ("negative", "positive"),
        ((0.0, 1.0), (10.0, 0.0)),
        (0.8, 0.2),
    )
    assert study.costs["rare_logistic"] == ((0, 1), ((0.0, 1.0), (4.0, 0.0)), "equal")
    assert study.smoothing == "laplace"
    assert {(t.select_by, t.class_weight) for t in study.trials()} == {
        ("error", "none"),
        ("error", "balanced"),
        ("auc", "none"),
        ("auc", "balanced"),
    }


@pytest.mark.parametrize(
    "costs, factors, more, message",
    [
        # one study-level table cannot serve the simulation's 0/1 labels
        (f"[costs]\n{KEEL_LOSS}", "", "", "key 'costs.loss.positive': 'positive' is not a class"),
        (
            "[costs]\nloss = { positive = { negative = 10 } }\n[costs.rare_logistic]\n" + SIM_LOSS,
            "",
            "",
            "key 'costs.loss.negative.positive': is missing: give the cost of every mistake",
        ),
        (
            "[costs.yeast4]\nloss = { positive = { negative = 10, positive = 2 }, "
            "negative = { positive = 1 } }",
            "",
            "",
            "key 'costs.yeast4.loss.positive.positive': a right prediction costs nothing",
        ),
        (
            "[costs.yeast4]\nloss = { positive = { negative = -1 }, negative = { positive = 1 } }",
            "",
            "",
            "key 'costs.yeast4.loss.positive.negative': a cost is a finite number >= 0; got -1",
        ),
        (
            "[costs.yeast4]\nloss = { positive = { bad = 1 }, negative = { positive = 1 } }",
            "",
            "",
            "key 'costs.yeast4.loss.positive.bad': 'bad' is not a class",
        ),
        (
            "[costs.yeast4]\nloss = { positive = 3 }",
            "",
            "",
            "key 'costs.yeast4.loss.positive': must be a table",
        ),
        (
            "[costs.yeast4]\npriors = { negative = 0.5, positive = 0.4 }",
            "",
            "",
            "key 'costs.yeast4.priors': the priors must sum to 1; they sum to 0.9",
        ),
        (
            "[costs.yeast4]\npriors = { negative = 1.0 }",
            "",
            "",
            "key 'costs.yeast4.priors.positive': is missing: give every class a prior",
        ),
        (
            "[costs.yeast4]\npriors = { negative = 0.5, positive = 0.4, rare = 0.1 }",
            "",
            "",
            "key 'costs.yeast4.priors.rare': 'rare' is not a class of dataset 'yeast4'",
        ),
        ('[costs.yeast4]\npriors = "sample"', "", "", "key 'costs.yeast4.priors': must be"),
        ('[costs.iris]\npriors = "equal"', "", "", "key 'costs.iris': is not a dataset"),
        (
            '[costs.diabetes]\npriors = "equal"',
            "",
            ', "diabetes"',
            "key 'costs.diabetes': dataset 'diabetes' is not a classification dataset",
        ),
        ("[costs.yeast4]\nweights = 2", "", "", "key 'costs.yeast4.weights': is not a costs key"),
        ("[costs]\nloss = 3\n", "", "", "key 'costs.loss': must be a table"),
        ('smoothing = "m0"', "", "", "key 'smoothing': 'm0' is not a smoothing"),
        ("", 'select_by = ["error", "gain"]', "", "key 'factors.select_by': 'gain' is not"),
        ("", 'class_weight = ["sometimes"]', "", "key 'factors.class_weight': 'sometimes'"),
        (
            "",
            'select_by = ["average_precision"]',
            ', "iris"',
            "key 'factors.select_by': 'average_precision' needs two classes; dataset 'iris' has 3",
        ),
    ],
)
def test_costs_mistakes_give_one_line_naming_the_key(costs, factors, more, message):
    with pytest.raises(StudyError) as err:
        parse_study(_costs(costs, factors, more), source="c.toml")
    text = str(err.value)
    assert message in text and "\n" not in text, text
    assert text.startswith("c.toml")


def test_regression_takes_neither_class_weights_nor_other_losses():
    text = 'name = "r"\nseed = 1\ndatasets = ["diabetes"]\n[factors]\n'
    with pytest.raises(StudyError, match="'balanced' is not a regression class weight"):
        parse_study(text + 'class_weight = ["balanced"]\n')
    with pytest.raises(StudyError, match="'auc' is not a regression loss"):
        parse_study(text + 'select_by = ["auc"]\n')
    assert {t.select_by for t in parse_study(text).trials()} == {"mse"}
