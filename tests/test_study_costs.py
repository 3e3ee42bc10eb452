"""Tests of [costs] and smoothing in study files (prunebench.study_costs)."""

from __future__ import annotations

import pytest

from prunebench.study import StudyError, parse_study
from prunebench.study_checker import _Checker
from prunebench.study_costs import _loss_matrix, _priors

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


def test_loss_matrix_and_priors_come_in_the_given_class_order():
    text = "[costs]\nloss = { bad = { good = 5 }, good = { bad = 1 } }\n"
    check = _Checker(text, "c.toml")
    loss = {"bad": {"good": 5}, "good": {"bad": 1}}
    assert _loss_matrix(check, "costs", loss, ["bad", "good"], "d") == ((0.0, 5.0), (1.0, 0.0))
    assert _loss_matrix(check, "costs", None, ["bad", "good"], "d") is None
    assert _priors(check, "costs", {"good": 0.7, "bad": 0.3}, ["bad", "good"], "d") == (0.3, 0.7)
    assert _priors(check, "costs", "equal", ["bad", "good"], "d") == "equal"
    with pytest.raises(StudyError) as err:
        _loss_matrix(check, "costs", {"bad": {"good": 5}}, ["bad", "good"], "d")
    # the line of the table's loss, for the missing cell
    assert str(err.value).startswith("c.toml:2: key 'costs.loss.good.bad': is missing")


def test_costs_read_back_from_the_stored_text_are_the_ones_the_trials_used():
    from prunebench.study_costs import costs_of_text, smoothing_of_text

    text = _costs(
        f'smoothing = "m2"\n[costs]\n{KEEL_LOSS}\npriors = {{ negative = 0.8, positive = 0.2 }}'
        f'\n[costs.rare_logistic]\n{SIM_LOSS}\npriors = "equal"'
    )
    study = parse_study(text)
    read = costs_of_text(text, ["yeast4", "rare_logistic"])
    for name, (labels, loss, priors) in study.costs.items():
        assert read[name]["classes"] == [str(c) for c in labels]
        assert (read[name]["loss_matrix"], read[name]["priors"]) == (loss, priors)
    assert smoothing_of_text(text) == "m2" and smoothing_of_text(_costs("")) is None
    # a data set without costs of its own, in a study without common ones, has none
    only = costs_of_text(_costs(f"[costs.rare_logistic]\n{SIM_LOSS}"), ["yeast4", "rare_logistic"])
    assert set(only) == {"rare_logistic"}


def test_class_names_sort_as_the_labels_do():
    from prunebench.study_costs import _label_order

    assert _label_order(["10", "2", "1"]) == ["1", "2", "10"]
    assert _label_order(["positive", "negative"]) == ["negative", "positive"]
