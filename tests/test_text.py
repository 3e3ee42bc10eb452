"""Tests of the plain-text tables the command line prints (prunebench.text)."""

from __future__ import annotations

from pathlib import Path

import pandas as pd

from prunebench.execute import ConductSummary
from prunebench.study import parse_study
from prunebench.text import conduct_text, plan_text, progress_text


def test_progress_text_shows_counts_eta_and_failures():
    report = {
        "study": "s",
        "done": 3,
        "failed": 1,
        "pending": 6,
        "total": 10,
        "rate_per_minute": 2.0,
        "eta": "3m00s",
        "last_finished": None,
        "errors": ["ValueError: boom"],
    }
    lines = progress_text(report).splitlines()
    assert lines[0] == (
        "study 's': 3 done, 1 failed, 6 pending of 10 trials; 2.0 trials/min; ETA 3m00s; "
        "last finished -"
    )
    assert lines[1:] == ["  recent failure: ValueError: boom"]


def test_conduct_text_pivots_nothing_when_nothing_finished():
    summary = ConductSummary(database=Path("r.sqlite"), total=4, failed=4, errors=["e1"])
    empty = pd.DataFrame(columns=["unpruned", "pruned", "leaves_unpruned", "leaves_pruned"])
    assert conduct_text(summary, empty).splitlines() == [
        "0 trials done, 4 failed, 0 already finished, of 4; 0.0 s; results in r.sqlite",
        "  failed: e1",
    ]


def test_conduct_text_has_one_row_per_dataset_rule_and_metric():
    summary = ConductSummary(database=Path("r.sqlite"), total=2, done=2)
    table = pd.DataFrame(
        {
            "unpruned": [0.1, 0.2],
            "pruned": [0.08, 0.2],
            "leaves_unpruned": [12.0, 9.0],
            "leaves_pruned": [4.0, 9.0],
            "p_value": [0.012, float("nan")],
        },
        index=pd.MultiIndex.from_tuples([("iris", "1se", "error"), ("wine", "min", "error")]),
    )
    lines = conduct_text(summary, table).splitlines()
    row = next(line for line in lines if line.startswith("iris"))
    assert row.split() == [
        "iris",
        "1se",
        "error",
        "0.100",
        "0.080",
        "-0.020",
        "0.012*",
        "12.0",
        "4.0",
    ]
    row = next(line for line in lines if line.startswith("wine"))
    assert row.split()[5:7] == ["0.000", "-"]  # no p where none could be computed
    assert lines[-1].startswith("next: prunebench compare --db r.sqlite")


def test_counts_of_one_are_singular():
    summary = ConductSummary(database=Path("r.sqlite"), total=1, done=1)
    empty = pd.DataFrame(columns=["unpruned", "pruned", "leaves_unpruned", "leaves_pruned"])
    assert conduct_text(summary, empty).startswith("1 trial done, 0 failed")
    report = {
        "study": "s",
        "done": 1,
        "failed": 0,
        "pending": 0,
        "total": 1,
        "rate_per_minute": None,
        "eta": "-",
        "last_finished": None,
        "errors": [],
    }
    assert " pending of 1 trial; " in progress_text(report)
    study = parse_study(
        'name = "one"\nseed = 1\ndatasets = ["iris"]\n[outer]\nrepeats = 1\nfolds = 2\n'
        "[factors]\ninner_folds = [2]\n"
    )
    text = plan_text(study, [], Path("one.sqlite"), 1)
    assert "outer CV 1 repeat x 2 folds" in text
    assert "1 trial in 1 group (trials that share the grown trees" in text
    many = parse_study(
        'name = "two"\nseed = 1\ndatasets = ["iris"]\n[outer]\nrepeats = 2\nfolds = 2\n'
        '[factors]\ninner_folds = [2]\nrule = ["min", "1se"]\n'
    )
    assert "2 trials in 1 group " in plan_text(many, [], Path("two.sqlite"), 1)
    assert "outer CV 2 repeats x 2 folds" in plan_text(many, [], Path("two.sqlite"), 1)


def test_plan_text_columns_fit_the_longest_name_and_levels_are_words():
    study = parse_study(
        'name = "w"\nseed = 1\ndatasets = [{ name = "friedman1", n_samples = 1000, seed = 1 }]\n'
        '[outer]\nrepeats = 1\nfolds = 2\n[factors]\ninner_folds = [2]\nmax_depth = ["none", 4]\n'
    )
    row = {"task": "regression", "rows": 1000, "features": 10, "trials": 2, "fits": 6}
    rows = [
        {**row, "dataset": "friedman1(n_samples=1000, seed=1)", "seconds": 3.0},
        {**row, "dataset": "short", "seconds": 1.0},
    ]
    lines = plan_text(study, rows, Path("w.sqlite"), 1).splitlines()
    table = lines[2:5]
    assert {
        line.index("task") if i == 0 else line.index("regression") for i, line in enumerate(table)
    } == {len("friedman1(n_samples=1000, seed=1)") + 1}
    assert len({len(line) for line in table}) == 1  # every row ends in the same column
    assert "max_depth none, 4;" in lines[5] and "[" not in lines[5]


def test_conduct_text_columns_aligned_and_formatted_per_metric():
    summary = ConductSummary(database=Path("r.sqlite"), total=2, done=2)
    table = pd.DataFrame(
        {
            "unpruned": [0.1, 6093.4, 123456.7],
            "pruned": [0.1000001, 3512.25, 98765.4],
            "leaves_unpruned": [12.0, 340.2, 80.0],
            "leaves_pruned": [4.0, 5.5, 9.0],
        },
        index=pd.MultiIndex.from_tuples(
            [
                ("iris", "1se", "error"),
                ("diabetes", "min", "mse"),
                ("california_housing_with_a_long_name", "min", "mse"),
            ]
        ),
    )
    lines = conduct_text(summary, table).splitlines()
    head = next(i for i, line in enumerate(lines) if line.startswith("dataset"))
    block = lines[head : head + 4]
    # headers never run together: every header starts where its column's cells end or begin
    assert "  rule  " in block[0] and "leaves unpruned  leaves pruned" in block[0]
    # right-aligned numbers end in the same column as their header
    ends = {
        line.rindex(cell) + len(cell)
        for line, cell in zip(block, ["pruned", "4.0", "5.5", "9.0"], strict=True)
    }
    assert len(ends) == 1
    assert block[1].split()[3:6] == ["0.100", "0.100", "0.000"]  # no "-0.000" or "+0.000"
    assert block[2].split()[3:6] == ["6093", "3512", "-2581"]  # MSE: four figures
    assert block[3].split()[3:6] == ["123,457", "98,765", "-24,691"]


def test_plan_text_of_a_search_lists_its_space():
    study = parse_study(
        'name = "p"\nseed = 1\ndatasets = ["iris"]\n[search]\nsampler = "random"\n'
        "configurations = 4\n[search.space]\nmax_depth = [1, 2]\n"
        "min_samples_leaf = { low = 1, high = 40, log = true }\n"
        "se = { low = 0.0, high = 2.5 }\n"
    )
    text = plan_text(study, [], Path("p.sqlite"), 2)
    assert text.splitlines() == [
        "study 'p': a search (random sampler, 4 configurations, early stopping on, seed 1)",
        "  max_depth: choices 1, 2",
        "  min_samples_leaf: integers 1 to 40, log scale",
        "  se: numbers 0 to 2.5",
        "each configuration runs on 1 dataset: iris; outer CV 10 x 10",
    ]


def test_compare_text_puts_the_verdict_first_and_writes_labels_out(mixed_folds):
    from prunebench.snippets import long_label
    from prunebench.stats import comparison
    from prunebench.text import WIDTH, compare_text

    table = comparison(mixed_folds)
    lines = compare_text(table).splitlines()
    header = next(line for line in lines if line.startswith("better "))
    assert header.split()[:2] == ["better", "dataset"]
    first = lines.index(header) + 1
    assert lines[first].split()[0] in {"pruned", "unpr.", "-"}
    # the configuration follows its numbers, written out in full (wrapped, never cut)
    assert lines[first + 1].strip() == long_label(table.iloc[0])
    assert all(len(line) <= WIDTH for line in lines if line.startswith("       "))


def _weighted_folds():
    """Folds of 6 configurations that differ only in select_by and class_weight, 4 data sets."""
    import numpy as np

    rng = np.random.default_rng(0)
    rows = []
    levels = [(s, w) for s in ("error", "brier", "average_precision") for w in ("none", "balanced")]
    for d in range(4):
        for c, (select_by, weight) in enumerate(levels):
            for fold in range(4):
                for arm in ("pruned", "unpruned"):
                    rows.append(
                        {"dataset": f"d{d}", "task": "binary", "trial_id": f"d{d}-c{c}",
                         "criterion": "gini", "max_depth": None, "min_samples_leaf": 1,
                         "inner_folds": 5, "rule": "1se", "prune_risk": "cost",
                         "select_by": select_by, "class_weight": weight, "repeat": 0,
                         "fold": fold, "arm": arm, "n_train": 75, "n_test": 25,
                         "error": rng.uniform(0.1, 0.3), "n_leaves": 5 if arm == "pruned" else 9}
                    )  # fmt: skip
    frame = pd.DataFrame(rows)
    frame["max_depth"] = frame["max_depth"].astype("Int64")
    return frame


def test_rank_text_never_cuts_a_label():
    from prunebench.ranks import ranking
    from prunebench.text import rank_text
    from prunebench.vocabulary import Configuration

    (res,) = ranking(_weighted_folds())
    text = rank_text([res], 0.05)
    labels = [Configuration.of(c).label() for c in res["table"]["config"]]
    assert len(set(labels)) == len(labels) == 8  # 6 pruned, 2 unpruned trees
    lines = text.splitlines()
    for label in labels:  # every label whole, at the start of its own line
        assert any(line == label or line.startswith(label + " ") for line in lines), label
    assert max(len(line) for line in lines) <= 100


def test_a_rounded_zero_is_never_signed_and_keeps_its_width():
    from prunebench.text import _fmt

    assert _fmt(-0.0001, "+.3f") == "0.000"  # was "-0.000"
    assert _fmt(0.0001, "+.3f") == "0.000"
    assert _fmt(-0.0001, "8.3f") == "   0.000"
    assert _fmt(-0.002, "+.3f") == "-0.002" and _fmt(0.5, "+.3f") == "+0.500"
    assert _fmt(None, "+.3f") == "-"
