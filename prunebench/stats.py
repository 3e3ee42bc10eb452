"""Statistics over stored results: corrected CIs, paired differences, ranks, a default.

Per data set and configuration the outer folds of repeated CV are not
independent (their training sets overlap), so the usual t interval is too
narrow.  The corrected resampled t of Nadeau & Bengio (2003) inflates the
variance of the mean of the J = repeats x folds per-fold values:
``var = (1/J + n_test/n_train) * s^2`` with ``df = J - 1``, using the actual
``n_test/n_train`` of the folds.  Across data sets (Demšar 2006): mean ranks,
the Friedman test with the Iman-Davenport F, the Nemenyi critical difference,
Wilcoxon's signed-rank test, and a Bayesian signed-rank test with a region of
practical equivalence (Benavoli et al. 2017).

A *configuration* is the tuple of factor levels (criterion, max_depth,
min_samples_leaf, inner_folds, rule, prune_risk) and means its pruned tree.
Rankings also hold each distinct unpruned tree (criterion, max_depth,
min_samples_leaf) as a configuration of its own with rule ``"unpruned"``, so
"do not prune" can win.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd
from scipy import stats as sps

from .exceptions import StatsError
from .store import ResultStore

__all__ = [
    "COMPARISON_COLUMNS",
    "CONFIG",
    "HIGHER_IS_BETTER",
    "ROPE",
    "StatsError",
    "TTest",
    "arm_means",
    "bayesian_signed_rank",
    "compare_configurations",
    "comparison",
    "config_label",
    "corrected_ttest",
    "critical_difference",
    "default_metric",
    "friedman_from_ranks",
    "friedman_test",
    "holm",
    "load_folds",
    "nemenyi_q",
    "ranking",
    "recommendation",
]

#: the factor columns that make a configuration
CONFIG = ["criterion", "max_depth", "min_samples_leaf", "inner_folds", "rule", "prune_risk"]
#: metrics where larger is better; every other metric is a loss
HIGHER_IS_BETTER = {"accuracy", "balanced_accuracy", "r2"}
#: region of practical equivalence of the Bayesian signed-rank test: 0.01 of error
#: (one percentage point) for classification, 1% of the unpruned loss for regression
ROPE = 0.01
_METRICS = {
    "classification": ["error", "accuracy", "balanced_accuracy", "log_loss", "brier"],
    "regression": ["mse", "mae", "r2"],
}


#: the columns of :func:`comparison`'s table, in the order the commands print them
COMPARISON_COLUMNS = [
    "dataset",
    "task",
    *CONFIG,
    "metric",
    "mean_pruned",
    "mean_unpruned",
    "diff",
    "ci_low",
    "ci_high",
    "p_value",
    "p_holm",
    "naive_ci_low",
    "naive_ci_high",
    "naive_p_value",
    "verdict",
    "pruned_ci_low",
    "pruned_ci_high",
    "unpruned_ci_low",
    "unpruned_ci_high",
    "leaves_pruned",
    "leaves_unpruned",
    "leaves_saved",
    "leaves_saved_ci_low",
    "leaves_saved_ci_high",
    "n_folds",
]



def default_metric(task: str) -> str:
    """``error`` for classification tasks, ``mse`` for regression."""
    return "mse" if task == "regression" else "error"


# ---- one data set ----------------------------------------------------------------------


@dataclass(frozen=True)
class TTest:
    """A corrected resampled t result, with the naive one beside it.

    Attributes
    ----------
    mean : float
        Mean of the per-fold values.
    se, ci_low, ci_high, p_value : float
        Corrected standard error, 95% (or ``1 - alpha``) interval and two-sided p.
    naive_se, naive_ci_low, naive_ci_high, naive_p_value : float
        The same with the plain variance s^2/J, which treats folds as independent.
    df : int
        J - 1.
    n_folds : int
        J.
    """

    mean: float
    se: float
    ci_low: float
    ci_high: float
    p_value: float
    naive_se: float
    naive_ci_low: float
    naive_ci_high: float
    naive_p_value: float
    df: int
    n_folds: int


def _t_interval(mean, se, df, alpha: float):
    """Vectorised two-sided t interval and p-value; NaN where df < 1 or se is unknown."""
    mean, se, df = (np.asarray(v, dtype=float) for v in (mean, se, df))
    with np.errstate(divide="ignore", invalid="ignore"):
        q = sps.t.ppf(1 - alpha / 2, np.where(df >= 1, df, np.nan))
        p = 2 * sps.t.sf(np.abs(mean) / se, np.where(df >= 1, df, np.nan))
    lo, hi = mean - q * se, mean + q * se
    exact = se == 0  # every fold agrees: the interval is the point
    p = np.where(exact, np.where(mean == 0, 1.0, 0.0), p)
    lo, hi = np.where(exact, mean, lo), np.where(exact, mean, hi)
    bad = (df < 1) | ~np.isfinite(se)
    return np.where(bad, np.nan, lo), np.where(bad, np.nan, hi), np.where(bad, np.nan, p)


def _corrected(mean, s2, j, ratio, alpha: float) -> dict:
    """Corrected and naive standard errors, intervals and p-values, as arrays."""
    mean, s2, j, ratio = (np.asarray(v, dtype=float) for v in (mean, s2, j, ratio))
    se = np.sqrt((1 / j + ratio) * s2)
    naive_se = np.sqrt(s2 / j)
    lo, hi, p = _t_interval(mean, se, j - 1, alpha)
    nlo, nhi, np_ = _t_interval(mean, naive_se, j - 1, alpha)
    return {
        "se": se,
        "ci_low": lo,
        "ci_high": hi,
        "p_value": p,
        "naive_se": naive_se,
        "naive_ci_low": nlo,
        "naive_ci_high": nhi,
        "naive_p_value": np_,
    }


def corrected_ttest(values, n_train, n_test, alpha: float = 0.05) -> TTest:
    """Nadeau & Bengio's corrected resampled t for the mean of per-fold values.

    Parameters
    ----------
    values : array-like of shape (J,)
        One value per outer fold (a metric, or a paired difference).
    n_train, n_test : array-like of shape (J,) or int
        Training and test rows of each fold; the correction uses the mean of
        ``n_test / n_train``.
    alpha : float, default=0.05

    Returns
    -------
    TTest
    """
    d = np.asarray(values, dtype=float)
    j = d.size
    ratio = float(np.mean(np.asarray(n_test, float) / np.asarray(n_train, float)))
    mean = float(d.mean())
    s2 = float(d.var(ddof=1)) if j > 1 else np.nan
    r = {k: float(v) for k, v in _corrected(mean, s2, j, ratio, alpha).items()}
    return TTest(
        mean,
        r["se"],
        r["ci_low"],
        r["ci_high"],
        r["p_value"],
        r["naive_se"],
        r["naive_ci_low"],
        r["naive_ci_high"],
        r["naive_p_value"],
        j - 1,
        j,
    )


def holm(p_values) -> np.ndarray:
    """Holm's step-down adjustment of p-values (NaN stays NaN)."""
    p = np.asarray(p_values, dtype=float)
    out = np.full(p.size, np.nan)
    ok = np.flatnonzero(~np.isnan(p))
    if ok.size == 0:
        return out
    order = ok[np.argsort(p[ok], kind="stable")]
    m = order.size
    adjusted = np.maximum.accumulate((m - np.arange(m)) * p[order])
    out[order] = np.minimum(adjusted, 1.0)
    return out


# ---- across data sets ------------------------------------------------------------------


def friedman_test(scores: np.ndarray) -> dict:
    """Friedman's test over an (N data sets x k configurations) matrix of losses.

    Ranks within each data set (1 = lowest loss, ties averaged), then
    ``chi2_F = 12N / (k(k+1)) * (sum R_j^2 - k(k+1)^2/4)`` and Iman & Davenport's
    ``F_F = (N-1) chi2_F / (N(k-1) - chi2_F)`` with (k-1, (k-1)(N-1)) degrees of
    freedom (Demšar 2006, §3.2.2).

    Parameters
    ----------
    scores : ndarray of shape (N, k)
        Lower is better.

    Returns
    -------
    dict
        ``mean_ranks``, ``chi2``, ``p_chi2``, ``ff``, ``p_ff``, ``df1``, ``df2``, ``n``, ``k``.
    """
    scores = np.asarray(scores, dtype=float)
    ranks = np.apply_along_axis(sps.rankdata, 1, scores)
    return friedman_from_ranks(ranks.mean(axis=0), scores.shape[0])


def friedman_from_ranks(mean_ranks, n: int) -> dict:
    """Friedman and Iman-Davenport statistics from mean ranks over ``n`` data sets.

    Parameters
    ----------
    mean_ranks : array-like of shape (k,)
    n : int

    Returns
    -------
    dict
        As :func:`friedman_test`.
    """
    mean_ranks = np.asarray(mean_ranks, dtype=float)
    k = mean_ranks.size
    chi2 = 12 * n / (k * (k + 1)) * (np.sum(mean_ranks**2) - k * (k + 1) ** 2 / 4)
    df1, df2 = k - 1, (k - 1) * (n - 1)
    denominator = n * (k - 1) - chi2
    ff = (n - 1) * chi2 / denominator if denominator > 0 else np.inf
    return {
        "mean_ranks": mean_ranks,
        "chi2": float(chi2),
        "p_chi2": float(sps.chi2.sf(chi2, df1)) if k > 1 else np.nan,
        "ff": float(ff),
        "p_ff": float(sps.f.sf(ff, df1, df2)) if k > 1 and n > 1 else np.nan,
        "df1": df1,
        "df2": df2,
        "n": n,
        "k": k,
    }


def nemenyi_q(k: int, alpha: float = 0.05) -> float:
    """Critical value q_alpha of the Nemenyi test: studentized range / sqrt(2)."""
    return float(sps.studentized_range.ppf(1 - alpha, k, np.inf) / np.sqrt(2))


def critical_difference(k: int, n: int, alpha: float = 0.05) -> float:
    """Nemenyi's critical difference of mean ranks, ``q_alpha sqrt(k(k+1)/(6N))``."""
    if k < 2:
        return np.nan
    return nemenyi_q(k, alpha) * np.sqrt(k * (k + 1) / (6 * n))


def bayesian_signed_rank(
    gains, rope: float, prior: float = 0.5, nsamples: int = 20000, seed: int = 0
) -> dict:
    """Bayesian signed-rank test with a region of practical equivalence.

    Benavoli et al. (2017): a Dirichlet process posterior over the distribution
    of per-data-set gains, with a pseudo-observation at 0 of weight ``prior``;
    for each posterior sample, the chance that the sum of two gains falls below
    ``-2 rope``, inside, or above ``2 rope``. The reported probabilities are the
    shares of posterior samples in which each of the three is the largest.

    Parameters
    ----------
    gains : array-like of shape (N,)
        Per-data-set improvement of the first option over the second (positive =
        the first is better).
    rope : float
        Half-width of the region of practical equivalence, in the gains' units.
    prior, nsamples, seed
        Prior strength, posterior samples, random seed.

    Returns
    -------
    dict
        ``p_first_better``, ``p_equivalent``, ``p_second_better``.
    """
    z = np.concatenate([[0.0], np.asarray(gains, dtype=float)])
    sums = z[:, None] + z[None, :]
    above = (sums > 2 * rope) + 0.5 * (sums == 2 * rope)
    below = (sums < -2 * rope) + 0.5 * (sums == -2 * rope)
    weights = np.ones(z.size)
    weights[0] = prior
    w = np.random.default_rng(seed).dirichlet(weights, nsamples)
    p_above = ((w @ above) * w).sum(axis=1)
    p_below = ((w @ below) * w).sum(axis=1)
    p_inside = 1 - p_above - p_below
    winner = np.argmax(np.vstack([p_above, p_inside, p_below]), axis=0)
    share = np.bincount(winner, minlength=3) / nsamples
    return {
        "p_first_better": float(share[0]),
        "p_equivalent": float(share[1]),
        "p_second_better": float(share[2]),
    }


# ---- reading the store -----------------------------------------------------------------


def load_folds(store: ResultStore, study: str | None = None) -> pd.DataFrame:
    """Every fold row of finished trials, with dataset, task and factor columns.

    Parameters
    ----------
    store : ResultStore
    study : str, optional
        Study name; required when the database holds more than one.

    Returns
    -------
    DataFrame
        One row per trial, outer fold and arm.
    """
    studies = store.query("SELECT study_id, name FROM studies ORDER BY created")
    if not studies:
        raise StatsError(f"{store.path} holds no study yet")
    if study is None:
        if len(studies) > 1:
            names = ", ".join(s["name"] for s in studies)
            raise StatsError(f"{store.path} holds several studies ({names}); pick one with --study")
        study_id = studies[0]["study_id"]
    else:
        match = [s for s in studies if s["name"] == study]
        if not match:
            raise StatsError(f"{store.path} has no study named {study!r}")
        study_id = match[0]["study_id"]
    rows = store.query(
        "SELECT d.name AS dataset, d.task, t.trial_id, t.criterion, t.max_depth, "
        't.min_samples_leaf, t.inner_folds, t.rule, t.prune_risk, f."repeat", f.fold, f.arm, '
        "f.n_train, f.n_test, f.error, f.accuracy, f.balanced_accuracy, f.log_loss, f.brier, "
        "f.mse, f.mae, f.r2, f.n_leaves, f.depth, f.alpha "
        "FROM folds f JOIN trials t USING (trial_id) JOIN datasets d USING (dataset_id) "
        "WHERE t.study_id = ? AND t.status = 'done'",
        [study_id],
    )
    if not rows:
        raise StatsError(f"{store.path}: the study has no finished trials yet")
    frame = pd.DataFrame(rows)
    frame["max_depth"] = frame["max_depth"].astype("Int64")
    return frame


def _metric_rows(folds: pd.DataFrame, metric: str | None) -> tuple[pd.DataFrame, dict]:
    """Folds restricted to tasks that have the metric; task -> metric used."""
    tasks = {}
    for task in folds["task"].unique():
        family = "regression" if task == "regression" else "classification"
        chosen = metric or default_metric(task)
        if chosen not in _METRICS[family]:
            continue
        tasks[task] = chosen
    if not tasks:
        raise StatsError(f"no dataset of this study has the metric {metric!r}")
    return folds[folds["task"].isin(tasks)], tasks


def _config_key(row) -> tuple:
    return tuple(None if pd.isna(row[c]) else row[c] for c in CONFIG)


_SHORT = {
    "entropy": "entr",
    "log_loss": "logl",
    "squared_error": "sq",
    "absolute_error": "abs",
    "poisson": "pois",
    "error": "err",
    "impurity": "imp",
    "gini": "gini",
}


def config_label(config) -> str:
    """A short label of a configuration, e.g. ``"entr d=none l=5 k=10 1se err"``.

    Parameters
    ----------
    config : tuple or mapping
        The levels in :data:`CONFIG` order, or a mapping with those keys.

    Returns
    -------
    str
    """
    if not isinstance(config, tuple):
        config = _config_key(config)
    crit, depth, leaf, inner, rule, risk = config
    depth = "none" if depth is None else int(depth)
    head = f"{_SHORT.get(crit, crit)} d={depth} l={int(leaf)}"
    if rule == "unpruned":
        return f"{head} unpruned"
    return f"{head} k={int(inner)} {rule} {_SHORT.get(risk, risk)}"


# ---- the comparison table --------------------------------------------------------------


def comparison(folds: pd.DataFrame, metric: str | None = None, alpha: float = 0.05) -> pd.DataFrame:
    """Pruned against unpruned, per data set and configuration.

    Parameters
    ----------
    folds : DataFrame
        From :func:`load_folds`.
    metric : str, optional
        Default ``error`` for classification, ``mse`` for regression.
    alpha : float, default=0.05

    Returns
    -------
    DataFrame
        One row per data set and configuration: the factor columns, ``metric``,
        ``mean_pruned``, ``mean_unpruned``, the paired ``diff`` (pruned - unpruned)
        with its corrected ``ci_low``/``ci_high`` and ``p_value``, the naive interval
        and p-value, ``p_holm`` (Holm-adjusted over all rows), ``verdict``, the
        arms' corrected CIs, ``leaves_pruned``, ``leaves_unpruned``, ``leaves_saved``
        with its corrected CI, and ``n_folds``.
    """
    folds, tasks = _metric_rows(folds, metric)
    folds = folds.assign(metric=folds["task"].map(tasks))
    folds["value"] = np.nan
    for task, m in tasks.items():
        rows = folds["task"] == task
        folds.loc[rows, "value"] = folds.loc[rows, m]
    pruned = folds[folds["arm"] == "pruned"]
    unpruned = folds[folds["arm"] == "unpruned"][
        ["trial_id", "repeat", "fold", "value", "n_leaves"]
    ]
    both = pruned.merge(unpruned, on=["trial_id", "repeat", "fold"], suffixes=("", "_u"))
    both["d"] = both["value"] - both["value_u"]
    both["saved"] = both["n_leaves_u"] - both["n_leaves"]
    both["ratio"] = both["n_test"] / both["n_train"]
    g = both.groupby("trial_id", sort=False)
    agg = g.agg(
        mean_pruned=("value", "mean"),
        var_pruned=("value", "var"),
        mean_unpruned=("value_u", "mean"),
        var_unpruned=("value_u", "var"),
        diff=("d", "mean"),
        var_diff=("d", "var"),
        n_folds=("d", "size"),
        ratio=("ratio", "mean"),
        leaves_pruned=("n_leaves", "mean"),
        leaves_unpruned=("n_leaves_u", "mean"),
        leaves_saved=("saved", "mean"),
        var_saved=("saved", "var"),
    )
    meta = pruned.drop_duplicates("trial_id").set_index("trial_id")[
        ["dataset", "task", *CONFIG, "metric"]
    ]
    table = meta.join(agg)
    n, ratio = table["n_folds"], table["ratio"]
    diff = _corrected(table["diff"], table["var_diff"], n, ratio, alpha)
    for k in ("ci_low", "ci_high", "p_value", "naive_ci_low", "naive_ci_high", "naive_p_value"):
        table[k] = diff[k]
    for arm in ("pruned", "unpruned"):
        r = _corrected(table[f"mean_{arm}"], table[f"var_{arm}"], n, ratio, alpha)
        table[f"{arm}_ci_low"], table[f"{arm}_ci_high"] = r["ci_low"], r["ci_high"]
    saved = _corrected(table["leaves_saved"], table["var_saved"], n, ratio, alpha)
    table["leaves_saved_ci_low"], table["leaves_saved_ci_high"] = saved["ci_low"], saved["ci_high"]
    lower_better = ~table["metric"].isin(HIGHER_IS_BETTER)
    below, above = table["ci_high"] < 0, table["ci_low"] > 0
    table["verdict"] = np.select(
        [below & lower_better, above & ~lower_better, above & lower_better, below & ~lower_better],
        ["pruned better", "pruned better", "unpruned better", "unpruned better"],
        "no evidence either way",
    )
    table = table.sort_values(["dataset", *CONFIG], na_position="last").reset_index(drop=True)
    table["max_depth"] = table["max_depth"].astype("Int64")
    table["p_holm"] = holm(table["p_value"])
    return table[COMPARISON_COLUMNS]


def compare_configurations(
    folds: pd.DataFrame,
    dataset: str,
    first: dict,
    second: dict,
    metric: str | None = None,
    alpha: float = 0.05,
) -> TTest:
    """Corrected t for the per-fold difference first - second of two pruned configurations.

    Both configurations ran on the same outer folds of the data set, so the
    difference is paired fold by fold.

    Parameters
    ----------
    folds : DataFrame
        From :func:`load_folds`.
    dataset : str
    first, second : dict
        Factor levels (any subset of :data:`CONFIG` that names one trial each).
    metric : str, optional
    alpha : float, default=0.05

    Returns
    -------
    TTest
    """
    rows = folds[(folds["dataset"] == dataset) & (folds["arm"] == "pruned")]
    if rows.empty:
        raise StatsError(f"no finished trial on dataset {dataset!r}")
    m = metric or default_metric(rows["task"].iloc[0])

    def pick(levels: dict) -> pd.DataFrame:
        mask = np.ones(len(rows), bool)
        for k, v in levels.items():
            mask &= (rows[k].isna() if v is None else rows[k] == v).to_numpy()
        chosen = rows[mask]
        if chosen["trial_id"].nunique() != 1:
            raise StatsError(
                f"{levels} names {chosen['trial_id'].nunique()} trials on {dataset!r}; give "
                "enough levels to name one"
            )
        return chosen.set_index(["repeat", "fold"]).sort_index()

    a, b = pick(first), pick(second)
    return corrected_ttest(a[m] - b[m], a["n_train"], a["n_test"], alpha)


# ---- ranking across data sets ----------------------------------------------------------


def _config_scores(folds: pd.DataFrame, metric: str) -> tuple[pd.DataFrame, pd.DataFrame]:
    """(datasets x configurations) mean metric and mean leaves, unpruned baselines included."""
    pruned = folds[folds["arm"] == "pruned"]
    unpruned = folds[folds["arm"] == "unpruned"].copy()
    # one unpruned tree per (criterion, depth, leaf size): identical across the other factors
    unpruned["inner_folds"] = None
    unpruned["rule"] = "unpruned"
    unpruned["prune_risk"] = None
    unpruned = unpruned.drop_duplicates(
        ["dataset", "criterion", "max_depth", "min_samples_leaf", "repeat", "fold"]
    )
    both = pd.concat([pruned, unpruned], ignore_index=True)
    columns = [both[c].astype(object).where(both[c].notna(), None) for c in CONFIG]
    both["config"] = list(zip(*columns, strict=True))
    means = both.pivot_table(index="dataset", columns="config", values=metric, aggfunc="mean")
    leaves = both.pivot_table(index="dataset", columns="config", values="n_leaves", aggfunc="mean")
    return means, leaves


def ranking(folds: pd.DataFrame, metric: str | None = None, alpha: float = 0.05) -> list[dict]:
    """Configurations ranked across data sets, one result per task family.

    Parameters
    ----------
    folds : DataFrame
        From :func:`load_folds`.
    metric : str, optional
    alpha : float, default=0.05

    Returns
    -------
    list of dict
        Per task family (classification, regression): ``metric``, ``datasets``,
        ``table`` (DataFrame: configuration, label, mean_rank, wins/ties/losses against
        the best by mean, mean metric, mean leaves, ``not_worse`` than the best by the
        critical difference, and for pruned configurations Wilcoxon's p and the
        Bayesian signed-rank probabilities against their unpruned tree), and the
        ``friedman`` and ``cd`` results.
    """
    folds, tasks = _metric_rows(folds, metric)
    results = []
    family_of = {t: ("regression" if t == "regression" else "classification") for t in tasks}
    for family in sorted(set(family_of.values())):
        mine = folds[folds["task"].map(family_of) == family]
        m = {tasks[t] for t in tasks if family_of[t] == family}.pop()
        means, leaves = _config_scores(mine, m)
        complete = means.dropna(axis=1)
        if complete.shape[1] < means.shape[1]:
            means, leaves = complete, leaves[complete.columns]
        sign = -1.0 if m in HIGHER_IS_BETTER else 1.0
        losses = sign * means.to_numpy()
        n, k = losses.shape
        # tests across data sets need two or more of them
        fried = friedman_test(losses) if k >= 2 and n >= 2 else None
        mean_ranks = (
            fried["mean_ranks"]
            if fried
            else np.apply_along_axis(sps.rankdata, 1, losses).mean(axis=0)
        )
        cd = critical_difference(k, n, alpha) if n >= 2 else np.nan
        best = int(np.lexsort((leaves.mean(axis=0).to_numpy(), mean_ranks))[0])
        rows = []
        for j, config in enumerate(means.columns):
            wins = int(np.sum(losses[:, j] < losses[:, best]))
            ties = int(np.sum(losses[:, j] == losses[:, best]))
            row = dict(zip(CONFIG, config, strict=True))
            row.update(
                config=config,
                label=config_label(config),
                mean_rank=float(mean_ranks[j]),
                wins=wins,
                ties=ties,
                losses=int(n - wins - ties),
                mean_metric=float(means.iloc[:, j].mean()),
                mean_leaves=float(leaves.iloc[:, j].mean()),
                not_worse=bool(np.isnan(cd) or mean_ranks[j] - mean_ranks[best] <= cd),
            )
            baseline = (config[0], config[1], config[2], None, "unpruned", None)
            if config[4] != "unpruned" and baseline in means.columns and n >= 2:
                gains = sign * (means[baseline] - means[config]).to_numpy()
                row["wilcoxon_p"] = _wilcoxon(gains)
                if family == "regression":
                    # losses of regression sets differ in scale: compare relative gains
                    gains = gains / np.abs(means[baseline].to_numpy())
                bayes = bayesian_signed_rank(gains, rope=ROPE)
                row.update(
                    p_pruned_better=bayes["p_first_better"],
                    p_equivalent=bayes["p_equivalent"],
                    p_unpruned_better=bayes["p_second_better"],
                )
            rows.append(row)
        table = pd.DataFrame(rows).sort_values(["mean_rank", "mean_leaves"]).reset_index(drop=True)
        results.append(
            {
                "family": family,
                "metric": m,
                "datasets": list(means.index),
                "table": table,
                "friedman": fried,
                "cd": cd,
                "alpha": alpha,
                "best": means.columns[best],
                "means": means,
                "leaves": leaves,
            }
        )
    return results


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
        From :func:`load_folds`.
    alpha : float, default=0.05

    Returns
    -------
    list of dict
        ``family``, ``metric``, ``config`` (dict of levels), ``label``, ``ranking``
        (the :func:`ranking` result), ``regret`` (DataFrame per data set), ``mean_regret``
        and ``worst_regret``.
    """
    out = []
    for ranked in ranking(folds, None, alpha):
        table, m = ranked["table"], ranked["metric"]
        eligible = table[table["not_worse"]].sort_values(["mean_rank", "mean_leaves"])
        chosen = eligible.iloc[0]
        config = chosen["config"]
        means = ranked["means"]
        sign = -1.0 if m in HIGHER_IS_BETTER else 1.0
        regrets = []
        for dataset in ranked["datasets"]:
            row = means.loc[dataset]
            best_config = (sign * row).idxmin()
            chosen_folds = _config_folds(folds, dataset, config, m)
            best_folds = _config_folds(folds, dataset, best_config, m)
            paired = chosen_folds.merge(
                best_folds, left_index=True, right_index=True, suffixes=("_c", "_b")
            )
            t = corrected_ttest(
                sign * (paired[f"{m}_c"] - paired[f"{m}_b"]),
                paired["n_train_c"],
                paired["n_test_c"],
                alpha,
            )
            regrets.append(
                {
                    "dataset": dataset,
                    "regret": t.mean,
                    "ci_low": t.ci_low,
                    "ci_high": t.ci_high,
                    "best": config_label(best_config),
                    "loses": bool(t.ci_low > 0),
                }
            )
        regret = pd.DataFrame(regrets)
        levels = {c: (None if pd.isna(chosen[c]) else chosen[c]) for c in CONFIG}
        out.append(
            {
                "family": ranked["family"],
                "metric": m,
                "config": levels,
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


def _config_folds(folds: pd.DataFrame, dataset: str, config: tuple, metric: str) -> pd.DataFrame:
    crit, depth, leaf, inner, rule, risk = config
    rows = folds[
        (folds["dataset"] == dataset)
        & (folds["criterion"] == crit)
        & (folds["min_samples_leaf"] == leaf)
    ]
    rows = rows[rows["max_depth"].isna()] if depth is None else rows[rows["max_depth"] == depth]
    if rule == "unpruned":
        rows = rows[rows["arm"] == "unpruned"].drop_duplicates(["repeat", "fold"])
    else:
        rows = rows[
            (rows["arm"] == "pruned")
            & (rows["inner_folds"] == inner)
            & (rows["rule"] == rule)
            & (rows["prune_risk"] == risk)
        ]
    return rows.set_index(["repeat", "fold"])[[metric, "n_train", "n_test"]].sort_index()


# ---- the short table conduct ends with ----------------------------------------------


def arm_means(store: ResultStore, study_id: str) -> pd.DataFrame:
    """Mean test metric and leaves per data set, rule and arm.

    Parameters
    ----------
    store : ResultStore
    study_id : str

    Returns
    -------
    DataFrame
        Columns ``dataset``, ``task``, ``rule``, ``arm``, ``metric`` (``error`` for
        classification, ``mse`` for regression), ``value`` (its mean over trials and
        outer folds), ``n_leaves`` (mean leaves) and ``n_trials``.
    """
    rows = store.query(
        """
        SELECT d.name AS dataset, d.task, t.rule, f.arm,
               AVG(CASE WHEN d.task = 'regression' THEN f.mse ELSE f.error END) AS value,
               AVG(f.n_leaves) AS n_leaves, COUNT(DISTINCT t.trial_id) AS n_trials
        FROM folds f JOIN trials t USING (trial_id) JOIN datasets d USING (dataset_id)
        WHERE t.study_id = ? AND t.status = 'done'
        GROUP BY d.name, d.task, t.rule, f.arm
        ORDER BY d.name, t.rule, f.arm DESC
        """,
        [study_id],
    )
    frame = pd.DataFrame(
        rows, columns=["dataset", "task", "rule", "arm", "value", "n_leaves", "n_trials"]
    )
    frame.insert(4, "metric", frame["task"].map(lambda t: "mse" if t == "regression" else "error"))
    return frame
