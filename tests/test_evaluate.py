"""Tests of the nested, repeated CV evaluation of one trial group."""

from __future__ import annotations

import numpy as np
import pytest
from sklearn.metrics import brier_score_loss, log_loss, mean_squared_error, r2_score

from prunebench.evaluate import EvaluationSettings, derive_seed, evaluate_group, outer_splits
from prunebench.study import parse_study

STUDY = """\
name = "evaluate-unit"
seed = 11
datasets = ["breast_cancer"]
[outer]
repeats = 2
folds = 4
[factors]
criterion = ["gini", "entropy"]
max_depth = ["none", 3]
inner_folds = [4]
rule = {rules}
"""


def _settings(study, repeats=None, seed=None):
    return EvaluationSettings(
        seed=study.seed if seed is None else seed,
        repeats=study.repeats if repeats is None else repeats,
        folds=study.folds,
    )


def _study(rules='["min", "1se", "0.5se"]', datasets=None):
    text = STUDY.format(rules=rules)
    if datasets:
        text = text.replace('["breast_cancer"]', datasets)
    return parse_study(text)


def test_rules_share_every_fit():
    # the shared fits are real: counted trees, not time
    three = _study()
    one = _study('["1se"]')
    data = three.datasets["breast_cancer"]
    r3 = evaluate_group(three.groups()[0], data, _settings(three))
    r1 = evaluate_group(one.groups()[0], data, _settings(one))
    # per outer fold: T_max, then one tree per inner fold
    assert r1.n_fits == r3.n_fits == 2 * 4 * (1 + 4)
    assert len(r3.folds) == 3 * len(r1.folds) == 3 * 2 * 4 * 2
    # the 1se trial's rows do not depend on which other rules share its group
    rows1 = {(r["repeat"], r["fold"], r["arm"]): r for r in r1.folds}
    one_se = [r for r in r3.folds if r["trial_id"] == r1.folds[0]["trial_id"]]
    for row in one_se:
        other = rows1[(row["repeat"], row["fold"], row["arm"])]
        for key in ("error", "log_loss", "n_leaves", "alpha"):
            assert row[key] == other[key]


def test_configurations_share_outer_test_folds():
    study = _study()
    data = study.datasets["breast_cancer"]
    prints = []
    for group in study.groups()[:3]:
        result = evaluate_group(group, data, _settings(study))
        prints.append(
            sorted({(r["repeat"], r["fold"], r["test_fingerprint"]) for r in result.folds})
        )
    assert prints[0] == prints[1] == prints[2]
    assert len(prints[0]) == study.repeats * study.folds


def test_outer_splits_are_stratified_and_cover_every_row_once_per_repeat():
    study = _study()
    data = study.datasets["breast_cancer"]
    splits = list(outer_splits(data, EvaluationSettings(study.seed, 3, 5)))
    assert len(splits) == 15
    for r in range(3):
        tests = np.concatenate([test for rep, _, _, test in splits if rep == r])
        assert np.array_equal(np.sort(tests), np.arange(len(data.y)))
    share = data.y.mean()
    for _, _, _, test in splits:
        assert abs(data.y[test].mean() - share) < 0.02
    # a different study seed gives different folds
    other = list(outer_splits(data, EvaluationSettings(study.seed + 1, 3, 5)))
    assert not np.array_equal(splits[0][3], other[0][3])


def test_metrics_agree_with_sklearn_on_each_fold():
    # scikit-learn as reference library for the metric definitions
    study = _study('["1se"]', datasets='["wine"]')
    data = study.datasets["wine"]
    group = study.groups()[0]
    result = evaluate_group(group, data, _settings(study))
    for row in result.folds:
        assert row["error"] == pytest.approx(1 - row["accuracy"])
        assert 0 <= row["brier"] <= 2 and row["log_loss"] >= 0
    # recompute one unpruned fold by hand
    from sklearn.tree import DecisionTreeClassifier

    repeat, fold, train, test = next(outer_splits(data, _settings(study)))
    tree = DecisionTreeClassifier(
        criterion=group.criterion,
        max_depth=group.max_depth,
        min_samples_leaf=1,
        random_state=derive_seed(study.seed, data.fingerprint, repeat, fold, "tree"),
    ).fit(data.X[train], data.y[train])
    row = next(r for r in result.folds if (r["repeat"], r["fold"], r["arm"]) == (0, 0, "unpruned"))
    proba = tree.predict_proba(data.X[test])
    assert row["error"] == pytest.approx(np.mean(tree.predict(data.X[test]) != data.y[test]))
    assert row["log_loss"] == pytest.approx(
        log_loss(data.y[test], np.clip(proba, 1e-15, 1), labels=tree.classes_), rel=1e-6
    )
    onehot = np.eye(3)[data.y[test]]
    assert row["brier"] == pytest.approx(np.mean(np.sum((proba - onehot) ** 2, axis=1)))
    assert row["n_leaves"] == tree.get_n_leaves()


def test_binary_brier_matches_sklearn():
    study = _study('["min"]')
    data = study.datasets["breast_cancer"]
    group = study.groups()[0]
    result = evaluate_group(group, data, _settings(study, repeats=1))
    row = result.folds[0]
    from sklearn.tree import DecisionTreeClassifier

    _, _, train, test = next(outer_splits(data, _settings(study, repeats=1)))
    tree = DecisionTreeClassifier(
        criterion=group.criterion,
        random_state=derive_seed(study.seed, data.fingerprint, 0, 0, "tree"),
    ).fit(data.X[train], data.y[train])
    p1 = tree.predict_proba(data.X[test])[:, 1]
    # the multi-class Brier score sums over both classes: twice the binary one
    assert row["brier"] == pytest.approx(2 * brier_score_loss(data.y[test], p1))


def test_regression_group_scores():
    text = """\
name = "reg-unit"
seed = 2
datasets = ["diabetes"]
[outer]
repeats = 1
folds = 3
[factors]
min_samples_leaf = [5]
inner_folds = [3]
rule = ["min"]
"""
    study = parse_study(text)
    data = study.datasets["diabetes"]
    result = evaluate_group(study.groups()[0], data, EvaluationSettings(study.seed, 1, 3))
    assert {r["arm"] for r in result.folds} == {"unpruned", "pruned"}
    from sklearn.tree import DecisionTreeRegressor

    _, _, train, test = next(outer_splits(data, EvaluationSettings(study.seed, 1, 3)))
    tree = DecisionTreeRegressor(
        min_samples_leaf=5, random_state=derive_seed(study.seed, data.fingerprint, 0, 0, "tree")
    ).fit(data.X[train], data.y[train])
    row = next(r for r in result.folds if r["arm"] == "unpruned" and r["fold"] == 0)
    pred = tree.predict(data.X[test])
    assert row["mse"] == pytest.approx(mean_squared_error(data.y[test], pred))
    assert row["r2"] == pytest.approx(r2_score(data.y[test], pred))
    pruned = [r for r in result.folds if r["arm"] == "pruned"]
    assert all(r["n_leaves"] < tree.get_n_leaves() for r in pruned)
    assert len(result.curves) > 3 and {c["fold"] for c in result.curves} == {0, 1, 2}


def test_outer_splits_come_one_repeat_at_a_time():
    # a billion repeats must not be built up front (issue 12): the splits are a generator
    # whose first repeats are those of a short scheme with the same seed
    study = _study()
    data = study.datasets["breast_cancer"]
    huge = outer_splits(data, EvaluationSettings(study.seed, 10**9, 4))
    assert iter(huge) is huge
    first = [next(huge) for _ in range(8)]
    short = list(outer_splits(data, EvaluationSettings(study.seed, 2, 4)))
    for (r1, f1, tr1, te1), (r2, f2, tr2, te2) in zip(first, short, strict=True):
        assert (r1, f1) == (r2, f2)
        assert np.array_equal(tr1, tr2) and np.array_equal(te1, te2)


def test_a_billion_repeats_stop_at_the_time_limit_in_bounded_memory(tmp_path):
    # before the splits were lazy, the outer splits were listed before the first fit:
    # memory grew without bound and the time limit was never checked
    import subprocess
    import sys

    code = (
        "import resource\n"
        "from prunebench.evaluate import EvaluationSettings, TrialTimeout, evaluate_group\n"
        "from prunebench.study import parse_study\n"
        's = parse_study(\'name = "huge"\\nseed = 1\\ndatasets = ["iris"]\\n'
        '[factors]\\ninner_folds = [2]\\nrule = ["min"]\\n\')\n'
        "settings = EvaluationSettings(seed=1, repeats=10**9, folds=5, time_limit=1.0)\n"
        "try:\n"
        "    evaluate_group(s.groups()[0], s.datasets['iris'], settings)\n"
        "except TrialTimeout as err:\n"
        "    print('stopped:', err)\n"
        "print(resource.getrusage(resource.RUSAGE_SELF).ru_maxrss)\n"
    )
    out = subprocess.run(
        [sys.executable, "-c", code], capture_output=True, text=True, timeout=300, check=True
    )
    assert "time_limit of 1 s" in out.stdout
    peak_mib = int(out.stdout.split()[-1]) / 1024
    assert peak_mib < 600, peak_mib


def test_tree_features_agree_with_export_text():
    import re

    from sklearn.datasets import load_wine
    from sklearn.tree import DecisionTreeClassifier, export_text

    from prunebench.evaluate import tree_features

    X, y = load_wine(return_X_y=True)
    tree = DecisionTreeClassifier(max_depth=3, random_state=0).fit(X, y)
    got = tree_features(tree)
    # scikit-learn's export_text (reference library) names every split "feature_i <= t";
    # its first line is the root split
    text = export_text(tree)
    used = sorted({int(i) for i in re.findall(r"feature_(\d+) <=", text)})
    root = int(re.search(r"feature_(\d+)", text.splitlines()[0]).group(1))
    assert got == {"root_feature": root, "features_used": ",".join(map(str, used))}
    stump = DecisionTreeClassifier(max_depth=1).fit(X[y == 0], y[y == 0])  # one class: a leaf
    assert tree_features(stump) == {"root_feature": None, "features_used": ""}


def test_stored_folds_carry_the_pruned_trees_shape(small_db):
    import sqlite3

    conn = sqlite3.connect(small_db)
    rows = conn.execute(
        "SELECT root_feature, features_used, n_leaves FROM folds WHERE arm = 'pruned'"
    ).fetchall()
    assert rows
    for root, used, leaves in rows:
        features = [int(f) for f in used.split(",")] if used else []
        if leaves == 1:
            assert root is None and features == []
        else:
            assert root in features and features == sorted(set(features))


def test_trees_grown_on_the_float32_copy_are_the_trees_grown_on_the_data():
    # scikit-learn converts X to float32 before growing (sklearn.tree._classes DTYPE), so the
    # copy prepared once per data set must give the very same trees, node for node
    from sklearn.tree import DecisionTreeClassifier, DecisionTreeRegressor

    from prunebench.datasets import load_dataset
    from prunebench.evaluate import prepared_X

    for name, model in (
        ("breast_cancer", DecisionTreeClassifier),
        ("diabetes", DecisionTreeRegressor),
    ):
        data = load_dataset(name)
        X32 = prepared_X(data)
        assert X32.dtype == np.float32 and X32.flags["C_CONTIGUOUS"]
        assert data.X.dtype != np.float32  # the comparison is not trivially equal
        for depth in (None, 4):
            a = model(max_depth=depth, random_state=3).fit(data.X, data.y)
            b = model(max_depth=depth, random_state=3)
            b.fit(X32, data.y, check_input=False)
            for attr in (
                "children_left",
                "children_right",
                "feature",
                "threshold",
                "value",
                "impurity",
                "n_node_samples",
                "weighted_n_node_samples",
            ):
                np.testing.assert_array_equal(getattr(a.tree_, attr), getattr(b.tree_, attr))
            np.testing.assert_array_equal(a.predict(data.X), b.predict(X32, check_input=False))


def test_balanced_accuracy_is_bit_identical_to_scikit_learns():
    # reference: sklearn.metrics.balanced_accuracy_score (mean recall of the true classes)
    from sklearn.metrics import balanced_accuracy_score

    from prunebench.evaluate import balanced_accuracy

    rng = np.random.default_rng(5)
    for n, k in ((7, 2), (50, 3), (333, 5), (1000, 10)):
        for _ in range(20):
            y = rng.integers(0, k, n)
            pred = np.where(rng.random(n) < 0.6, y, rng.integers(0, k, n))
            labels = np.array([10 * c + 1 for c in range(k)])  # classes need not be 0..k-1
            classes = np.unique(labels[y])
            truth = np.searchsorted(classes, labels[y])
            got = balanced_accuracy(truth, pred == y, classes.size)
            assert got == balanced_accuracy_score(labels[y], labels[pred])  # exact, not approx


def test_a_group_grows_each_tree_once_for_every_risk_rule_and_inner_fold_count():
    study = parse_study(
        STUDY.format(rules='["min", "1se", "fixed0.01"]')
        .replace("inner_folds = [4]", 'inner_folds = [3, 4]\nprune_risk = ["error", "impurity"]')
        .replace('criterion = ["gini", "entropy"]', 'criterion = ["gini"]')
    )
    data = study.datasets["breast_cancer"]
    settings = _settings(study)
    groups = study.groups()
    assert len(groups) == 2 and all(len(g.trials) == 2 * 2 * 3 for g in groups)
    result = evaluate_group(groups[0], data, settings)
    # per outer fold: T_max once, then 3 + 4 fold trees, whatever the risks and rules
    assert result.n_fits == 2 * 4 * (1 + 3 + 4)
    assert len(result.unpruned) == 2 * 4 and len(result.pruned) == 12 * 2 * 4
    # one curve per (inner folds, risk): the trials' group_id
    assert len({c["group_id"] for c in result.curves}) == 2 * 2
    # every trial's rows equal those of the trial evaluated on its own (the old grouping)
    rows = {(r["trial_id"], r["repeat"], r["fold"], r["arm"]): r for r in result.folds}
    for trial in groups[0].trials[::5]:
        alone = evaluate_group(study.trial_group(trial.dataset, trial.levels()), data, settings)
        for row in alone.folds:
            mine = rows[(row["trial_id"], row["repeat"], row["fold"], row["arm"])]
            assert {k: v for k, v in mine.items() if k != "fit_seconds"} == {
                k: v for k, v in row.items() if k != "fit_seconds"
            }


def test_fixed_rules_grow_no_fold_trees():
    study = parse_study(STUDY.format(rules='["fixed0.01", "fixed0"]'))
    result = evaluate_group(study.groups()[0], study.datasets["breast_cancer"], _settings(study))
    assert result.n_fits == 2 * 4  # T_max only
    zero = [r for r in result.folds if r["arm"] == "pruned" and r["alpha"] == 0.0]
    assert len(zero) == 2 * 4


# ---- select_by x class_weight under a loss matrix, conducted end to end ---------------------

RARE = """\
name = "rare-unit"
seed = 8
datasets = ["yeast6"]
[outer]
repeats = 1
folds = 3
[factors]
max_depth = [4]
inner_folds = [3]
prune_risk = ["cost"]
rule = ["min"]
select_by = ["error", "auc"]
class_weight = ["none", "balanced"]
[costs]
loss = { positive = { negative = 8 }, negative = { positive = 1 } }
"""


def test_stored_auc_and_expected_cost_are_those_of_the_pruned_tree(tmp_path):
    import io
    import sqlite3

    from sklearn.metrics import average_precision_score, confusion_matrix, roc_auc_score
    from sklearn.tree import DecisionTreeClassifier

    from prunebench.execute import Progress, conduct
    from prunebench.pruning import pruning_path

    study = parse_study(RARE)
    db = tmp_path / "rare.sqlite"
    conduct(study, db, progress=Progress(0, io.StringIO()))
    rows = (
        sqlite3.connect(db)
        .execute(
            'SELECT t.select_by, t.class_weight, f.arm, f."repeat", f.fold, f.alpha, f.auc, '
            "f.average_precision, f.expected_cost, f.error, f.n_leaves "
            "FROM folds f JOIN trials t USING (trial_id)"
        )
        .fetchall()
    )
    assert len(rows) == 4 * 3 * 2
    assert {(r[0], r[1]) for r in rows} == {
        ("error", "none"),
        ("error", "balanced"),
        ("auc", "none"),
        ("auc", "balanced"),
    }
    data = study.datasets["yeast6"]
    settings = EvaluationSettings.of(study)
    splits = {(r, f): (tr, te) for r, f, tr, te in outer_splits(data, settings)}
    L = np.array([[0.0, 1.0], [8.0, 0.0]])  # classes (negative, positive); rows: truth
    for _by, class_weight, arm, repeat, fold, alpha, auc, ap, cost, error, leaves in rows:
        train, test = splits[(repeat, fold)]
        full = DecisionTreeClassifier(
            max_depth=4,
            random_state=derive_seed(study.seed, data.fingerprint, repeat, fold, "tree"),
            class_weight=None if class_weight == "none" else "balanced",
        ).fit(data.X[train], data.y[train])
        path = pruning_path(full, "cost", loss_matrix=L, classes=np.array(["negative", "positive"]))
        tree = path.prune(alpha) if arm == "pruned" else full
        assert tree.get_n_leaves() == leaves
        positive = data.y[test] == "positive"
        proba = tree.predict_proba(data.X[test])[:, 1]
        if leaves > 1:
            # scikit-learn as reference library
            assert auc == pytest.approx(roc_auc_score(positive, proba), abs=1e-12)
            assert ap == pytest.approx(average_precision_score(positive, proba), abs=1e-12)
        else:
            assert auc == pytest.approx(0.5)  # one score for every row: all pairs tied
        # expected cost by hand: the confusion counts weighted by the loss matrix, with
        # every leaf predicting its cheapest class (not its majority)
        pred = path.predict(data.X[test], alpha if arm == "pruned" else 0.0)
        if arm == "unpruned":
            # T_max's own leaves (alpha 0 may already merge splits that gain nothing)
            pred = full.classes_[
                (
                    full.tree_.value[:, 0, :] * full.tree_.weighted_n_node_samples[:, None] @ L
                ).argmin(axis=1)[full.apply(data.X[test])]
            ]
        counts = confusion_matrix(data.y[test], pred, labels=["negative", "positive"])
        assert cost == pytest.approx((counts * L).sum() / test.size, abs=1e-12)
        assert error == pytest.approx((counts.sum() - np.trace(counts)) / test.size, abs=1e-12)
    # the loss matrix makes the trees flag rows: the cheapest class is not the majority's
    assert any(c != e for *_, c, e, _ in rows)


def test_laplace_smoothing_reaches_the_stored_probability_metrics():
    from sklearn.tree import DecisionTreeClassifier

    text = STUDY.format(rules='["min"]').replace("seed = 11", 'seed = 11\nsmoothing = "laplace"')
    study = parse_study(text)
    plain = _study('["min"]')
    data = study.datasets["breast_cancer"]
    group = study.groups()[0]
    smoothed = evaluate_group(group, data, EvaluationSettings.of(study))
    raw = evaluate_group(plain.groups()[0], data, EvaluationSettings.of(plain))
    splits = {(r, f): (tr, te) for r, f, tr, te in outer_splits(data, _settings(study))}
    for row, raw_row in zip(smoothed.folds, raw.folds, strict=True):
        if row["arm"] != "unpruned":
            continue
        train, test = splits[(row["repeat"], row["fold"])]
        full = DecisionTreeClassifier(
            criterion=group.criterion,
            max_depth=group.max_depth,
            random_state=derive_seed(
                study.seed, data.fingerprint, row["repeat"], row["fold"], "tree"
            ),
        ).fit(data.X[train], data.y[train])
        counts = full.tree_.value[:, 0, :] * full.tree_.weighted_n_node_samples[:, None]
        # Laplace by hand: (n_c + 1) / (n + 2) in the row's leaf
        p = ((counts + 1) / (counts.sum(axis=1, keepdims=True) + 2))[full.apply(data.X[test])]
        # scikit-learn as reference library
        assert row["log_loss"] == pytest.approx(log_loss(data.y[test], p), rel=1e-12)
        assert row["brier"] == pytest.approx(2 * brier_score_loss(data.y[test], p[:, 1]), rel=1e-12)
        # pure leaves no longer rule the log loss; the predictions are the same
        assert row["log_loss"] < raw_row["log_loss"] and row["error"] == raw_row["error"]


def test_a_small_time_limit_reports_an_elapsed_time_above_it(monkeypatch):
    # with one decimal, 0.0123 s past a 0.01 s limit was written "(0.0 s)"
    from prunebench import evaluate

    clock = evaluate._Clock(0.01)
    monkeypatch.setattr(clock, "elapsed", lambda: 0.0123)
    with pytest.raises(evaluate.TrialTimeout, match=r"time_limit of 0\.01 s \(0\.0123 s\)"):
        clock.check()
    evaluate._Clock(None).check()  # no limit: never stops
