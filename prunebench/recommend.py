"""The recommendation rule, judged by leaving one data set out, and tree stability.

Among all configurations of a task family (the pruned ones and each distinct
unpruned tree, criterion x depth x leaf size, with rule ``"unpruned"``):

- **B** is the configuration with the lowest mean loss over data sets (each data
  set weighted equally; losses as :func:`prunebench.effects.losses`).
- **C is acceptable** when the one-sided ``1 - alpha`` Hartung-Knapp upper bound of
  the random-effects mean of ``loss(C) - loss(B)`` lies below the margin (per data
  set: the paired outer-fold differences, their mean and Nadeau-Bengio variance,
  zero variances filled as in :mod:`prunebench.effects`). B is acceptable.
- **The recommendation** is the acceptable configuration with the smallest mean
  leaf count (the mean over data sets of each data set's mean leaves), ties to the
  lower mean loss.

**Leave one data set out** judges the rule: it is applied to the other k - 1 data
sets and its choice scored on the held-out one. The held-out data set's "best"
configuration is not chosen on the folds it is scored on: the held-out outer folds,
sorted by (repeat, fold), are split into the even and the odd positions; the best
is picked on one half and both it and the rule's choice are scored on the other,
and the two directions are averaged (configurations tied for best on the picking
half count equally: their mean loss on the scoring half is the best's). Within one
repeat the halves' test rows are disjoint; across repeats they are the same rows in
other partitions. The regret
is therefore not biased upwards by picking the best on noise, and can be negative.
"""

from __future__ import annotations

from itertools import combinations

import numpy as np
import pandas as pd
from scipy import stats as sps

from .effects import FACTORS, _norm, check_decision, for_family, losses
from .exceptions import EffectsError, parameter_error
from .metaanalysis import fill_zero_variances, random_effects_many
from .vocabulary import (
    DEFAULT_METRIC,
    Configuration,
    default_margin,
    family_of,
    growth_factors,
    metric_names,
)

__all__ = [
    "config_frame",
    "config_label",
    "recommend",
    "stability",
    "undecided",
    "upper_bounds",
]

#: the factors that change the grown tree (one unpruned tree per level of each)
_GROWTH = growth_factors()


def config_label(config) -> str:
    """A configuration's named label, e.g. ``"gini depth=none leaf=1 k=10 1se error"``.

    :meth:`prunebench.vocabulary.Configuration.label` with ``named=True``: levels other
    than the defaults add ``class_weight=...`` and ``select_by=...``, so configurations
    that differ in any level have different labels.

    Parameters
    ----------
    config : tuple or mapping
        The levels in :data:`~prunebench.effects.FACTORS` order, or a mapping with
        those keys.

    Returns
    -------
    str
    """
    return Configuration.of(config).label(named=True)


def config_frame(folds: pd.DataFrame, family: str, metric: str) -> pd.DataFrame:
    """Per-fold loss and leaves of every configuration of a family, unpruned trees included.

    Parameters
    ----------
    folds : DataFrame
        One row per trial, outer fold and arm (:func:`prunebench.results.load_folds`).
    family : {"classification", "regression"}
    metric : str

    Returns
    -------
    DataFrame
        Columns ``dataset``, ``repeat``, ``fold``, ``n_train``, ``n_test``, ``config``
        (a tuple of levels in factor order, None for unlimited depth, no class weight and
        the unpruned trees' inner folds, risk and CV loss), ``loss``, ``n_leaves`` and,
        when the folds
        have them, ``alpha``, ``root_feature``, ``features_used``.
    """
    rows = losses(folds, family, metric)
    pruned = rows[rows["arm"] == "pruned"].copy()
    unpruned = rows[rows["arm"] == "unpruned"].copy()
    # the unpruned tree depends on the growth settings only: one configuration each
    unpruned = unpruned.drop_duplicates(["dataset", *_GROWTH, "repeat", "fold"])
    unpruned["inner_folds"], unpruned["rule"], unpruned["prune_risk"] = None, "unpruned", None
    unpruned["select_by"] = None  # an unpruned tree chooses no alpha
    both = pd.concat([pruned, unpruned], ignore_index=True)
    columns = [[_norm(v) for v in both[f].astype(object)] for f in FACTORS]
    both["config"] = list(zip(*columns, strict=True))
    keep = ["dataset", "repeat", "fold", "n_train", "n_test", "config", "loss", "n_leaves"]
    keep += [c for c in ("alpha", "root_feature", "features_used") if c in both]
    return both[keep]


def _upper_and_mean(y: np.ndarray, v: np.ndarray, j: np.ndarray, alpha: float):
    """Random-effects mean and one-sided upper bound, one column per contrast.

    ``y``, ``v`` are (k data sets x m contrasts); ``j`` the data sets' fold counts.
    With one data set: its own corrected t bound on J - 1 df.
    """
    v = fill_zero_variances(v)
    if y.shape[0] == 1:
        mu, se, df = y[0], np.sqrt(v[0]), j[0] - 1
    else:
        r = random_effects_many(y, v, alpha)
        mu, se, df = r["estimate"], r["se"], r["df"]
    q = sps.t.ppf(1 - alpha, df)
    return mu, np.where(se > 0, mu + q * se, mu)


def upper_bounds(
    diffs: np.ndarray, ratio: np.ndarray, alpha: float = 0.05
) -> tuple[np.ndarray, np.ndarray]:
    """Random-effects mean and one-sided Hartung-Knapp upper bound of paired differences.

    Parameters
    ----------
    diffs : ndarray of shape (k, J, m)
        Per data set, outer fold and contrast: loss(C) - loss(B).
    ratio : ndarray of shape (k,)
        Each data set's mean ``n_test / n_train``.
    alpha : float, default=0.05
        The bound is one-sided ``1 - alpha``.

    Returns
    -------
    (ndarray, ndarray) of shape (m,)
        The means and the upper bounds.
    """
    diffs = np.asarray(diffs, dtype=float)
    k, jj, _ = diffs.shape
    y = diffs.mean(axis=1)
    s2 = diffs.var(axis=1, ddof=1)
    v = (1 / jj + np.asarray(ratio, float)[:, None]) * s2
    return _upper_and_mean(y, v, np.full(k, jj), alpha)


def _matrices(frame: pd.DataFrame):
    """(data sets x folds x configurations) loss and leaf arrays of the complete configs."""
    loss = frame.pivot_table(
        index=["dataset", "repeat", "fold"], columns="config", values="loss", aggfunc="first"
    )
    leaves = frame.pivot_table(
        index=["dataset", "repeat", "fold"], columns="config", values="n_leaves", aggfunc="first"
    )
    complete = loss.columns[loss.notna().all(axis=0)]
    if len(complete) == 0:
        raise EffectsError("no configuration has every outer fold of every data set")
    loss, leaves = loss[complete], leaves[complete]
    counts = loss.groupby(level="dataset").size()
    if counts.nunique() != 1:
        raise EffectsError("the data sets have different numbers of outer folds")
    datasets = list(counts.index)
    k, jj = len(datasets), int(counts.iloc[0])
    info = frame.drop_duplicates(["dataset", "repeat", "fold"]).set_index(
        ["dataset", "repeat", "fold"]
    )
    info = info.loc[loss.index]
    ratio = (info["n_test"] / info["n_train"]).groupby(level="dataset").mean()
    L = loss.to_numpy().reshape(k, jj, -1)
    N = leaves.to_numpy(float).reshape(k, jj, -1)
    return datasets, list(complete), L, N, ratio.loc[datasets].to_numpy()


def _choose(L: np.ndarray, N: np.ndarray, ratio: np.ndarray, margin: float, alpha: float):
    """Apply the rule to (k x J x m) losses and leaves: best, uppers, acceptable, choice."""
    mean_loss = L.mean(axis=1).mean(axis=0)
    mean_leaves = N.mean(axis=1).mean(axis=0)
    best = int(np.argmin(mean_loss))
    _, upper = upper_bounds(L - L[:, :, [best]], ratio, alpha)
    acceptable = np.flatnonzero(upper < margin)
    # leaf means summed in another order may differ in the last bit: ties within 1e-9
    tied_leaves = np.round(mean_leaves[acceptable], 9)
    acceptable = acceptable[np.lexsort((mean_loss[acceptable], tied_leaves))]
    return best, upper, acceptable, int(acceptable[0]), mean_loss, mean_leaves


def _held_out(L, N, ratio, margin, alpha, datasets, configs) -> dict:
    k, jj, _ = L.shape
    per = []
    if k < 2:
        return {
            "mean_regret": np.nan,
            "share_over_margin": np.nan,
            "n_datasets": 0,
            "per_dataset": [],
        }
    halves = (np.arange(jj) % 2 == 0, np.arange(jj) % 2 == 1)
    for h in range(k):
        rest = np.arange(k) != h
        choice = _choose(L[rest], N[rest], ratio[rest], margin, alpha)[3]
        regrets = []
        for pick, score in (halves, halves[::-1]):
            on_pick = L[h, pick].mean(axis=0)
            # configurations tied for best on the picking half share the role equally
            best_h = np.flatnonzero(on_pick == on_pick.min())
            regrets.append(L[h, score, choice].mean() - L[h][np.ix_(score, best_h)].mean())
        per.append(
            {
                "dataset": datasets[h],
                "choice": config_label(configs[choice]),
                "regret": float(np.mean(regrets)),
            }
        )
    regret = np.array([p["regret"] for p in per])
    return {
        "mean_regret": float(regret.mean()),
        "share_over_margin": float(np.mean(regret > margin)),
        "n_datasets": k,
        "per_dataset": per,
    }


def _as_dict(config: tuple) -> dict:
    """The levels as the machine outputs write them (no class weighting as ``"none"``)."""
    return Configuration.of(config).record()


def recommend(
    folds: pd.DataFrame,
    metric: str | None = None,
    margin: float | None = None,
    alpha: float = 0.05,
    trials: dict | None = None,
) -> list[dict]:
    """The recommended configuration per task family, with how well the rule does.

    Parameters
    ----------
    folds : DataFrame
        One row per trial, outer fold and arm (:func:`prunebench.results.load_folds`);
        ``root_feature`` and ``features_used`` columns, when present, give the
        stability of the chosen trees.
    metric : str or dict, optional
        The primary metric, or family -> metric; default ``error`` / ``mse``.
    margin : float or dict, optional
        Practical-equivalence margin in loss units, or family -> margin; default
        :func:`~prunebench.vocabulary.default_margin` of the metric.
    alpha : float, default=0.05
        The acceptability bound is one-sided ``1 - alpha``.
    trials : dict, optional
        Trial counts to pass through: ``{"done": .., "failed": .., "pending": ..}``,
        or family -> such a dict.

    Returns
    -------
    list of dict
        Per family: ``family``, ``decided`` (False, with ``reason``, when no
        configuration has every outer fold of every data set; the choice keys are then
        None), ``metric``, ``margin``, ``alpha``, ``config`` (factor ->
        level), ``label``, ``mean_loss``, ``mean_leaves``, ``best`` (B: ``config``,
        ``label``, ``mean_loss``, ``mean_leaves``), ``acceptable`` (list, fewest leaves
        first: ``config``, ``label``, ``mean_loss``, ``mean_leaves``, ``upper_bound``),
        ``held_out`` (``mean_regret``, ``share_over_margin``, ``n_datasets``,
        ``per_dataset``), ``trials``, ``datasets``, ``n_configurations`` and
        ``stability`` (list of per-data-set dicts from :func:`stability`, or None).
    """
    check_decision("recommend", margin, alpha)
    out = []
    for family in sorted(set(folds["task"].map(family_of))):
        m = for_family(metric, family) or DEFAULT_METRIC[family]
        if m not in metric_names(family):
            continue
        fam_margin = for_family(margin, family)
        fam_margin = default_margin(m) if fam_margin is None else float(fam_margin)
        counts = trials.get(family, trials) if isinstance(trials, dict) else None
        if isinstance(counts, dict) and "done" not in counts:
            counts = None
        frame = config_frame(folds, family, m)
        try:
            datasets, configs, L, N, ratio = _matrices(frame)
        except EffectsError as err:
            out.append(undecided(family, m, fam_margin, alpha, counts, str(err)))
            continue
        best, upper, acceptable, choice, mean_loss, mean_leaves = _choose(
            L, N, ratio, fam_margin, alpha
        )

        def describe(i: int, configs=configs, mean_loss=mean_loss, mean_leaves=mean_leaves):
            return {
                "config": _as_dict(configs[i]),
                "label": config_label(configs[i]),
                "mean_loss": float(mean_loss[i]),
                "mean_leaves": float(mean_leaves[i]),
            }

        stable = stability(frame, configs[choice])
        out.append(
            {
                "family": family,
                "decided": True,
                "reason": None,
                "metric": m,
                "margin": fam_margin,
                "alpha": alpha,
                **describe(choice),
                "best": describe(best),
                "acceptable": [{**describe(i), "upper_bound": float(upper[i])} for i in acceptable],
                "held_out": _held_out(L, N, ratio, fam_margin, alpha, datasets, configs),
                "trials": dict(counts) if counts else None,
                "datasets": datasets,
                "n_configurations": len(configs),
                "stability": None if stable is None else stable.to_dict("records"),
            }
        )
    if not out:
        raise parameter_error("metric", "recommend", "a metric of the folds' tasks", metric)
    return out


def undecided(family, metric, margin, alpha, counts, reason: str) -> dict:
    """The record of a family the rule cannot decide: :func:`recommend`'s keys, nothing chosen.

    Parameters
    ----------
    family, metric : str
    margin, alpha : float
    counts : dict or None
        Trials done, failed and pending.
    reason : str
        Why nothing could be chosen.

    Returns
    -------
    dict
    """
    return {
        "family": family,
        "decided": False,
        "reason": reason,
        "metric": metric,
        "margin": margin,
        "alpha": alpha,
        "config": None,
        "label": None,
        "mean_loss": None,
        "mean_leaves": None,
        "best": None,
        "acceptable": [],
        "held_out": None,
        "trials": dict(counts) if counts else None,
        "datasets": [],
        "n_configurations": 0,
        "stability": None,
    }


def _feature_set(value) -> frozenset:
    if value is None or (isinstance(value, float) and np.isnan(value)):
        return frozenset()
    if isinstance(value, str):
        return frozenset(s.strip() for s in value.split(",") if s.strip())
    return frozenset(str(v) for v in value)


def stability(frame: pd.DataFrame, config) -> pd.DataFrame | None:
    """How stable one configuration's trees are across outer folds, per data set.

    Parameters
    ----------
    frame : DataFrame
        From :func:`config_frame` (needs ``root_feature`` and ``features_used``;
        ``features_used`` a comma-separated string or a collection of names).
    config : tuple or dict
        The configuration, as in ``frame["config"]`` or a factor -> level mapping.

    Returns
    -------
    DataFrame or None
        None when the columns are absent. Otherwise per data set: ``dataset``,
        ``n_folds``, ``root_feature`` (the most common root split's feature; "" for a
        single leaf), ``root_share`` (share of folds that split first on it),
        ``jaccard`` (mean pairwise Jaccard similarity of the folds' feature sets, 1
        for two empty sets), ``leaves_p10``, ``leaves_p90``, ``alpha_p10``,
        ``alpha_p90`` (10th and 90th percentiles over folds, linear interpolation).
    """
    if not {"root_feature", "features_used"} <= set(frame.columns):
        return None
    if isinstance(config, dict):
        config = tuple(_norm(config[f]) for f in FACTORS)
    rows = frame[frame["config"].map(lambda c: c == tuple(config))]
    out = []
    for dataset, g in rows.groupby("dataset", sort=True):
        # a single leaf has no root split: NULL in the store, NA or NaN in the frame
        roots = ["" if pd.isna(r) else str(r) for r in g["root_feature"]]
        counts = pd.Series(roots).value_counts(sort=True)
        top = sorted(counts.index[counts == counts.max()])[0]
        sets = [_feature_set(f) for f in g["features_used"]]
        pairs = [len(a & b) / len(a | b) if a | b else 1.0 for a, b in combinations(sets, 2)]
        leaves = g["n_leaves"].to_numpy(float)
        alphas = g["alpha"].to_numpy(float) if "alpha" in g else np.full(len(g), np.nan)
        out.append(
            {
                "dataset": dataset,
                "n_folds": len(g),
                "root_feature": top,
                "root_share": float(counts.max() / len(g)),
                "jaccard": float(np.mean(pairs)) if pairs else np.nan,
                "leaves_p10": float(np.percentile(leaves, 10)),
                "leaves_p90": float(np.percentile(leaves, 90)),
                "alpha_p10": float(np.percentile(alphas, 10)),
                "alpha_p90": float(np.percentile(alphas, 90)),
            }
        )
    return pd.DataFrame(out)
