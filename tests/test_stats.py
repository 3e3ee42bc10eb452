"""Tests of statistics over stored results (prunebench.stats)."""

from __future__ import annotations

import io
import sqlite3

import pytest

from prunebench.execute import Progress, conduct
from prunebench.stats import arm_means
from prunebench.store import ResultStore
from prunebench.study import parse_study

STUDY = """\
name = "stats-unit"
seed = 1
datasets = ["iris", "diabetes"]
[outer]
repeats = 1
folds = 3
[factors]
max_depth = ["none", 3]
inner_folds = [3]
rule = ["min", "1se"]
[factors.classification]
criterion = ["gini"]
prune_risk = ["error"]
[factors.regression]
criterion = ["squared_error"]
prune_risk = ["squared_error"]
"""


def test_arm_means_match_a_hand_aggregation(tmp_path):
    study = parse_study(STUDY)
    db = tmp_path / "r.sqlite"
    conduct(study, db, progress=Progress(0, io.StringIO()))
    with ResultStore(db, readonly=True) as store:
        table = arm_means(store, study.study_id)
    assert len(table) == 2 * 2 * 2  # datasets x rules x arms
    conn = sqlite3.connect(db)
    for row in table.itertuples():
        metric = "mse" if row.dataset == "diabetes" else "error"
        assert row.metric == metric
        expected = conn.execute(
            f"SELECT AVG(f.{metric}), AVG(f.n_leaves) FROM folds f JOIN trials t USING (trial_id) "
            "JOIN datasets d USING (dataset_id) WHERE d.name=? AND t.rule=? AND f.arm=?",
            (row.dataset, row.rule, row.arm),
        ).fetchone()
        assert row.value == pytest.approx(expected[0])
        assert row.n_leaves == pytest.approx(expected[1])
        assert row.n_trials == 2
