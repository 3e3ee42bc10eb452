"""Tests of per-factor effects across data sets (prunebench.effects)."""

from __future__ import annotations

import io
import math
import statistics
from collections import defaultdict

import numpy as np
import pandas as pd
import pytest
from helpers import statsmodels_fit
from scipy import stats as sps

from prunebench import effects
from prunebench.exceptions import InvalidParameterError
from prunebench.execute import Progress, conduct
from prunebench.results import load_folds
from prunebench.store import ResultStore
from prunebench.study import parse_study

sm_meta = pytest.importorskip("statsmodels.stats.meta_analysis")
sm_multitest = pytest.importorskip("statsmodels.stats.multitest")

# the levels of tests/conftest.py's SMALL_STUDY, in its file's order (reference first)
SMALL_LEVELS = {
    "criterion": ["gini", "entropy"],
    "max_depth": ["none", 3],
    "inner_folds": [3, 4],
    "rule": ["min", "1se"],
}
FACTORS = ["criterion", "max_depth", "min_samples_leaf", "inner_folds", "rule", "prune_risk"]

@pytest.fixture(scope="module")
def small_folds(small_db):
    with ResultStore(small_db, readonly=True) as store:
        return load_folds(store)


# ---- effects recomputed from a conducted study -----------------------------------------


def _none(v):
    return None if v is None or pd.isna(v) else (v if isinstance(v, str) else int(v))


def _independent_effect(folds, factor, level, ref, use_log, metric="error", within=None):
    """Per-fold contrasts with plain loops, then statsmodels across data sets."""
    cells = defaultdict(dict)
    info = {}
    for row in folds.itertuples(index=False):
        if within is not None and _none(getattr(row, within[0])) != within[1]:
            continue
        x = math.log(row.n_leaves) if use_log else getattr(row, metric)
        key = (row.dataset, row.repeat, row.fold)
        info[key] = (row.n_train, row.n_test)
        if factor == "pruning":
            cells[key].setdefault(row.trial_id, {})[row.arm] = x
            continue
        if row.arm != "pruned":
            continue
        lv = _none(getattr(row, factor))
        if lv not in (level, ref):
            continue
        others = tuple(_none(getattr(row, f)) for f in FACTORS if f != factor)
        cells[key].setdefault(others, {})[lv] = x
    a, b = ("pruned", "unpruned") if factor == "pruning" else (level, ref)
    per_fold = defaultdict(list)
    for key, groups in cells.items():
        diffs = [g[a] - g[b] for g in groups.values() if a in g and b in g]
        if diffs:
            per_fold[key[0]].append((sum(diffs) / len(diffs), *info[key]))
    ys, vs = [], []
    for dataset in sorted(per_fold):
        d = [p[0] for p in per_fold[dataset]]
        ratio = statistics.mean(p[2] / p[1] for p in per_fold[dataset])
        ys.append(statistics.mean(d))
        vs.append((1 / len(d) + ratio) * statistics.variance(d))
    positive = [x for x in vs if x > 0]
    vs = [x if x > 0 or not positive else min(positive) for x in vs]
    if not positive:  # exact: every data set's contrasts agree on every fold
        mu = statistics.mean(ys)
        return {"estimate": mu, "ci_low": mu, "ci_high": mu, "n_datasets": len(ys)}
    row, _, ref_fit, which = statsmodels_fit(ys, vs)
    lo90, hi90 = ref_fit.conf_int(alpha=0.10, use_t=True)[which]
    se = row["sd_eff"]
    return {
        "estimate": row["eff"],
        "ci_low": row["ci_low"],
        "ci_high": row["ci_upp"],
        "ci90_low": lo90,
        "ci90_high": hi90,
        "tau2": max(ref_fit.tau2, 0.0),
        "i2": max(ref_fit.i2, 0.0),
        "p_value": 2 * sps.t.sf(abs(row["eff"]) / se, len(ys) - 1),
        "n_datasets": len(ys),
    }


@pytest.mark.filterwarnings("ignore::statsmodels.tools.sm_exceptions.InvalidTestWarning")
@pytest.mark.filterwarnings("ignore:invalid value encountered in sqrt:RuntimeWarning")
def test_effects_recomputed_independently_from_the_stored_folds(small_folds):
    table = effects.factor_effects(small_folds, SMALL_LEVELS)
    contrasts = [("pruning", "pruned", "unpruned")] + [
        (f, lv, levels[0]) for f, levels in SMALL_LEVELS.items() for lv in levels[1:]
    ]
    assert len(table) == 2 * len(contrasts)
    for factor, level, ref in contrasts:
        lv, rf = (None if x == "none" else x for x in (level, ref))
        for metric, use_log in (("error", False), ("n_leaves", True)):
            got = table[(table["factor"] == factor) & (table["metric"] == metric)]
            assert len(got) == 1, (factor, metric)
            got = got.iloc[0]
            assert (got["level"], got["reference"]) == (lv, rf)
            want = _independent_effect(small_folds, factor, lv, rf, use_log)
            for key, value in want.items():
                assert got[key] == pytest.approx(value, rel=1e-9, abs=1e-12), (factor, key)
            if metric == "n_leaves":
                assert got["ratio"] == pytest.approx(math.exp(want["estimate"]), rel=1e-9)
                assert got["ratio_low"] == pytest.approx(math.exp(want["ci_low"]), rel=1e-9)
    # Holm over the family's contrasts on the primary metric (statsmodels multipletests)
    err = table[table["metric"] == "error"]
    holm = sm_multitest.multipletests(err["p_value"], method="holm")[1]
    np.testing.assert_allclose(err["p_holm"], holm, rtol=1e-12)
    # verdicts re-derived from the recomputed intervals
    for row in err.itertuples():
        if -0.01 < row.ci90_low and row.ci90_high < 0.01:
            assert row.verdict == "equivalent"
        elif row.p_holm < 0.05:
            assert row.verdict == ("better" if row.estimate < 0 else "worse")
        else:
            assert row.verdict == "undecided"


@pytest.mark.filterwarnings("ignore::statsmodels.tools.sm_exceptions.InvalidTestWarning")
@pytest.mark.filterwarnings("ignore:invalid value encountered in sqrt:RuntimeWarning")
def test_interactions_recomputed_within_levels(small_folds):
    table = effects.interaction_effects(small_folds, SMALL_LEVELS)
    rows = table[(table["factor"] == "rule") & (table["by"] == "max_depth")]
    assert list(rows["by_level"]) == [None, 3]
    for row in rows.itertuples():
        want = _independent_effect(
            small_folds, "rule", "1se", "min", False, within=("max_depth", row.by_level)
        )
        assert row.estimate == pytest.approx(want["estimate"], rel=1e-9)
        assert row.ci_low == pytest.approx(want["ci_low"], rel=1e-9)
    spread = rows["estimate"].max() - rows["estimate"].min()
    assert rows["spread"].iloc[0] == pytest.approx(spread)
    assert (rows["flagged"] == (spread > 0.01)).all()
    # a factor is never split by itself
    assert not (table["factor"] == table["by"]).any()


# ---- constructed studies ---------------------------------------------------------------

IDENTICAL = """\
name = "effects-identical"
seed = 4
datasets = ["iris", "wine"]
[outer]
repeats = 2
folds = 3
[factors]
criterion = ["gini"]
max_depth = ["none", 40]
inner_folds = [3]
rule = ["min", "1se"]
"""


@pytest.fixture(scope="module")
def identical_folds(tmp_path_factory):
    path = tmp_path_factory.mktemp("effects") / "identical.sqlite"
    conduct(parse_study(IDENTICAL), path, progress=Progress(0, io.StringIO()))
    with ResultStore(path, readonly=True) as store:
        return load_folds(store)


def test_a_factor_without_effect_gives_exactly_zero_and_equivalent(identical_folds):
    # a depth cap of 40 is never reached on iris or wine: both levels grow the same trees
    table = effects.factor_effects(
        identical_folds, {"max_depth": ["none", 40], "rule": ["min", "1se"]}
    )
    depth = table[table["factor"] == "max_depth"].set_index("metric")
    assert depth.loc["error", "estimate"] == 0.0
    assert (depth.loc["error", "ci_low"], depth.loc["error", "ci_high"]) == (0.0, 0.0)
    assert depth.loc["error", "verdict"] == "equivalent"
    assert depth.loc["n_leaves", "ratio"] == 1.0


def test_the_rule_matters_with_the_right_sign(identical_folds):
    table = effects.factor_effects(
        identical_folds, {"max_depth": ["none", 40], "rule": ["min", "1se"]}
    )
    rule = table[table["factor"] == "rule"].set_index("metric")
    # the 1-SE rule picks an alpha at least the minimum's: never more leaves, here fewer
    pruned = identical_folds[identical_folds["arm"] == "pruned"]
    key = ["dataset", "max_depth", "repeat", "fold"]
    wide = pruned.pivot_table(index=key, columns="rule", values="n_leaves", dropna=False)
    assert (wide["1se"] <= wide["min"]).all() and (wide["1se"] < wide["min"]).any()
    assert rule.loc["n_leaves", "estimate"] < 0
    assert rule.loc["n_leaves", "ratio"] < 1
    # and pruning itself shrinks the trees (two data sets: t on 1 df, a wide interval)
    pruning = table[table["factor"] == "pruning"].set_index("metric")
    assert pruning.loc["n_leaves", "ratio"] < 1


# ---- synthetic folds: units, directions, small k ---------------------------------------


def _synthetic(k=4, j=6, shift=0.05, metric_scale=1.0, seed=0):
    """Folds of a two-rule study: rule b's error is a's + shift (+ noise)."""
    rng = np.random.default_rng(seed)
    rows = []
    for d in range(k):
        base = rng.uniform(0.1, 0.3)
        for f in range(j):
            e_a = base + rng.normal(0, 0.02)
            e_b = e_a + shift + rng.normal(0, 0.01)
            e_u = e_a + 0.02 + rng.normal(0, 0.01)
            for rule, e in (("a", e_a), ("b", e_b)):
                for arm, err in (("pruned", e), ("unpruned", e_u)):
                    rows.append(
                        {
                            "dataset": f"d{d}",
                            "task": "binary",
                            "trial_id": f"d{d}-{rule}",
                            "criterion": "gini",
                            "max_depth": pd.NA,
                            "min_samples_leaf": 1,
                            "inner_folds": 5,
                            "rule": rule,
                            "prune_risk": "error",
                            "repeat": 0,
                            "fold": f,
                            "arm": arm,
                            "n_train": 80,
                            "n_test": 20,
                            "error": err * metric_scale,
                            "accuracy": 1 - err * metric_scale,
                            "n_leaves": 5 if arm == "pruned" else 20,
                        }
                    )
    frame = pd.DataFrame(rows)
    frame["max_depth"] = frame["max_depth"].astype("Int64")
    return frame


def test_a_clear_loss_is_worse_and_accuracy_gives_the_same_loss_contrast():
    folds = _synthetic()
    table = effects.factor_effects(folds, {"rule": ["a", "b"]})
    rule = table[(table["factor"] == "rule") & (table["metric"] == "error")].iloc[0]
    assert rule["estimate"] == pytest.approx(0.05, abs=0.01)
    assert rule["verdict"] == "worse"
    # accuracy is larger-is-better: its loss is 1 - accuracy, the same contrast
    acc = effects.factor_effects(folds, {"rule": ["a", "b"]}, metric="accuracy")
    acc_rule = acc[(acc["factor"] == "rule") & (acc["metric"] == "accuracy")].iloc[0]
    assert acc_rule["estimate"] == pytest.approx(rule["estimate"], rel=1e-9)
    assert acc_rule["verdict"] == "worse"
    # with b as the reference the sign flips and a is better
    flipped = effects.factor_effects(folds, {"rule": ["b", "a"]})
    f_rule = flipped[(flipped["factor"] == "rule") & (flipped["metric"] == "error")].iloc[0]
    assert f_rule["estimate"] == pytest.approx(-rule["estimate"], rel=1e-9)
    assert f_rule["verdict"] == "better"


def test_mse_contrasts_are_relative_to_each_data_sets_unpruned_loss():
    folds = _synthetic(shift=0.05)
    folds["task"] = "regression"
    folds["mse"] = folds["error"] * folds["dataset"].map({"d0": 1, "d1": 1e3, "d2": 1e6, "d3": 10})
    table = effects.factor_effects(folds, {"rule": ["a", "b"]})
    rule = table[(table["factor"] == "rule") & (table["metric"] == "mse")].iloc[0]
    # by hand: per data set the mean contrast divided by the mean unpruned loss
    by_hand = []
    for _, g in folds.groupby("dataset"):
        scale = g.loc[g["arm"] == "unpruned", "mse"].mean()
        p = g[g["arm"] == "pruned"].pivot_table(index="fold", columns="rule", values="mse")
        by_hand.append(((p["b"] - p["a"]) / scale).mean())
    assert min(by_hand) < rule["estimate"] < max(by_hand)
    assert rule["margin"] == 0.01


def test_one_and_two_data_sets():
    folds = _synthetic(shift=0.005)
    one = effects.factor_effects(folds[folds["dataset"] == "d0"], {"rule": ["a", "b"]})
    row = one[(one["factor"] == "rule") & (one["metric"] == "error")].iloc[0]
    assert row["n_datasets"] == 1 and "nothing generalises" in row["note"]
    assert np.isnan(row["pi_low"]) and np.isnan(row["tau2"])
    # the data set's own corrected t interval (Nadeau-Bengio, J - 1 df), by hand
    g = folds[(folds["dataset"] == "d0") & (folds["arm"] == "pruned")]
    d = g.pivot_table(index="fold", columns="rule", values="error")
    d = (d["b"] - d["a"]).to_numpy()
    se = math.sqrt((1 / 6 + 20 / 80) * d.var(ddof=1))
    assert row["ci_high"] == pytest.approx(d.mean() + sps.t.ppf(0.975, 5) * se, rel=1e-9)
    two = effects.factor_effects(folds[folds["dataset"].isin(["d0", "d1"])], {"rule": ["a", "b"]})
    row = two[(two["factor"] == "rule") & (two["metric"] == "error")].iloc[0]
    assert row["n_datasets"] == 2 and np.isnan(row["pi_low"]) and np.isfinite(row["ci_low"])


def test_bad_levels_and_parameters_name_what_is_wrong():
    folds = _synthetic()
    with pytest.raises(InvalidParameterError, match="'levels' parameter.*'rule'"):
        effects.factor_effects(folds, {"criterion": ["gini"]})
    with pytest.raises(InvalidParameterError, match=r"levels\['rule'\]"):
        effects.factor_effects(folds, {"rule": ["a", "c"]})
    with pytest.raises(InvalidParameterError, match="'margin' parameter"):
        effects.factor_effects(folds, {"rule": ["a", "b"]}, margin=-1)
    with pytest.raises(effects.EffectsError, match="lack the column"):
        effects.factor_effects(folds.drop(columns="n_leaves"), {"rule": ["a", "b"]})


def test_default_margins_follow_the_design():
    # DESIGN.md "Decision": 0.01 error, 0.01 Brier, 0.02 log loss, 1% for MSE (AUC is not
    # a stored metric); the vocabulary is the one source of margins
    from prunebench import vocabulary

    assert vocabulary.default_margin("error") == 0.01
    assert vocabulary.default_margin("brier") == 0.01
    assert vocabulary.default_margin("log_loss") == 0.02
    assert vocabulary.default_margin("mse") == 0.01 and vocabulary.is_relative("mse")
    assert not vocabulary.is_relative("error")
    assert not hasattr(effects, "MARGINS") and not hasattr(effects, "_holm")


def test_no_class_weighting_is_spelled_none_as_in_the_study_file():
    # rule a / b become class weights none / balanced (the study file's spelling)
    folds = _synthetic()
    folds["class_weight"] = folds["rule"].map({"a": "none", "b": "balanced"})
    folds["rule"] = "min"
    table = effects.factor_effects(folds, {"class_weight": ["none", "balanced"]})
    weights = table[table["factor"] == "class_weight"]
    assert set(weights["level"]) == {"balanced"} and set(weights["reference"]) == {"none"}
    records = [r for r in effects.effect_records(table) if r["factor"] == "class_weight"]
    assert {(r["level"], r["reference"]) for r in records} == {("balanced", "none")}


def test_interactions_spell_no_class_weighting_none():
    folds = _synthetic()
    folds["class_weight"] = np.where(folds["fold"] % 2 == 0, "none", "balanced")
    table = effects.interaction_effects(
        folds, {"rule": ["a", "b"], "class_weight": ["none", "balanced"]}
    )
    within = table[(table["factor"] == "rule") & (table["by"] == "class_weight")]
    assert set(within["by_level"]) == {"none", "balanced"}
