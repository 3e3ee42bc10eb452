"""Tests of per-factor effects across data sets (prunebench.effects)."""

from __future__ import annotations

import io
import math
import statistics
from collections import defaultdict

import numpy as np
import pandas as pd
import pytest
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

# Colditz et al. (1994) BCG vaccine trials as in DESIGN.md: treated TB+, TB-, control TB+, TB-
BCG = np.array(
    [
        [4, 119, 11, 128],
        [6, 300, 29, 274],
        [3, 228, 11, 209],
        [62, 13536, 248, 12619],
        [33, 5036, 47, 5761],
        [180, 1361, 372, 1079],
        [8, 2537, 10, 619],
        [505, 87886, 499, 87892],
        [29, 7470, 45, 7232],
        [17, 1699, 65, 1600],
        [186, 50448, 141, 27197],
        [5, 2493, 3, 2338],
        [27, 16886, 29, 17825],
    ],
    dtype=float,
)


@pytest.fixture(scope="module")
def small_folds(small_db):
    with ResultStore(small_db, readonly=True) as store:
        return load_folds(store)


# ---- the random-effects combination ----------------------------------------------------


def test_bcg_trials_match_the_published_dersimonian_laird_figures():
    a, b, c, d = BCG.T
    y = np.log(a / (a + b)) - np.log(c / (c + d))
    v = 1 / a - 1 / (a + b) + 1 / c - 1 / (c + d)
    r = effects.random_effects(y, v)
    # metafor's documentation (Viechtbauer 2010), DerSimonian-Laird fit of these 13 trials,
    # from memory: estimate -0.7141, SE 0.1787, tau^2 0.3088, I^2 92.12%
    assert r["estimate"] == pytest.approx(-0.7141, abs=5e-5)
    assert r["se_plain"] == pytest.approx(0.1787, abs=5e-5)
    assert r["tau2"] == pytest.approx(0.3088, abs=5e-5)
    assert r["i2"] == pytest.approx(0.9212, abs=5e-5)
    # statsmodels' combine_effects on the same data: the same figures, and its
    # "random effect wls" row is the Hartung-Knapp interval
    ref = sm_meta.combine_effects(y, v, method_re="dl", use_t=True)
    frame = ref.summary_frame()
    assert ref.tau2 == pytest.approx(r["tau2"], rel=1e-10)
    assert r["se"] == pytest.approx(frame.loc["random effect wls", "sd_eff"], rel=1e-10)
    assert r["ci_low"] == pytest.approx(frame.loc["random effect wls", "ci_low"], rel=1e-10)


def _statsmodels_fit(y, v):
    """statsmodels' DerSimonian-Laird fit: (row of the Hartung-Knapp interval, tau^2, I^2).

    statsmodels leaves tau^2 (and I^2) negative when Q < k - 1; truncated at 0, as in
    DESIGN.md, the random-effects fit is the fixed-effect one, so the row is then the
    "fixed effect wls" row (fixed-effect weights, Hartung-Knapp scale).
    """
    fit = sm_meta.combine_effects(np.asarray(y), np.asarray(v), method_re="dl", use_t=True)
    frame = fit.summary_frame()
    if fit.tau2 > 0:
        return frame.loc["random effect wls"], frame.loc["random effect"], fit, 3
    return frame.loc["fixed effect wls"], frame.loc["fixed effect"], fit, 2


@pytest.mark.filterwarnings("ignore::statsmodels.tools.sm_exceptions.InvalidTestWarning")
@pytest.mark.filterwarnings("ignore:invalid value encountered in sqrt:RuntimeWarning")
@pytest.mark.parametrize(
    "k, seed, spread",
    [(2, 0, 0.3), (3, 1, 0.1), (5, 2, 0.1), (12, 3, 0.1), (30, 4, 0.1), (5, 5, 0.0), (12, 6, 0.0)],
)
def test_random_effects_match_statsmodels_combine_effects(k, seed, spread):
    rng = np.random.default_rng(seed)
    v = rng.uniform(0.0005, 0.005, k)
    # spread 0: within-noise shrunk so Q < k - 1 and the truncation of tau^2 is exercised
    noise = 1.0 if spread > 0 else 0.3
    y = rng.normal(0.02, spread, k) + noise * rng.normal(0, np.sqrt(v))
    r = effects.random_effects(y, v)
    # statsmodels combine_effects(method_re="dl", use_t=True), row "random effect wls"
    # (Hartung-Knapp-Sidik-Jonkman, scale not truncated); "fixed effect wls" when tau^2 <= 0
    row, plain_row, ref, which = _statsmodels_fit(y, v)
    assert (ref.tau2 > 0) == (spread > 0)  # both branches are exercised
    for ours, theirs in (
        (r["estimate"], row["eff"]),
        (r["ci_low"], row["ci_low"]),
        (r["ci_high"], row["ci_upp"]),
        (r["se"], row["sd_eff"]),
        (r["tau2"], max(ref.tau2, 0.0)),
        (r["i2"], max(ref.i2, 0.0)),
        (r["q"], ref.q),
    ):
        assert ours == pytest.approx(theirs, rel=1e-10, abs=1e-12)
    # prediction interval (Higgins, Thompson & Spiegelhalter 2009) from statsmodels' parts:
    # mu +- t_{k-2} sqrt(tau^2 + var(mu)), var(mu) = the plain random-effects variance
    if k >= 3:
        half = sps.t.ppf(0.975, k - 2) * math.sqrt(max(ref.tau2, 0) + plain_row["sd_eff"] ** 2)
        assert r["pi_low"] == pytest.approx(row["eff"] - half, rel=1e-10)
        assert r["pi_high"] == pytest.approx(row["eff"] + half, rel=1e-10)
    else:
        assert np.isnan(r["pi_low"]) and np.isnan(r["pi_high"])


def test_random_effects_many_equals_one_at_a_time():
    rng = np.random.default_rng(9)
    y, v = rng.normal(size=(6, 40)), rng.uniform(0.1, 1, (6, 40))
    many = effects.random_effects_many(y, v)
    for j in (0, 17, 39):
        one = effects.random_effects(y[:, j], v[:, j])
        for key in ("estimate", "ci_low", "ci_high", "tau2", "i2", "pi_low", "p_value"):
            assert many[key][j] == pytest.approx(one[key], rel=1e-12)


def test_zero_variances_take_the_smallest_positive_and_all_zero_is_exact():
    np.testing.assert_array_equal(effects.fill_zero_variances([0, 0.2, 0.1]), [0.1, 0.2, 0.1])
    # all zero and all equal: exact, the interval is the point
    r = effects.random_effects([0.0, 0.0, 0.0], [0.0, 0.0, 0.0])
    assert (r["estimate"], r["ci_low"], r["ci_high"], r["p_value"]) == (0.0, 0.0, 0.0, 1.0)
    # all zero but different: the v -> 0 limit is the plain t over data sets
    y = np.array([0.01, 0.03, 0.02, 0.06])
    r = effects.random_effects(y, np.zeros(4))
    lo, hi = sps.t.interval(0.95, 3, y.mean(), y.std(ddof=1) / 2)
    assert (r["ci_low"], r["ci_high"]) == (pytest.approx(lo), pytest.approx(hi))
    # ... which the limit of small equal variances approaches
    near = effects.random_effects(y, np.full(4, 1e-12))
    assert near["ci_low"] == pytest.approx(lo, rel=1e-6)
    with pytest.raises(InvalidParameterError, match="'v' parameter"):
        effects.random_effects(y, [0.0, 0.1, 0.1, 0.1])


# ---- simulation: coverage and the equivalence verdict ----------------------------------


def _simulate(k: int, mu: float, tau: float, reps: int, seed: int):
    """Per-data-set means and Nadeau-Bengio-free variances (iid folds) of a known truth."""
    rng = np.random.default_rng(seed)
    j = 10
    sigma = rng.uniform(0.01, 0.04, (k, reps))
    theta = mu + tau * rng.standard_normal((k, reps))
    y = theta + sigma / np.sqrt(j) * rng.standard_normal((k, reps))
    s2 = sigma**2 * rng.chisquare(j - 1, (k, reps)) / (j - 1)
    return y, s2 / j


@pytest.mark.parametrize("k", [5, 10, 20])
def test_hartung_knapp_coverage_and_equivalence_by_simulation(k):
    # By simulation (fixed seeds, 2000 replications): k data sets whose true effects
    # spread around mu with tau = 0.01 (between-data-set spread), each measured on 10
    # folds with its own noise (sd 0.01-0.04) and an estimated variance.
    # Band for coverage: 0.92-0.97. The binomial SE is 0.005; the Hartung-Knapp t
    # interval is exact only with known variances, and with variances estimated from
    # 10 folds runs up to ~2 points below nominal (we measured 0.928, 0.9455, 0.9455 for
    # k = 5, 10, 20). A too-wide interval fails the upper side: 1.5 times the width
    # covers more than 0.97 (we measured 0.9755, 0.9865, 0.9905); the plain
    # DerSimonian-Laird z interval falls below the band at k = 5 (we measured 0.868).
    reps = 2000
    y, v = _simulate(k, 0.0, 0.01, reps, seed=k)
    r = effects.random_effects_many(y, v)
    coverage = np.mean((r["ci_low"] <= 0.0) & (0.0 <= r["ci_high"]))
    assert 0.92 <= coverage <= 0.97
    too_wide = np.mean(np.abs(r["estimate"]) <= 1.5 * (r["ci_high"] - r["estimate"]))
    assert too_wide > 0.97
    if k == 5:
        z = 1.959964 * r["se_plain"]
        z_coverage = np.mean(np.abs(r["estimate"]) <= z)
        assert z_coverage < 0.92
    # the true mean sits on the margin: the 90% interval (TOST at 5%) must not fall inside
    # +-margin more than about 5% of the time (we measured 0.0415, 0.057, 0.0495)
    margin = 0.01
    y, v = _simulate(k, margin, 0.01, reps, seed=100 + k)
    r90 = effects.random_effects_many(y, v, alpha=0.10)
    wrongly_equivalent = np.mean((-margin < r90["ci_low"]) & (r90["ci_high"] < margin))
    assert wrongly_equivalent <= 0.07


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
    row, _, ref_fit, which = _statsmodels_fit(ys, vs)
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
