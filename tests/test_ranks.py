"""Tests of the ranking across data sets and the recommended default (prunebench.ranks)."""

from __future__ import annotations

import json
import tomllib

import numpy as np
import pytest
from click.testing import CliRunner
from scipy import stats as sps

from prunebench import ranks, stats
from prunebench.cli import main


@pytest.fixture(scope="module")
def db(mixed_db):
    return mixed_db


@pytest.fixture(scope="module")
def folds(mixed_folds):
    return mixed_folds


def test_ranking_tables_and_tests(folds):
    results = ranks.ranking(folds)
    families = {r["family"]: r for r in results}
    assert set(families) == {"classification", "regression"}
    cls = families["classification"]
    # 8 pruned configurations and 4 distinct unpruned trees, on 3 data sets
    assert len(cls["table"]) == 12 and cls["datasets"] == ["breast_cancer", "iris", "wine"]
    row_ranks = np.apply_along_axis(sps.rankdata, 1, cls["means"].to_numpy())
    np.testing.assert_allclose(np.sort(cls["table"]["mean_rank"]), np.sort(row_ranks.mean(0)))
    assert cls["cd"] == pytest.approx(stats.critical_difference(12, 3))
    assert cls["table"]["not_worse"].iloc[0]
    assert (cls["table"]["wins"] + cls["table"]["ties"] + cls["table"]["losses"] == 3).all()
    # with one regression data set there is nothing to test across data sets
    assert families["regression"]["friedman"] is None


def test_rank_and_recommend_commands(db):
    rank = CliRunner().invoke(main, ["rank", "--db", str(db)])
    assert rank.exit_code == 0, rank.output
    assert "Friedman chi2" in rank.output and "critical difference" in rank.output
    assert max(len(line) for line in rank.output.splitlines()) <= 100
    as_json = json.loads(CliRunner().invoke(main, ["rank", "--db", str(db), "--json"]).output)
    assert {"mean_rank", "wins", "ties", "losses", "not_worse", "critical_difference"} <= set(
        as_json[0]
    )
    rec = CliRunner().invoke(main, ["recommend", "--db", str(db)])
    assert rec.exit_code == 0, rec.output
    assert "starting point" in rec.output and "fairness and legal review" in rec.output
    assert max(len(line) for line in rec.output.splitlines()) <= 100
    out = json.loads(CliRunner().invoke(main, ["recommend", "--db", str(db), "--json"]).output)
    for rec in out:
        namespace: dict = {}
        exec(rec["estimator"], namespace)  # the block is ready-to-use Python
        model = namespace["model"]
        assert model.get_params()["criterion"] == rec["config"]["criterion"]
        fragment = tomllib.loads(rec["study_fragment"])["factors"][rec["family"]]
        assert fragment["criterion"] == [rec["config"]["criterion"]]


def _random_folds(n_datasets, n_configs, seed, spread=1.0, task="binary", metric="error"):
    """Synthetic fold rows: n_configs pruned configurations (rule levels) on n_datasets."""
    import pandas as pd

    rng = np.random.default_rng(seed)
    rows = []
    for d in range(n_datasets):
        scale = 10.0**d if metric == "mse" else 1.0
        base = rng.uniform(0.1, 0.3)
        for c in range(n_configs):
            for fold in range(4):
                for arm in ("pruned", "unpruned"):
                    value = base + (spread * rng.normal(0, 0.02) if arm == "pruned" else 0.0)
                    rows.append(
                        {
                            "dataset": f"d{d}",
                            "task": task,
                            "trial_id": f"d{d}-c{c}",
                            "criterion": "gini" if task != "regression" else "squared_error",
                            "max_depth": None,
                            "min_samples_leaf": 1,
                            "inner_folds": 5,
                            "rule": f"{c}se",
                            "prune_risk": "error",
                            "repeat": 0,
                            "fold": fold,
                            "arm": arm,
                            "n_train": 75,
                            "n_test": 25,
                            metric: value * scale,
                            "n_leaves": 5 if arm == "pruned" else 9,
                        }
                    )
    frame = pd.DataFrame(rows)
    frame["max_depth"] = frame["max_depth"].astype("Int64")
    return frame


def test_rank_says_when_friedman_cannot_separate():
    from prunebench.text import rank_text

    # pure noise around one loss: Friedman's p is large, and the text must say so
    noise = _random_folds(5, 4, seed=2)
    (res,) = ranks.ranking(noise)
    assert res["friedman"]["p_chi2"] >= 0.05 and not res["separated"]
    assert "cannot separate the configurations" in rank_text([res], 0.05)
    # configurations far apart on every data set: Friedman separates them, no such line
    apart = _random_folds(6, 4, seed=2, spread=0.0)
    apart["error"] += apart["rule"].str[0].astype(int) * 0.05 * (apart["arm"] == "pruned")
    (res,) = ranks.ranking(apart)
    assert res["separated"] and "cannot separate" not in rank_text([res], 0.05)


def test_regression_tests_use_gains_relative_to_each_unpruned_loss():
    # each data set's MSE is 10**d times the same relative picture: relative gains make
    # Wilcoxon's p and the Bayesian probabilities the ones of the unscaled data
    scaled = _random_folds(6, 2, seed=4, task="regression", metric="mse")
    flat = scaled.copy()
    flat["mse"] = flat["mse"] / 10.0 ** flat["dataset"].str[1:].astype(int)
    a = ranks.ranking(scaled)[0]["table"].set_index("label")
    b = ranks.ranking(flat)[0]["table"].set_index("label")
    pruned = a["wilcoxon_p"].notna()
    np.testing.assert_allclose(a.loc[pruned, "wilcoxon_p"], b.loc[pruned, "wilcoxon_p"])
    np.testing.assert_allclose(a.loc[pruned, "p_equivalent"], b.loc[pruned, "p_equivalent"])
    # raw differences would be dominated by the 10**5 data set: by hand, scipy's Wilcoxon
    # (reference library) of the relative gains
    means = flat[flat["arm"] == "pruned"].groupby(["rule", "dataset"])["mse"].mean()
    base = flat[flat["arm"] == "unpruned"].groupby("dataset")["mse"].mean()
    rel = ((base - means.loc["0se"]) / base).to_numpy()
    (row,) = [r for _, r in a.iterrows() if r["rule"] == "0se"]
    assert row["wilcoxon_p"] == pytest.approx(
        sps.wilcoxon(rel, zero_method="zsplit").pvalue
    )


def test_r2_gains_are_never_divided_by_r2():
    # unpruned R^2 near zero: dividing by |R^2| would blow the gains up past any margin
    folds = _random_folds(6, 1, seed=5, task="regression", metric="r2")
    folds["r2"] = folds["r2"] - 0.2 + 1e-4  # unpruned R^2 about 0 on every data set
    (res,) = ranks.ranking(folds, "r2")
    row = res["table"][res["table"]["wilcoxon_p"].notna()].iloc[0]
    means = folds[folds["arm"] == "pruned"].groupby("dataset")["r2"].mean()
    base = folds[folds["arm"] == "unpruned"].groupby("dataset")["r2"].mean()
    expected = stats.bayesian_signed_rank((means - base).to_numpy(), rope=0.01)
    assert row["p_equivalent"] == pytest.approx(expected["p_equivalent"])
    assert res["rope"] == 0.01


def test_the_rope_is_the_metrics_margin_or_the_one_given():
    folds = _random_folds(5, 2, seed=6)
    assert ranks.ranking(folds)[0]["rope"] == 0.01
    wide = ranks.ranking(folds, margin=0.5)[0]["table"]
    # every gain lies well inside a margin of 0.5: practically equivalent for certain
    assert (wide.loc[wide["p_equivalent"].notna(), "p_equivalent"] == 1.0).all()


def test_regret_best_is_not_picked_on_the_folds_it_scores():
    # data set d0: configuration 0 is best on even folds, configuration 1 on odd ones; the
    # chosen configuration 2 is in the middle. Picking the best on all folds and scoring
    # on the same folds would give regret > 0 from noise alone.
    import pandas as pd

    folds = _random_folds(2, 3, seed=7, spread=0.0)
    pattern = {0: [0.10, 0.30, 0.10, 0.30], 1: [0.30, 0.10, 0.30, 0.10], 2: [0.2] * 4}
    pruned = folds["arm"] == "pruned"
    for c, values in pattern.items():
        for f, v in enumerate(values):
            mask = pruned & (folds["rule"] == f"{c}se") & (folds["fold"] == f)
            folds.loc[mask, "error"] = v
    folds.loc[~pruned, "error"] = 0.5
    (res,) = ranks.ranking(folds)
    config = [c for c in res["means"].columns if c.rule == "2se"][0]
    regret = ranks._regrets(folds, res, config, 0.05).set_index("dataset")
    # by hand: even folds (0, 2) scored against the best on odd folds (config 1: 0.30
    # there), odd folds (1, 3) against the best on even folds (config 0: 0.30 there)
    assert regret.loc["d0", "regret"] == pytest.approx(0.2 - 0.3)
    assert isinstance(regret, pd.DataFrame) and "1se" in regret.loc["d0", "best"]


def test_a_family_with_no_finished_trial_is_left_out_of_the_ranking(folds):
    # a mixed study stopped before its regression trials: the [decision] settings still name
    # both families; ranking must rank the one that has rows, not fail on the other
    classification_only = folds[folds["task"] != "regression"]
    results = ranks.ranking(classification_only, {"classification": "error", "regression": "mse"})
    assert [r["family"] for r in results] == ["classification"]
    whole = ranks.ranking(folds, {"classification": "error", "regression": "mse"})
    assert [r["family"] for r in whole] == ["classification", "regression"]


def test_machine_outputs_write_integer_levels_as_integers(db):
    import csv
    import io

    # the unpruned trees' missing inner folds and an unlimited depth beside 3 and 4 folds
    frame = ranks.ranking_frame(ranks.ranking(_folds_of(db)))
    assert str(frame["inner_folds"].dtype) == "Int64" and str(frame["max_depth"].dtype) == "Int64"
    assert set(frame["class_weight"]) == {"none"}
    as_json = json.loads(CliRunner().invoke(main, ["rank", "--db", str(db), "--json"]).output)
    for row in as_json:
        for name in ("max_depth", "min_samples_leaf", "inner_folds"):
            assert row[name] is None or type(row[name]) is int, (name, row[name])
        assert row["class_weight"] == "none"
    as_csv = CliRunner().invoke(main, ["rank", "--db", str(db), "--csv"]).output
    rows = list(csv.DictReader(io.StringIO(as_csv)))
    assert {r["inner_folds"] for r in rows} <= {"", "3"} and "3" in {r["max_depth"] for r in rows}
    # and recommend --json says the same as rank
    out = CliRunner().invoke(main, ["recommend", "--db", str(db), "--json"]).output
    config = json.loads(out)[0]["config"]
    assert config["class_weight"] == "none" and type(config["min_samples_leaf"]) is int


def _folds_of(db):
    from prunebench.results import load_folds
    from prunebench.store import ResultStore

    with ResultStore(db, readonly=True) as store:
        return load_folds(store)
