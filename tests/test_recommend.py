"""Tests of the recommendation rule and tree stability (prunebench.recommend)."""

from __future__ import annotations

import statistics
from collections import defaultdict

import numpy as np
import pandas as pd
import pytest
from scipy import stats as sps

from prunebench import recommend
from prunebench.exceptions import InvalidParameterError
from prunebench.results import load_folds
from prunebench.store import ResultStore

sm_meta = pytest.importorskip("statsmodels.stats.meta_analysis")

FACTORS = [
    "criterion",
    "max_depth",
    "min_samples_leaf",
    "inner_folds",
    "rule",
    "prune_risk",
    "select_by",
    "class_weight",
]
MARGIN = 0.01

pytestmark = [
    pytest.mark.filterwarnings("ignore::statsmodels.tools.sm_exceptions.InvalidTestWarning"),
    pytest.mark.filterwarnings("ignore:invalid value encountered in sqrt:RuntimeWarning"),
]


@pytest.fixture(scope="module")
def small_folds(small_db):
    with ResultStore(small_db, readonly=True) as store:
        return load_folds(store)


def _none(v):
    return None if v is None or pd.isna(v) else (v if isinstance(v, str) else int(v))


def _record(config: tuple) -> dict:
    """A brute-force key as the records write it: no class weighting spelled "none"."""
    levels = dict(zip(FACTORS, config, strict=True))
    return {**levels, "class_weight": levels["class_weight"] or "none"}


def _key(record: dict) -> tuple:
    """A record's levels as a brute-force key (no class weighting as None)."""
    return tuple(None if k == "class_weight" and v == "none" else v for k, v in record.items())


def _per_fold_losses(folds):
    """config -> dataset -> [(repeat, fold) sorted] -> (error, leaves, n_train, n_test)."""
    table = defaultdict(lambda: defaultdict(dict))
    for row in folds.itertuples(index=False):
        growth = (row.criterion, _none(row.max_depth), int(row.min_samples_leaf))
        weight = None if row.class_weight == "none" else row.class_weight
        if row.arm == "pruned":
            levels = (int(row.inner_folds), row.rule, row.prune_risk, row.select_by)
            config = (*growth, *levels, weight)
        else:  # one unpruned tree per growth setting
            config = (*growth, None, "unpruned", None, None, weight)
        table[config][row.dataset].setdefault(
            (row.repeat, row.fold), (row.error, row.n_leaves, row.n_train, row.n_test)
        )
    return table


def _upper(diffs_by_dataset):
    """One-sided 95% Hartung-Knapp upper bound via statsmodels (independent of ours)."""
    ys, vs, js = [], [], []
    for folds in diffs_by_dataset:
        d = [f[0] for f in folds]
        ratio = statistics.mean(f[2] / f[1] for f in folds)
        ys.append(statistics.mean(d))
        vs.append((1 / len(d) + ratio) * statistics.variance(d))
        js.append(len(d))
    positive = [v for v in vs if v > 0]
    vs = [v if v > 0 or not positive else min(positive) for v in vs]
    k = len(ys)
    if not positive:
        sd = statistics.stdev(ys) if k > 1 else 0.0
        return statistics.mean(ys) + (sps.t.ppf(0.95, k - 1) * sd / k**0.5 if sd else 0.0)
    if k == 1:
        return ys[0] + sps.t.ppf(0.95, js[0] - 1) * vs[0] ** 0.5
    fit = sm_meta.combine_effects(np.array(ys), np.array(vs), method_re="dl", use_t=True)
    which = 3 if fit.tau2 > 0 else 2  # tau^2 truncated at 0: fixed-effect weights
    return fit.conf_int(alpha=0.10, use_t=True)[which][1]


def _brute_force(table, datasets):
    """The rule by a plain pass: B, every configuration's bound, the acceptable set, choice."""
    keys = {d: sorted(table[next(iter(table))][d]) for d in datasets}
    complete = [c for c in table if all(len(table[c][d]) == len(keys[d]) for d in datasets)]
    loss = {
        c: statistics.mean(statistics.mean(v[0] for v in table[c][d].values()) for d in datasets)
        for c in complete
    }
    leaves = {
        c: statistics.mean(statistics.mean(v[1] for v in table[c][d].values()) for d in datasets)
        for c in complete
    }
    best = min(complete, key=lambda c: loss[c])
    upper = {}
    for c in complete:
        diffs = [
            [
                (table[c][d][f][0] - table[best][d][f][0], table[c][d][f][2], table[c][d][f][3])
                for f in keys[d]
            ]
            for d in datasets
        ]
        upper[c] = _upper(diffs)
    acceptable = [c for c in complete if upper[c] < MARGIN]
    choice = min(acceptable, key=lambda c: (round(leaves[c], 9), loss[c]))
    return best, upper, acceptable, choice, loss, leaves, keys


def test_recommendation_is_the_fewest_leaves_of_the_acceptable_set(small_folds):
    result = recommend.recommend(small_folds, trials={"done": 16, "failed": 1, "pending": 2})
    assert [r["family"] for r in result] == ["classification"]
    r = result[0]
    table = _per_fold_losses(small_folds)
    datasets = sorted(small_folds["dataset"].unique())
    best, upper, acceptable, choice, loss, leaves, _ = _brute_force(table, datasets)
    assert r["n_configurations"] == len(loss) == 16 + 4  # 16 pruned, 4 distinct unpruned trees
    assert r["best"]["config"] == _record(best)
    assert r["config"] == _record(choice)
    assert r["mean_loss"] == pytest.approx(loss[choice], rel=1e-12)
    assert r["mean_leaves"] == pytest.approx(leaves[choice], rel=1e-12)
    got = {_key(a["config"]): a for a in r["acceptable"]}
    assert set(got) == set(acceptable)
    for c, a in got.items():
        assert a["upper_bound"] == pytest.approx(upper[c], rel=1e-9, abs=1e-12)
        assert a["mean_leaves"] == pytest.approx(leaves[c], rel=1e-12)
    # listed fewest leaves first; the best itself is acceptable (bound 0)
    assert [a["mean_leaves"] for a in r["acceptable"]] == sorted(
        a["mean_leaves"] for a in r["acceptable"]
    )
    assert got[best]["upper_bound"] == 0.0
    # on this study the rule changes the answer: a smaller tree than the best's
    assert choice != best and leaves[choice] < leaves[best]
    assert r["margin"] == MARGIN and r["metric"] == "error"
    assert r["trials"] == {"done": 16, "failed": 1, "pending": 2}
    # the stored folds carry root_feature / features_used: by hand, the share of the
    # chosen configuration's outer folds whose tree splits first on the commonest root
    chosen = small_folds[small_folds["arm"] == "pruned"]
    for factor, level in zip(FACTORS, choice, strict=True):
        column = chosen[factor]
        # None stands for unlimited depth and for no class weight ("none")
        chosen = chosen[(column.isna() | (column == "none")) if level is None else column == level]
    assert len(r["stability"]) == 3
    for s in r["stability"]:
        roots = chosen.loc[chosen["dataset"] == s["dataset"], "root_feature"].astype(str)
        assert len(roots) == s["n_folds"] == 6
        assert s["root_share"] == pytest.approx(roots.value_counts().max() / len(roots))


def test_leave_one_data_set_out_recomputed(small_folds):
    r = recommend.recommend(small_folds)[0]
    table = _per_fold_losses(small_folds)
    datasets = sorted(small_folds["dataset"].unique())
    regrets = []
    for held in datasets:
        rest = [d for d in datasets if d != held]
        *_, choice, _, _, keys = _brute_force(table, rest)
        folds = sorted(table[choice][held])
        even, odd = folds[0::2], folds[1::2]
        configs = [c for c in table if len(table[c][held]) == len(folds)]

        def mean_on(c, half, held=held):
            return statistics.mean(table[c][held][f][0] for f in half)

        regret = 0.0
        for pick, score in ((even, odd), (odd, even)):
            lowest = min(mean_on(c, pick) for c in configs)
            tied = [c for c in configs if mean_on(c, pick) == lowest]
            best_score = statistics.mean(mean_on(c, score) for c in tied)
            regret += (mean_on(choice, score) - best_score) / 2
        regrets.append(regret)
    held_out = r["held_out"]
    assert held_out["n_datasets"] == 3
    assert held_out["mean_regret"] == pytest.approx(statistics.mean(regrets), rel=1e-9)
    share = statistics.mean(x > MARGIN for x in regrets)
    assert held_out["share_over_margin"] == pytest.approx(share)
    assert [p["regret"] for p in held_out["per_dataset"]] == pytest.approx(regrets, rel=1e-9)


def test_upper_bounds_of_a_constant_difference_are_exact():
    # every fold 0.02 worse on every data set: mean 0.02, no spread, bound = mean
    diffs = np.full((4, 6, 1), 0.02)
    mean, upper = recommend.upper_bounds(diffs, np.full(4, 0.25))
    assert (mean[0], upper[0]) == (pytest.approx(0.02), pytest.approx(0.02))


def test_a_larger_margin_accepts_more_and_never_more_leaves(small_folds):
    tight = recommend.recommend(small_folds, margin=0.001)[0]
    loose = recommend.recommend(small_folds, margin=0.05)[0]
    assert len(loose["acceptable"]) >= len(tight["acceptable"])
    assert loose["mean_leaves"] <= tight["mean_leaves"]
    # a loose margin lets the unpruned trees' opposite, the smallest trees, in
    assert loose["mean_leaves"] == min(a["mean_leaves"] for a in loose["acceptable"])


def test_stability_by_hand():
    config = ("gini", None, 1, 5, "1se", "error", "error", None)
    frame = pd.DataFrame(
        {
            "dataset": ["a"] * 4 + ["b"] * 2,
            "config": [config] * 6,
            "root_feature": ["x1", "x1", "x2", "x1", None, None],
            "features_used": ["x1,x2", "x1", "x2,x3", ["x1", "x2"], "", ""],
            "n_leaves": [2, 4, 6, 8, 1, 1],
            "alpha": [0.0, 0.01, 0.02, 0.03, 0.5, 0.5],
        }
    )
    out = recommend.stability(frame, dict(zip(FACTORS, config, strict=True)))
    a, b = out.set_index("dataset").loc["a"], out.set_index("dataset").loc["b"]
    # by hand: x1 is the root in 3 of 4 folds
    assert (a["root_feature"], a["root_share"]) == ("x1", 0.75)
    # pairs: {x1,x2}-{x1} 1/2, {x1,x2}-{x2,x3} 1/3, {x1,x2}-{x1,x2} 1, {x1}-{x2,x3} 0,
    # {x1}-{x1,x2} 1/2, {x2,x3}-{x1,x2} 1/3: mean 8/3 / 6
    assert a["jaccard"] == pytest.approx((1 / 2 + 1 / 3 + 1 + 0 + 1 / 2 + 1 / 3) / 6)
    # linear percentiles of 2, 4, 6, 8: positions 0.3 and 2.7
    assert (a["leaves_p10"], a["leaves_p90"]) == (pytest.approx(2.6), pytest.approx(7.4))
    assert (a["alpha_p10"], a["alpha_p90"]) == (pytest.approx(0.003), pytest.approx(0.027))
    # single-leaf trees: no root feature, empty sets agree
    assert (b["root_feature"], b["root_share"], b["jaccard"]) == ("", 1.0, 1.0)
    assert recommend.stability(frame.drop(columns="root_feature"), config) is None


def test_records_spell_levels_as_the_study_file_and_rank_do(small_folds):
    r = recommend.recommend(small_folds)[0]
    # no class weighting is "none" (as in the study file and in rank), integers are ints
    for c in [r["config"], r["best"]["config"], *(a["config"] for a in r["acceptable"])]:
        assert c["class_weight"] == "none"
        assert all(
            isinstance(c[f], int) for f in ("min_samples_leaf", "inner_folds") if c[f] is not None
        )


def test_labels_name_the_loss_and_the_class_weight_off_their_defaults():
    base = ("gini", None, 1, 5, "1se", "cost", "error", "none")
    assert recommend.config_label(base) == "gini depth=none leaf=1 k=5 1se cost"
    other = recommend.config_label((*base[:6], "auc", "balanced"))
    assert other == "gini depth=none leaf=1 class_weight=balanced k=5 1se cost select_by=auc"
    labels = {
        recommend.config_label((*base[:6], s, w))
        for s in ("error", "cost", "brier", "log_loss", "auc", "average_precision")
        for w in ("none", "balanced")
    }
    assert len(labels) == 12


def test_a_single_leaf_tree_has_no_root_feature_not_na():
    # the store's NULL root arrives as pandas' NA in a nullable integer column
    config = ("gini", None, 1, 5, "1se", "error", "error", None)
    frame = pd.DataFrame(
        {
            "dataset": ["a"] * 3,
            "config": [config] * 3,
            "root_feature": pd.array([None, None, 3], dtype="Int64"),
            "features_used": ["", "", "3"],
            "n_leaves": [1, 1, 2],
            "alpha": [0.5, 0.5, 0.0],
        }
    )
    (row,) = recommend.stability(frame, config).to_dict("records")
    assert (row["root_feature"], row["root_share"]) == ("", pytest.approx(2 / 3))


def test_recommend_reports_stability_when_the_folds_have_it(small_folds):
    folds = small_folds.copy()
    # stand-ins for the stored columns: the root is "f0" on even folds, "f1" on odd ones
    folds["root_feature"] = np.where(folds["fold"] % 2 == 0, "f0", "f1")
    folds["features_used"] = "f0,f1"
    r = recommend.recommend(folds)[0]
    stable = pd.DataFrame(r["stability"]).set_index("dataset")
    assert sorted(stable.index) == sorted(folds["dataset"].unique())
    # 6 outer folds (2 x 3): folds 0, 2 of each repeat -> f0 in 4 of 6
    assert (stable["root_feature"] == "f0").all()
    assert stable["root_share"].tolist() == pytest.approx([4 / 6] * 3)
    assert (stable["jaccard"] == 1.0).all()


def test_bad_parameters_are_named(small_folds):
    with pytest.raises(InvalidParameterError, match="'alpha' parameter of recommend"):
        recommend.recommend(small_folds, alpha=0.7)
    with pytest.raises(InvalidParameterError, match="'margin' parameter of recommend"):
        recommend.recommend(small_folds, margin=0)
    with pytest.raises(InvalidParameterError, match="'metric' parameter of recommend"):
        recommend.recommend(small_folds, metric="mse")


def test_a_family_without_complete_folds_is_named_undecided(small_folds):
    # every configuration lacks one outer fold of iris: nothing has every fold of every set
    gap = small_folds[~((small_folds["dataset"] == "iris") & (small_folds["fold"] == 0))]
    gap = gap[~((gap["dataset"] == "wine") & (gap["fold"] == 1))]
    (r,) = recommend.recommend(gap, trials={"done": 3, "failed": 0, "pending": 5})
    assert r["decided"] is False and r["config"] is None and "outer folds" in r["reason"]
    assert r["trials"] == {"done": 3, "failed": 0, "pending": 5}
    # alpha = 0.5 is allowed ((0, 0.5]), above it is not
    assert recommend.recommend(small_folds, alpha=0.5)[0]["decided"]
