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
        assert rec["worst_regret"] >= rec["mean_regret"] >= 0


def test_recommendation_takes_the_best_eligible_rank(folds):
    for rec in ranks.recommendation(folds):
        table = rec["ranking"]["table"]
        eligible = table[table["not_worse"]]
        assert rec["mean_rank"] == eligible["mean_rank"].min()
