"""Statistics over stored results: corrected CIs, paired differences, tests across data sets.

Per data set and configuration the outer folds of repeated CV are not
independent (their training sets overlap), so the usual t interval is too
narrow.  The corrected resampled t of Nadeau & Bengio (2003) inflates the
variance of the mean of the J = repeats x folds per-fold values:
``var = (1/J + n_test/n_train) * s^2`` with ``df = J - 1``, using the actual
``n_test/n_train`` of the folds.  Across data sets (Demšar 2006): mean ranks,
the Friedman test with the Iman-Davenport F, the Nemenyi critical difference,
Wilcoxon's signed-rank test, and a Bayesian signed-rank test with a region of
practical equivalence (Benavoli et al. 2017).

A *configuration* (:class:`prunebench.vocabulary.Configuration`) is the level of
every factor and means its pruned tree.  Frames in, frames out: the folds come
from :func:`prunebench.results.load_folds`; the ranking across data sets and the
recommended default are in :mod:`prunebench.ranks`.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd
from scipy import stats as sps

from .exceptions import StatsError
from .vocabulary import (
    FACTORS,
    METRICS,
    config_label,
    default_metric,
    factor_names,
    family_of,
    higher_is_better,
    metric_names,
)

__all__ = [
    "COMPARISON_COLUMNS",
    "StatsError",
    "TTest",
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
    "metric_rows",
    "nemenyi_q",
]

#: the columns of :func:`comparison`'s table, in the order the commands print them
COMPARISON_COLUMNS = [
    "dataset",
    "task",
    *FACTORS,
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


def __getattr__(name: str):
    # names that moved to the vocabulary, computed on access so that an added metric or
    # factor shows here too; the ranking moved to prunebench.ranks
    if name == "CONFIG":
        return factor_names()
    if name == "HIGHER_IS_BETTER":
        return {m.name for m in METRICS.values() if m.higher_is_better}
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


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
    ``chi2_F = 12N / (k(k+1)) * (sum R_j^2 - k(k+1)^2/4)`` divided by the tie correction
    ``1 - sum(t^3 - t) / (N k (k^2 - 1))`` over every group of t tied values in a row
    (as scipy's ``friedmanchisquare``; every row tied throughout gives NaN), and Iman & Davenport's
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
    n, k = scores.shape
    ties = sum(
        float(np.sum(c**3 - c)) for c in (np.unique(row, return_counts=True)[1] for row in scores)
    )
    correction = 1 - ties / (n * k * (k * k - 1)) if k > 1 else 1.0
    return friedman_from_ranks(ranks.mean(axis=0), n, correction)


def friedman_from_ranks(mean_ranks, n: int, correction: float = 1.0) -> dict:
    """Friedman and Iman-Davenport statistics from mean ranks over ``n`` data sets.

    Parameters
    ----------
    mean_ranks : array-like of shape (k,)
    n : int
    correction : float, default=1.0
        The tie correction ``1 - sum(t^3 - t) / (n k (k^2 - 1))`` (1 without ties); the
        statistic is divided by it, and is NaN when it is 0 (every row tied throughout).

    Returns
    -------
    dict
        As :func:`friedman_test`.
    """
    mean_ranks = np.asarray(mean_ranks, dtype=float)
    k = mean_ranks.size
    chi2 = 12 * n / (k * (k + 1)) * (np.sum(mean_ranks**2) - k * (k + 1) ** 2 / 4)
    chi2 = chi2 / correction if correction > 0 else np.nan
    df1, df2 = k - 1, (k - 1) * (n - 1)
    denominator = n * (k - 1) - chi2
    ff = (n - 1) * chi2 / denominator if denominator > 0 else np.inf
    ff = np.nan if np.isnan(chi2) else ff
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


def metric_rows(folds: pd.DataFrame, metric: str | None) -> tuple[pd.DataFrame, dict]:
    """Folds restricted to the tasks that have the metric, and task -> metric used.

    Parameters
    ----------
    folds : DataFrame
        From :func:`prunebench.results.load_folds`.
    metric : str or dict, optional
        Default: each task family's default metric; family -> metric keeps only the
        families named.

    Returns
    -------
    (DataFrame, dict)
    """
    tasks = {}
    for task in folds["task"].unique():
        if isinstance(metric, dict):  # family -> metric: the families named only
            if family_of(task) not in metric:
                continue
            chosen = metric[family_of(task)] or default_metric(task)
        else:
            chosen = metric or default_metric(task)
        if chosen not in metric_names(family_of(task)):
            continue
        tasks[task] = chosen
    if not tasks:
        families = {family_of(task) for task in folds["task"].unique()}
        known = [m for m in metric_names() if any(m in metric_names(f) for f in families)]
        raise StatsError(
            f"no dataset of this study has the metric {metric!r}; its datasets have "
            f"{', '.join(known)}"
        )
    return folds[folds["task"].isin(tasks)], tasks


# ---- the comparison table --------------------------------------------------------------


#: factors added after the first release; folds without their column are at the default level
_LATER_FACTORS = ("select_by", "class_weight")


def _with_default_levels(folds: pd.DataFrame) -> pd.DataFrame:
    """The folds with a column for every factor (a missing later one at its default level)."""
    later = [f for f in _LATER_FACTORS if f not in folds]
    if not later:
        return folds
    folds = folds.copy()
    for name in later:
        default = FACTORS[name].default
        folds[name] = folds["task"].map(lambda task, d=default: d[family_of(task)])
    return folds


def _paired_means(folds: pd.DataFrame, metric: str | None) -> pd.DataFrame:
    """Per trial: means and variances of both arms, of their per-fold difference and of leaves."""
    folds, tasks = metric_rows(_with_default_levels(folds), metric)
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
    agg = both.groupby("trial_id", sort=False).agg(
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
        ["dataset", "task", *factor_names(), "metric"]
    ]
    return meta.join(agg)


def _verdicts(table: pd.DataFrame, alpha: float) -> np.ndarray:
    """Which arm the difference favours when its Holm-adjusted p is below alpha.

    The family of tests is every row of the table; the direction follows the sign of
    the mean difference and the metric's direction.
    """
    lower_better = ~table["metric"].map(higher_is_better).astype(bool)
    significant = table["p_holm"] < alpha
    below = significant & (table["diff"] < 0)
    above = significant & (table["diff"] > 0)
    return np.select(
        [below & lower_better, above & ~lower_better, above & lower_better, below & ~lower_better],
        ["pruned better", "pruned better", "unpruned better", "unpruned better"],
        "no evidence either way",
    )


def comparison(folds: pd.DataFrame, metric: str | None = None, alpha: float = 0.05) -> pd.DataFrame:
    """Pruned against unpruned, per data set and configuration.

    Parameters
    ----------
    folds : DataFrame
        From :func:`prunebench.results.load_folds`.
    metric : str, optional
        Default ``error`` for classification, ``mse`` for regression.
    alpha : float, default=0.05

    Returns
    -------
    DataFrame
        One row per data set and configuration: the factor columns, ``metric``,
        ``mean_pruned``, ``mean_unpruned``, the paired ``diff`` (pruned - unpruned)
        with its corrected ``ci_low``/``ci_high`` and ``p_value``, the naive interval
        and p-value, ``p_holm`` (Holm-adjusted over all rows), ``verdict`` ("pruned
        better" / "unpruned better" when ``p_holm`` < alpha, else "no evidence either
        way"), the
        arms' corrected CIs, ``leaves_pruned``, ``leaves_unpruned``, ``leaves_saved``
        with its corrected CI, and ``n_folds``.
    """
    table = _paired_means(folds, metric)
    n, ratio = table["n_folds"], table["ratio"]
    diff = _corrected(table["diff"], table["var_diff"], n, ratio, alpha)
    for k in ("ci_low", "ci_high", "p_value", "naive_ci_low", "naive_ci_high", "naive_p_value"):
        table[k] = diff[k]
    for arm in ("pruned", "unpruned"):
        r = _corrected(table[f"mean_{arm}"], table[f"var_{arm}"], n, ratio, alpha)
        table[f"{arm}_ci_low"], table[f"{arm}_ci_high"] = r["ci_low"], r["ci_high"]
    saved = _corrected(table["leaves_saved"], table["var_saved"], n, ratio, alpha)
    table["leaves_saved_ci_low"], table["leaves_saved_ci_high"] = saved["ci_low"], saved["ci_high"]
    table = table.sort_values(["dataset", *factor_names()], na_position="last")
    table = table.reset_index(drop=True)
    table["max_depth"] = table["max_depth"].astype("Int64")
    table["p_holm"] = holm(table["p_value"])
    table["verdict"] = _verdicts(table, alpha)
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
        From :func:`prunebench.results.load_folds`.
    dataset : str
    first, second : dict
        Factor levels (any subset of the factors that names one trial each).
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
