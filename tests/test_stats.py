"""Tests of statistics over stored results (prunebench.stats)."""

from __future__ import annotations

import json
import sqlite3

import numpy as np
import pytest
from click.testing import CliRunner
from scipy import stats as sps

from prunebench import stats
from prunebench.cli import main
from prunebench.study import parse_study


@pytest.fixture(scope="module")
def db(mixed_db):
    return mixed_db


@pytest.fixture(scope="module")
def folds(mixed_folds):
    return mixed_folds


# ---- the corrected resampled t ---------------------------------------------------------


def test_corrected_t_matches_baycomp_own_case():
    # baycomp's own tests: x = [4, 2, 6], y = [5, 7, 3], runs = 1 -> mean 1, var 13.333, df 2
    x, y = np.array([4.0, 2, 6]), np.array([5.0, 7, 3])
    # three folds: each trains on two thirds, tests on one third
    t = stats.corrected_ttest(y - x, n_train=[2, 2, 2], n_test=[1, 1, 1])
    assert (t.mean, t.se**2, t.df) == (pytest.approx(1), pytest.approx(40 / 3), 2)


@pytest.mark.parametrize("runs, folds_per_run", [(1, 10), (10, 10), (5, 3)])
def test_corrected_t_matches_baycomp_correlated_t_test(runs, folds_per_run):
    baycomp = pytest.importorskip("baycomp")
    rng = np.random.default_rng(runs * 100 + folds_per_run)
    j = runs * folds_per_run
    x, y = rng.normal(0.2, 0.03, j), rng.normal(0.21, 0.03, j)
    reference = baycomp.CorrelatedTTest(x, y, rope=0, runs=runs)
    n_test = np.full(j, 30)
    t = stats.corrected_ttest(y - x, n_train=n_test * (folds_per_run - 1), n_test=n_test)
    assert t.mean == pytest.approx(reference.mean)
    assert t.se**2 == pytest.approx(reference.var)
    assert t.df == reference.df
    # baycomp's posterior is Student t(df, mean, sqrt(var)): its 95% interval is ours
    lo, hi = sps.t.interval(0.95, reference.df, reference.mean, np.sqrt(reference.var))
    assert (t.ci_low, t.ci_high) == (pytest.approx(lo), pytest.approx(hi))


def test_naive_interval_is_narrower_by_the_correction_factor():
    d = np.random.default_rng(3).normal(0.01, 0.02, 100)
    t = stats.corrected_ttest(d, n_train=np.full(100, 90), n_test=np.full(100, 10))
    # var ratio (1/J + 1/9) / (1/J)
    assert t.se / t.naive_se == pytest.approx(np.sqrt((1 / 100 + 1 / 9) * 100))
    assert t.naive_p_value < t.p_value


def _coverage_group(repeats: int, folds: int):
    """The one trial group (gini, unlimited depth, 3 inner folds, minimum rule) of a study."""
    study = parse_study(
        f"""name = "coverage"
seed = 5
datasets = ["iris"]
[outer]
repeats = {repeats}
folds = {folds}
[factors]
criterion = ["gini"]
inner_folds = [3]
rule = ["min"]
"""
    )
    return study.groups()[0]


def test_corrected_interval_coverage_is_two_sided_through_evaluate_group():
    # By simulation (fixed seeds), through prunebench's own nested CV (evaluate_group):
    # 100 rows, two informative and two noise features, y = 1{x1 + x2 > 1} with 20% of
    # labels flipped; 2 x 5 outer folds; the per-fold difference pruned - unpruned error.
    # The truth is the expected difference at 80 training rows on the population: 300
    # training samples, pruned exactly as evaluate_group prunes (3 inner folds, minimum
    # rule), scored on 20,000 fresh rows without label noise (error = 0.2 + 0.6 P(wrong
    # side of the Bayes boundary)). Over 400 replications the corrected 95% interval must
    # cover it between 0.93 and 0.99: the binomial SE is 0.011 and the corrected t is
    # known to be mildly conservative (Nadeau & Bengio 2003; we measured 0.975). An
    # interval that is too wide fails the upper side: 1.5 times the corrected one covers
    # more than 0.99 here (we measured 0.9975). The naive interval (folds treated as
    # independent) fails the lower side (we measured 0.88).
    from sklearn.model_selection import StratifiedKFold
    from sklearn.tree import DecisionTreeClassifier

    from prunebench.datasets import LoadedDataset
    from prunebench.datasets._registry import fingerprint
    from prunebench.evaluate import EvaluationSettings, evaluate_group
    from prunebench.selection import select_alpha

    rng = np.random.default_rng(0)
    group = _coverage_group(2, 5)

    def draw(m):
        X = rng.uniform(size=(m, 4))
        return X, ((X[:, 0] + X[:, 1] > 1) ^ (rng.uniform(size=m) < 0.2)).astype(int)

    fresh = rng.uniform(size=(20_000, 4))
    bayes = (fresh[:, 0] + fresh[:, 1] > 1).astype(int)

    def population_error(model):
        return 0.2 + 0.6 * np.mean(model.predict(fresh) != bayes)

    truth = []
    for i in range(300):
        X, y = draw(80)
        full = DecisionTreeClassifier(random_state=i).fit(X, y)
        selection = select_alpha(
            DecisionTreeClassifier(random_state=i),
            X,
            y,
            cv=StratifiedKFold(3, shuffle=True, random_state=i),
            risk=group.prune_risk,
            rules=["min"],
            fitted=full,
        )
        pruned = selection.path.prune(selection.alpha("min"))
        truth.append(population_error(pruned) - population_error(full))
    truth = float(np.mean(truth))
    assert truth < 0  # pruning helps on this noisy problem

    samples = 400
    covered = np.zeros(3)
    for r in range(samples):
        X, y = draw(100)
        data = LoadedDataset("coverage", "binary", X, y, {}, fingerprint(X, y), None)
        rows = evaluate_group(group, data, EvaluationSettings(seed=r, repeats=2, folds=5)).folds
        pruned = [row for row in rows if row["arm"] == "pruned"]
        unpruned = {(row["repeat"], row["fold"]): row for row in rows if row["arm"] == "unpruned"}
        d = [p["error"] - unpruned[(p["repeat"], p["fold"])]["error"] for p in pruned]
        t = stats.corrected_ttest(d, [p["n_train"] for p in pruned], [p["n_test"] for p in pruned])
        half = t.ci_high - t.mean
        covered += [
            t.ci_low <= truth <= t.ci_high,
            t.naive_ci_low <= truth <= t.naive_ci_high,
            abs(t.mean - truth) <= 1.5 * half,
        ]
    corrected, naive, too_wide = covered / samples
    assert 0.93 <= corrected <= 0.99
    assert naive < 0.93
    assert too_wide > 0.99


def test_corrected_t_type_one_error_under_an_exact_null():
    # By simulation (fixed seeds): labels independent of the features and exactly
    # balanced (50 + 50 rows), 2 x 5 stratified folds, so every test fold holds 10 + 10
    # rows. Any prediction made without the test labels then has expected test error
    # exactly 0.5, so the true difference full tree - constant prediction is 0. Over 1000
    # replications the corrected test at 5% must reject at most 0.07 (0.05 plus three
    # binomial SEs of 0.007); we measured 0.013 (it is conservative here, as Nadeau &
    # Bengio 2003 report for some settings). The naive test rejects more often than
    # nominal (we measured 0.158) and more often than the corrected one.
    from sklearn.model_selection import RepeatedStratifiedKFold
    from sklearn.tree import DecisionTreeClassifier

    rng = np.random.default_rng(1)
    samples = 1000
    rejected = np.zeros(2)
    for r in range(samples):
        X = rng.normal(size=(100, 3))
        y = rng.permutation(np.repeat([0, 1], 50))
        d, n_train, n_test = [], [], []
        splitter = RepeatedStratifiedKFold(n_splits=5, n_repeats=2, random_state=r)
        for train, test in splitter.split(X, y):
            tree = DecisionTreeClassifier(random_state=r).fit(X[train], y[train])
            d.append(np.mean(tree.predict(X[test]) != y[test]) - np.mean(y[test] != 0))
            n_train.append(len(train))
            n_test.append(len(test))
        t = stats.corrected_ttest(d, n_train, n_test)
        rejected += [t.p_value < 0.05, t.naive_p_value < 0.05]
    corrected, naive = rejected / samples
    assert corrected <= 0.07
    assert naive > 0.05 and naive > corrected


def test_holm_step_down():
    # by hand: sorted p 0.01, 0.03, 0.04 -> 0.03, 0.06, max(0.06, 0.04)
    np.testing.assert_allclose(stats.holm([0.01, 0.04, 0.03]), [0.03, 0.06, 0.06])
    assert np.isnan(stats.holm([0.2, np.nan])[1])


# ---- across data sets ------------------------------------------------------------------


def test_friedman_matches_scipy():
    scores = np.random.default_rng(5).normal(size=(12, 4)) + np.array([0, 0.5, 0.2, 1.0])
    ours = stats.friedman_test(scores)
    # scipy as reference library (no ties, so no tie correction applies)
    theirs = sps.friedmanchisquare(*scores.T)
    assert ours["chi2"] == pytest.approx(theirs.statistic)
    assert ours["p_chi2"] == pytest.approx(theirs.pvalue)


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_friedman_tie_correction_matches_scipy(seed):
    # integer scores on 3 levels: many ties within each data set, so the tie correction
    # matters; scipy's friedmanchisquare (reference library) applies it
    scores = np.random.default_rng(seed).integers(0, 3, size=(15, 5)).astype(float)
    ours = stats.friedman_test(scores)
    theirs = sps.friedmanchisquare(*scores.T)
    assert ours["chi2"] == pytest.approx(theirs.statistic, rel=1e-12)
    assert ours["p_chi2"] == pytest.approx(theirs.pvalue, rel=1e-10)
    # without the correction the statistic is smaller: the test would fail
    plain = stats.friedman_from_ranks(ours["mean_ranks"], 15)
    assert plain["chi2"] < ours["chi2"]


def test_friedman_of_rows_tied_throughout_is_nan():
    result = stats.friedman_test(np.ones((4, 3)))
    assert np.isnan(result["chi2"]) and np.isnan(result["p_chi2"])


def test_demsar_worked_example():
    # Demšar (2006) §3.2.2: 4 methods on 14 data sets, mean ranks 3.143, 2.000, 2.893,
    # 1.964: chi2_F = 9.28, F_F = 3.69, CD at 0.05 = 1.25 (from memory of the paper,
    # reproduced numerically)
    result = stats.friedman_from_ranks([3.143, 2.000, 2.893, 1.964], 14)
    assert result["chi2"] == pytest.approx(9.28, abs=0.01)
    assert result["ff"] == pytest.approx(3.69, abs=0.01)
    assert stats.critical_difference(4, 14) == pytest.approx(1.25, abs=0.005)


@pytest.mark.parametrize(
    "k, q",
    # Demšar (2006), Table 5(a): Nemenyi q_0.05
    list(
        zip(
            range(2, 11),
            [1.960, 2.343, 2.569, 2.728, 2.850, 2.949, 3.031, 3.102, 3.164],
            strict=True,
        )
    ),
)
def test_nemenyi_q_table(k, q):
    assert stats.nemenyi_q(k, 0.05) == pytest.approx(q, abs=1.5e-3)


def test_bayesian_signed_rank_matches_baycomp():
    baycomp = pytest.importorskip("baycomp")
    rng = np.random.default_rng(9)
    unpruned = rng.uniform(0.1, 0.3, 15)
    pruned = unpruned - rng.normal(0.008, 0.01, 15)
    ours = stats.bayesian_signed_rank(unpruned - pruned, rope=0.01, nsamples=20000)
    # baycomp's x, y are scores where larger is better: y better means right
    theirs = baycomp.SignedRankTest.probs(
        -unpruned, -pruned, rope=0.01, nsamples=20000, random_state=1
    )
    assert ours["p_second_better"] == pytest.approx(theirs[0], abs=0.02)
    assert ours["p_equivalent"] == pytest.approx(theirs[1], abs=0.02)
    assert ours["p_first_better"] == pytest.approx(theirs[2], abs=0.02)
    assert sum(ours.values()) == pytest.approx(1)


# ---- over a results database -----------------------------------------------------------


def test_compare_json_agrees_with_a_recomputation_from_the_folds_table(db):
    result = CliRunner().invoke(main, ["compare", "--db", str(db), "--json"])
    assert result.exit_code == 0, result.output
    rows = json.loads(result.output)
    required = {
        "dataset",
        "criterion",
        "max_depth",
        "min_samples_leaf",
        "inner_folds",
        "rule",
        "prune_risk",
        "metric",
        "mean_pruned",
        "mean_unpruned",
        "diff",
        "ci_low",
        "ci_high",
        "p_value",
        "n_folds",
    }
    assert required <= set(rows[0])
    assert len(rows) == 3 * 8 + 4
    conn = sqlite3.connect(db)
    for row in rows:
        metric = row["metric"]
        depth = "t.max_depth IS NULL" if row["max_depth"] is None else "t.max_depth = ?"
        params = [row["dataset"], row["criterion"], row["rule"], row["inner_folds"]]
        if row["max_depth"] is not None:
            params.append(row["max_depth"])
        folds = conn.execute(
            f"SELECT p.{metric}, u.{metric}, p.n_train, p.n_test FROM folds p "
            'JOIN folds u ON u.trial_id = p.trial_id AND u."repeat" = p."repeat" '
            "AND u.fold = p.fold AND u.arm = 'unpruned' "
            "JOIN trials t ON t.trial_id = p.trial_id JOIN datasets d USING (dataset_id) "
            "WHERE p.arm = 'pruned' AND d.name = ? AND t.criterion = ? AND t.rule = ? "
            f"AND t.inner_folds = ? AND {depth}",
            params,
        ).fetchall()
        pruned, unpruned, n_train, n_test = map(np.array, zip(*folds, strict=True))
        d = pruned - unpruned
        j = d.size
        se = np.sqrt((1 / j + np.mean(n_test / n_train)) * d.var(ddof=1))
        q = sps.t.ppf(0.975, j - 1)
        assert row["n_folds"] == j == 6
        assert row["mean_pruned"] == pytest.approx(pruned.mean())
        assert row["diff"] == pytest.approx(d.mean())
        if se > 0:
            assert row["ci_low"] == pytest.approx(d.mean() - q * se)
            assert row["ci_high"] == pytest.approx(d.mean() + q * se)
            assert row["p_value"] == pytest.approx(2 * sps.t.sf(abs(d.mean()) / se, j - 1))
    # the verdict follows Holm's adjustment over every row (Holm 1979, recomputed here
    # by statsmodels' multipletests as reference library)
    multitest = pytest.importorskip("statsmodels.stats.multitest")
    p = np.array([r["p_value"] for r in rows], dtype=float)
    ok = ~np.isnan(p)
    holm = np.full(p.size, np.nan)
    holm[ok] = multitest.multipletests(p[ok], method="holm")[1]
    for row, adjusted in zip(rows, holm, strict=True):
        assert row["p_holm"] == pytest.approx(adjusted, nan_ok=True)
        lower_better = row["metric"] != "accuracy"
        verdict = "no evidence either way"
        if adjusted < 0.05 and row["diff"] != 0:
            pruned_better = (row["diff"] < 0) == lower_better
            verdict = "pruned better" if pruned_better else "unpruned better"
        assert row["verdict"] == verdict


def _many_trials(p_target_rows: int = 10):
    """One data set, ten configurations: one with a clear but modest gain, nine without."""
    import pandas as pd

    rng = np.random.default_rng(11)
    rows = []
    for c in range(p_target_rows):
        shift = -0.03 if c == 0 else 0.0
        noise = rng.normal(0, 0.03, 10)
        noise -= noise.mean()
        for fold in range(10):
            for arm, value in (("unpruned", 0.2), ("pruned", 0.2 + shift + noise[fold])):
                rows.append(
                    {
                        "dataset": "d0",
                        "task": "binary",
                        "trial_id": f"t{c}",
                        "criterion": "gini",
                        "max_depth": None,
                        "min_samples_leaf": 1 + c,
                        "inner_folds": 5,
                        "rule": "min",
                        "prune_risk": "error",
                        "repeat": 0,
                        "fold": fold,
                        "arm": arm,
                        "n_train": 90,
                        "n_test": 10,
                        "error": value,
                        "n_leaves": 4 if arm == "pruned" else 9,
                    }
                )
    frame = pd.DataFrame(rows)
    frame["max_depth"] = frame["max_depth"].astype("Int64")
    return frame


def test_compare_verdicts_follow_holm_not_the_unadjusted_p():
    table = stats.comparison(_many_trials())
    first = table[table["min_samples_leaf"] == 1].iloc[0]
    # unadjusted p below 0.05 (the corrected interval excludes 0) but Holm over ten rows
    # (the smallest p times 10) above it: no verdict
    assert first["p_value"] < 0.05 < first["p_holm"]
    assert first["p_holm"] == pytest.approx(min(1.0, 10 * first["p_value"]))
    assert first["verdict"] == "no evidence either way"
    # at alpha = 0.5 the adjusted p is below alpha: pruning is better
    loose = stats.comparison(_many_trials(), alpha=0.5)
    assert loose.loc[loose["min_samples_leaf"] == 1, "verdict"].iloc[0] == "pruned better"
    from prunebench.text import compare_text

    text = compare_text(table)
    assert "Holm" in text and "0 after Holm" in text


def test_compare_csv_and_table(db):
    csv = CliRunner().invoke(main, ["compare", "--db", str(db), "--csv"])
    assert csv.output.splitlines()[0].startswith("dataset,task,criterion")
    table = CliRunner().invoke(main, ["compare", "--db", str(db)])
    assert table.exit_code == 0
    assert max(len(line) for line in table.output.splitlines()) <= 100
    assert "corrected" in table.output and "naive" in table.output
    accuracy = CliRunner().invoke(
        main, ["compare", "--db", str(db), "--metric", "accuracy", "--json"]
    )
    assert {r["metric"] for r in json.loads(accuracy.output)} == {"accuracy"}


def test_two_configurations_on_one_dataset_are_paired(folds):
    t = stats.compare_configurations(
        folds,
        "wine",
        {"criterion": "gini", "max_depth": None, "rule": "min"},
        {"criterion": "entropy", "max_depth": None, "rule": "min"},
    )
    rows = folds[
        (folds.dataset == "wine")
        & (folds.arm == "pruned")
        & folds.max_depth.isna()
        & (folds.rule == "min")
    ]
    a = rows[rows.criterion == "gini"].set_index(["repeat", "fold"]).sort_index()["error"]
    b = rows[rows.criterion == "entropy"].set_index(["repeat", "fold"]).sort_index()["error"]
    assert t.mean == pytest.approx((a - b).mean()) and t.n_folds == 6
    with pytest.raises(stats.StatsError, match="names 4 trials"):
        stats.compare_configurations(folds, "wine", {"criterion": "gini"}, {"rule": "min"})


def test_an_unknown_metric_lists_the_metrics_of_the_study_families(folds, small_db):
    # mixed study: every metric of both families, in the vocabulary's column order
    with pytest.raises(stats.StatsError) as mixed:
        stats.comparison(folds, "bogus")
    assert str(mixed.value).endswith(
        "its datasets have error, accuracy, balanced_accuracy, log_loss, brier, auc, "
        "average_precision, brier_calibration, brier_refinement, expected_cost, mse, mae, r2"
    )
    # classification only: a regression metric is unknown there, and only the classification
    # metrics are listed; one line on the command line, exit 2
    result = CliRunner().invoke(main, ["compare", "--db", str(small_db), "--metric", "mse"])
    assert result.exit_code == 2 and result.output.count("\n") == 1
    assert "'mse'" in result.output
    assert result.output.rstrip().endswith(
        "error, accuracy, balanced_accuracy, log_loss, brier, auc, average_precision, "
        "brier_calibration, brier_refinement, expected_cost"
    )
