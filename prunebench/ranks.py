"""Ranking configurations across data sets, and the default the ranking recommends.

Per task family, every configuration's pruned tree is ranked on every data set
(1 = lowest loss); each distinct unpruned tree (one per level combination of the
factors that change the grown tree) takes part as a configuration of its own with
rule ``"unpruned"``, so "do not prune" can win.  Across data sets (Demšar 2006):
mean ranks, the Friedman test with the Iman-Davenport F and the Nemenyi critical
difference; against its unpruned tree, each pruned configuration gets Wilcoxon's
signed-rank p and a Bayesian signed-rank test with a region of practical
equivalence (Benavoli et al. 2017) of the metric's margin
(:func:`prunebench.vocabulary.default_margin`, or the study's ``[decision]``
margin).  For metrics whose margin is relative (MSE, MAE) both tests use each data
set's difference divided by its unpruned loss, so data sets with large targets do
not dominate; no difference is ever divided by an R^2.

The ranking is an overview: its mean-rank tests depend on which other
configurations are in the pool (Benavoli, Corani & Mangili 2016), so the
recommended default comes from :mod:`prunebench.recommend`.

Frames in, frames out: the folds come from :func:`prunebench.results.load_folds`.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from scipy import stats as sps

from .stats import (
    _with_default_levels,
    bayesian_signed_rank,
    corrected_ttest,
    critical_difference,
    friedman_test,
    metric_rows,
)
from .vocabulary import (
    Configuration,
    default_margin,
    factor_names,
    family_of,
    growth_factors,
    higher_is_better,
    integer_factors,
    is_relative,
    spelled_level,
)

__all__ = ["ranking", "ranking_frame", "recommendation", "separates"]


def _config_scores(folds: pd.DataFrame, metric: str) -> tuple[pd.DataFrame, pd.DataFrame]:
    """(datasets x configurations) mean metric and mean leaves, unpruned baselines included.

    The columns are :class:`Configuration` objects, in the order of their level tuples.
    """
    # folds from before select_by and class_weight (no column) are at their default levels
    folds = _with_default_levels(folds)
    pruned = folds[folds["arm"] == "pruned"]
    unpruned = folds[folds["arm"] == "unpruned"].copy()
    # one unpruned tree per level combination of the growth factors: the other factors
    # do not change it
    for name in factor_names():
        if name not in growth_factors():
            unpruned[name] = None
    unpruned["rule"] = "unpruned"
    unpruned = unpruned.drop_duplicates(["dataset", *growth_factors(), "repeat", "fold"])
    both = pd.concat([pruned, unpruned], ignore_index=True)
    columns = [both[c].astype(object).where(both[c].notna(), None) for c in factor_names()]
    # plain tuples as pivot keys keep the column order sortable with None levels
    both["config"] = list(zip(*columns, strict=True))
    tables = []
    for values in (metric, "n_leaves"):
        table = both.pivot_table(index="dataset", columns="config", values=values, aggfunc="mean")
        table.columns = pd.Index([Configuration.of(tuple(c)) for c in table.columns], dtype=object)
        tables.append(table)
    return tables[0], tables[1]


def ranking(
    folds: pd.DataFrame,
    metric: str | dict | None = None,
    alpha: float = 0.05,
    margin: float | dict | None = None,
) -> list[dict]:
    """Configurations ranked across data sets, one result per task family.

    Parameters
    ----------
    folds : DataFrame
        From :func:`prunebench.results.load_folds`.
    metric : str or dict, optional
        Default: the family's default metric (``error`` / ``mse``); family -> metric
        gives each family its own.
    alpha : float, default=0.05
    margin : float or dict, optional
        Region of practical equivalence of the Bayesian signed-rank test (family ->
        margin, or one for all); default the metric's margin in the vocabulary.

    Returns
    -------
    list of dict
        Per task family (classification, regression): ``family``, ``metric``,
        ``datasets``, ``table`` (DataFrame: the factor columns, ``config`` (a
        :class:`~prunebench.vocabulary.Configuration`), label, mean_rank, wins/ties/losses
        against the best by mean, mean metric, mean leaves, ``not_worse`` than the best by
        the critical difference, and for pruned configurations Wilcoxon's p and the
        Bayesian signed-rank probabilities against their unpruned tree), the
        ``friedman`` and ``cd`` results, ``alpha``, ``rope`` (the margin used),
        ``separated`` (:func:`separates`), ``best``, and the ``means`` and ``leaves``
        tables (datasets x configurations).
    """
    from .effects import for_family

    if isinstance(metric, dict):
        folds = folds[folds["task"].map(family_of).isin(metric)]
        parts = [
            metric_rows(folds[folds["task"].map(family_of) == f], m)
            for f, m in metric.items()
            # a family of the study with no finished trial yet has nothing to rank
            if (folds["task"].map(family_of) == f).any()
        ]
        folds = pd.concat([p[0] for p in parts])
        tasks = {t: m for p in parts for t, m in p[1].items()}
    else:
        folds, tasks = metric_rows(folds, metric)
    families = {task: family_of(task) for task in tasks}
    results = []
    for family in sorted(set(families.values())):
        mine = folds[folds["task"].map(families) == family]
        chosen = {tasks[t] for t in tasks if families[t] == family}.pop()
        rope = for_family(margin, family)
        rope = default_margin(chosen) if rope is None else float(rope)
        results.append(_rank_family(mine, family, chosen, alpha, rope))
    return results


def separates(friedman: dict | None, alpha: float) -> bool:
    """Whether Friedman's test separates the configurations at ``alpha`` (p < alpha).

    False without a test (one data set or one configuration) and when every data set
    ties every configuration (NaN statistic).
    """
    return bool(friedman and np.isfinite(friedman["p_chi2"]) and friedman["p_chi2"] < alpha)


def _rank_family(folds: pd.DataFrame, family: str, metric: str, alpha: float, rope: float) -> dict:
    """The ranking of one task family's folds on one metric (see :func:`ranking`)."""
    means, leaves = _config_scores(folds, metric)
    complete = means.dropna(axis=1)
    if complete.shape[1] < means.shape[1]:
        means, leaves = complete, leaves[complete.columns]
    sign = -1.0 if higher_is_better(metric) else 1.0
    losses = sign * means.to_numpy()
    n, k = losses.shape
    # tests across data sets need two or more of them
    fried = friedman_test(losses) if k >= 2 and n >= 2 else None
    mean_ranks = (
        fried["mean_ranks"] if fried else np.apply_along_axis(sps.rankdata, 1, losses).mean(axis=0)
    )
    cd = critical_difference(k, n, alpha) if n >= 2 else np.nan
    best = int(np.lexsort((leaves.mean(axis=0).to_numpy(), mean_ranks))[0])
    rows = []
    for j, config in enumerate(means.columns):
        wins = int(np.sum(losses[:, j] < losses[:, best]))
        ties = int(np.sum(losses[:, j] == losses[:, best]))
        rows.append(
            {
                **config.levels(),
                "config": config,
                "label": config.label(),
                "mean_rank": float(mean_ranks[j]),
                "wins": wins,
                "ties": ties,
                "losses": int(n - wins - ties),
                "mean_metric": float(means.iloc[:, j].mean()),
                "mean_leaves": float(leaves.iloc[:, j].mean()),
                "not_worse": bool(np.isnan(cd) or mean_ranks[j] - mean_ranks[best] <= cd),
                **_against_unpruned(config, means, sign, metric, rope),
            }
        )
    table = pd.DataFrame(rows).sort_values(["mean_rank", "mean_leaves"]).reset_index(drop=True)
    # integer levels stay integers beside the unpruned trees' missing inner folds and an
    # unlimited depth (nullable, as ``Results.table`` reads them); no weighting is "none"
    for name in integer_factors():
        table[name] = pd.array([spelled_level(name, v) for v in table[name]], dtype="Int64")
    table["class_weight"] = [spelled_level("class_weight", v) for v in table["class_weight"]]
    return {
        "family": family,
        "metric": metric,
        "datasets": list(means.index),
        "table": table,
        "friedman": fried,
        "cd": cd,
        "alpha": alpha,
        "rope": rope,
        "separated": separates(fried, alpha),
        "best": means.columns[best],
        "means": means,
        "leaves": leaves,
    }


def _against_unpruned(
    config: Configuration, means: pd.DataFrame, sign: float, metric: str, rope: float
) -> dict:
    """Wilcoxon's p and the Bayesian signed-rank probabilities of pruning, across data sets.

    For a relative metric (MSE, MAE) the gain on each data set is divided by that data
    set's unpruned loss (a positive loss), for both tests; other metrics' gains are raw
    differences, so nothing is divided by an R^2 near zero.
    """
    baseline = config.unpruned()
    if not config.pruned or baseline not in means.columns or len(means) < 2:
        return {}
    gains = sign * (means[baseline] - means[config]).to_numpy()
    if is_relative(metric):
        # losses of regression sets differ in scale: compare relative gains
        gains = gains / means[baseline].to_numpy()
    wilcoxon_p = _wilcoxon(gains)
    bayes = bayesian_signed_rank(gains, rope=rope)
    return {
        "wilcoxon_p": wilcoxon_p,
        "p_pruned_better": bayes["p_first_better"],
        "p_equivalent": bayes["p_equivalent"],
        "p_unpruned_better": bayes["p_second_better"],
    }


def ranking_frame(results: list[dict]) -> pd.DataFrame:
    """:func:`ranking`'s results as one flat table, the test results on every row.

    Parameters
    ----------
    results : list of dict
        From :func:`ranking`.

    Returns
    -------
    DataFrame
        Each family's table without the ``config`` objects, with ``family``, ``metric``,
        ``n_datasets``, the Friedman and Iman-Davenport statistics and p-values, and the
        ``critical_difference``.
    """
    frames = []
    for res in results:
        fried = res["friedman"] or {}
        frames.append(
            res["table"]
            .drop(columns=["config"])
            .assign(
                family=res["family"],
                metric=res["metric"],
                n_datasets=len(res["datasets"]),
                friedman_chi2=fried.get("chi2"),
                friedman_p=fried.get("p_chi2"),
                iman_davenport_f=fried.get("ff"),
                iman_davenport_p=fried.get("p_ff"),
                critical_difference=res["cd"],
            )
        )
    return pd.concat(frames, ignore_index=True)


def _wilcoxon(gains: np.ndarray) -> float:
    if gains.size < 2 or np.all(gains == 0):
        return np.nan
    return float(sps.wilcoxon(gains, zero_method="zsplit").pvalue)


# ---- the recommended default -----------------------------------------------------------


def recommendation(folds: pd.DataFrame, alpha: float = 0.05) -> list[dict]:
    """The evidence-based default configuration, per task family.

    Among the configurations not significantly worse than the best by the Nemenyi
    critical difference, the best mean rank wins and ties go to smaller trees.
    Its regret on each data set is its mean loss minus the best configuration's on
    that data set, with a corrected CI from the paired per-fold differences.

    Parameters
    ----------
    folds : DataFrame
        From :func:`prunebench.results.load_folds`.
    alpha : float, default=0.05

    Returns
    -------
    list of dict
        ``family``, ``metric``, ``config`` (dict of levels), ``label``, ``mean_rank``,
        ``mean_leaves``, ``ranking`` (the :func:`ranking` result), ``regret``
        (DataFrame per data set), ``mean_regret`` and ``worst_regret``.
    """
    out = []
    for ranked in ranking(folds, None, alpha):
        table = ranked["table"]
        eligible = table[table["not_worse"]].sort_values(["mean_rank", "mean_leaves"])
        chosen = eligible.iloc[0]
        regret = _regrets(folds, ranked, chosen["config"], alpha)
        out.append(
            {
                "family": ranked["family"],
                "metric": ranked["metric"],
                # the table row's values, as before (its integer columns may hold floats)
                "config": {c: None if pd.isna(chosen[c]) else chosen[c] for c in factor_names()},
                "label": chosen["label"],
                "mean_rank": float(chosen["mean_rank"]),
                "mean_leaves": float(chosen["mean_leaves"]),
                "ranking": ranked,
                "regret": regret,
                "mean_regret": float(regret["regret"].mean()),
                "worst_regret": float(regret["regret"].max()),
            }
        )
    return out


def _regrets(
    folds: pd.DataFrame, ranked: dict, config: Configuration, alpha: float
) -> pd.DataFrame:
    """Per data set: the configuration's loss minus the best one's there, with a corrected CI.

    The best is not picked on the folds it is scored on: the outer folds, sorted by
    (repeat, fold), are split into even and odd positions; the best on the even ones is
    scored on the odd ones and the other way round, and the corrected t runs over the
    resulting per-fold differences.
    """
    m = ranked["metric"]
    sign = -1.0 if higher_is_better(m) else 1.0
    table = _fold_losses(folds, m, list(ranked["means"].columns))
    regrets = []
    for dataset in ranked["datasets"]:
        own = table.loc[dataset].sort_index()
        losses = sign * own[list(ranked["means"].columns)]
        even = np.arange(len(losses)) % 2 == 0
        best_even = losses[even].mean().idxmin()
        best_odd = losses[~even].mean().idxmin() if (~even).any() else best_even
        d = np.where(even, losses[config] - losses[best_odd], losses[config] - losses[best_even])
        t = corrected_ttest(d, own["n_train"], own["n_test"], alpha)
        best = {best_even.label(), best_odd.label()}
        regrets.append(
            {
                "dataset": dataset,
                "regret": t.mean,
                "ci_low": t.ci_low,
                "ci_high": t.ci_high,
                "best": " / ".join(sorted(best)),
                "loses": bool(t.ci_low > 0),
            }
        )
    return pd.DataFrame(regrets)


def _fold_losses(folds: pd.DataFrame, metric: str, configs: list) -> pd.DataFrame:
    """(dataset, repeat, fold) x configurations of the metric, plus ``n_train``/``n_test``."""
    columns = {}
    info = None
    for config in configs:
        rows = _config_rows(folds, config).set_index(["dataset", "repeat", "fold"]).sort_index()
        columns[config] = rows[metric]
        if info is None:
            info = rows[["n_train", "n_test"]]
    frame = pd.DataFrame(columns)
    frame.columns = pd.Index(configs, dtype=object)
    return frame.join(info)


def _config_rows(folds: pd.DataFrame, config: Configuration) -> pd.DataFrame:
    """One configuration's folds on every data set (an unpruned tree once per fold)."""
    levels = config.levels()
    arm = "pruned" if config.pruned else "unpruned"
    names = factor_names() if config.pruned else growth_factors()
    folds = _with_default_levels(folds)
    rows = folds[folds["arm"] == arm]
    for name in names:
        value = levels[name]
        rows = rows[rows[name].isna()] if value is None else rows[rows[name] == value]
    if not config.pruned:
        rows = rows.drop_duplicates(["dataset", "repeat", "fold"])
    return rows
