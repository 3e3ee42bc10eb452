"""Per-factor effects across data sets: paired contrasts, random effects, verdicts.

The team's questions are per factor ("does the one-standard-error rule cost
accuracy against the minimum rule?"), so the analysis is per factor:

1. **Per outer fold**, the marginal paired contrast of a level against the
   reference level (the first level listed in the study file): the mean, over
   every combination of the other factors' levels present for both levels, of
   ``loss(level) - loss(reference)`` on the pruned arm. Both trials saw the same
   outer test rows, so the contrast is paired. Tree size: the same with
   ``log(n_leaves)``. "Pruning" is a factor too: the pruned arm against the
   unpruned tree of the same growth settings.
2. **Per data set**, the mean of the J per-fold contrasts and its Nadeau & Bengio
   (2003) variance ``(1/J + mean(n_test/n_train)) * s^2`` (s^2 with ddof 1). A data
   set whose contrasts agree on every fold (s^2 = 0) takes the smallest positive
   variance among the other data sets of that contrast; when every data set has
   s^2 = 0 the effect is exact.
3. **Across data sets**, a random-effects combination
   (:func:`prunebench.metaanalysis.random_effects`):
   DerSimonian & Laird's tau^2, the Hartung-Knapp(-Sidik-Jonkman) interval with t
   on k - 1 degrees of freedom (plain form, no truncation), I^2, and the 95%
   prediction interval of Higgins, Thompson & Spiegelhalter (2009).

Losses
------
Every contrast is a difference of *losses*, negative = the level is better.
Metrics where larger is better are turned into losses as ``1 - metric``
(accuracy -> error, balanced accuracy -> balanced error, R^2 -> MSE / variance),
so their estimates are minus the metric's difference. For MSE and MAE the loss of
every fold is divided by the data set's mean unpruned loss (over all its unpruned
trees), so data sets with large targets do not dominate and the default margin,
1% of the unpruned loss, is 0.01 in those units.

Verdicts
--------
``equivalent`` when the 90% interval lies inside ``±margin`` (two one-sided tests
at 5%, Schuirmann 1987); otherwise ``better`` (estimate < 0) or ``worse`` when
the Holm-adjusted p over the family's contrasts on the primary metric is below
alpha; otherwise ``undecided``. Tree-size rows have no margin: ``smaller`` or
``larger`` when their Holm-adjusted p (over the family's size rows) is below
alpha, else ``undecided``.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from .exceptions import EffectsError, parameter_error
from .metaanalysis import combine, fill_zero_variances, random_effects, random_effects_many
from .stats import holm
from .vocabulary import (
    DEFAULT_METRIC,
    default_margin,
    factor_names,
    family_of,
    higher_is_better,
    is_relative,
    metric_names,
    spelled_level,
)
from .vocabulary import FACTORS as _FACTOR_SPECS

__all__ = [
    "EFFECT_COLUMNS",
    "INTERACTION_COLUMNS",
    "EffectsError",
    "JSON_COLUMNS",
    "check_decision",
    "effect_records",
    "factor_effects",
    "for_family",
    "interaction_effects",
    "combine",
    "loss_frame",
    "losses",
    "normalise_levels",
    "fill_zero_variances",
    "random_effects",
    "random_effects_many",
]

#: the factor columns of a configuration, in the order of the store
FACTORS = factor_names()
#: factors added after the first release: folds without their column are at the default level
_LATER_FACTORS = ("select_by", "class_weight")


def _family_metrics(family: str) -> set[str]:
    return set(metric_names(family))


def for_family(value, family: str):
    """``value[family]`` when ``value`` is a family -> value mapping, else ``value``."""
    return value.get(family) if isinstance(value, dict) else value


def check_decision(function: str, margin, alpha: float) -> None:
    """Refuse an alpha outside (0, 0.5] or a margin (or a family's margin) <= 0."""
    if isinstance(alpha, bool) or not isinstance(alpha, int | float) or not 0 < alpha <= 0.5:
        raise parameter_error("alpha", function, "a float in (0, 0.5]", alpha)
    margins = margin.values() if isinstance(margin, dict) else [margin]
    for m in margins:
        if m is not None and not (isinstance(m, int | float) and m > 0):
            raise parameter_error("margin", function, "a positive float", margin)


#: columns of :func:`factor_effects`' table
EFFECT_COLUMNS = [
    "family",
    "factor",
    "level",
    "reference",
    "metric",
    "estimate",
    "ci_low",
    "ci_high",
    "ci90_low",
    "ci90_high",
    "pi_low",
    "pi_high",
    "tau2",
    "i2",
    "n_datasets",
    "p_value",
    "p_holm",
    "verdict",
    "margin",
    "ratio",
    "ratio_low",
    "ratio_high",
    "note",
]
#: keys of one row of ``prunebench effects --json`` (size rows add the ratio keys)
JSON_COLUMNS = [
    "family",
    "factor",
    "level",
    "reference",
    "metric",
    "estimate",
    "ci_low",
    "ci_high",
    "pi_low",
    "pi_high",
    "tau2",
    "i2",
    "n_datasets",
    "p_value",
    "p_holm",
    "verdict",
]
_RATIO_COLUMNS = ["ratio", "ratio_low", "ratio_high"]
#: columns of :func:`interaction_effects`' table
INTERACTION_COLUMNS = [
    "family",
    "factor",
    "level",
    "reference",
    "metric",
    "by",
    "by_level",
    "estimate",
    "ci_low",
    "ci_high",
    "n_datasets",
    "spread",
    "margin",
    "flagged",
]


# ---- preparing the folds ---------------------------------------------------------------


def _norm(value):
    """One spelling per level: None for unlimited/missing, plain Python scalars."""
    if value is None or value is pd.NA or value is pd.NaT:
        return None
    if isinstance(value, float | np.floating) and np.isnan(value):
        return None
    if isinstance(value, str) and value.lower() == "none":
        return None
    if isinstance(value, np.integer):
        return int(value)
    if isinstance(value, np.floating):
        return int(value) if float(value).is_integer() else float(value)
    return value


def normalise_levels(levels: dict, family: str) -> dict[str, list]:
    """The levels of one task family, each spelled as in the folds (None = unlimited).

    Parameters
    ----------
    levels : dict
        Factor -> ordered levels (reference first), or family -> that mapping.
    family : {"classification", "regression"}

    Returns
    -------
    dict
        Factor -> list of levels.
    """
    if not isinstance(levels, dict):
        raise parameter_error("levels", "factor_effects", "a dict of factor -> levels", levels)
    if family in levels and isinstance(levels[family], dict):
        levels = levels[family]
    out = {}
    for factor, values in levels.items():
        if isinstance(values, dict):
            continue  # the other family's levels
        if not isinstance(values, list | tuple) or not values:
            raise parameter_error(
                f"levels[{factor!r}]", "factor_effects", "a non-empty list", values
            )
        out[factor] = [_norm(v) for v in values]
    return out


def losses(folds: pd.DataFrame, family: str, metric: str) -> pd.DataFrame:
    """The family's fold rows with ``loss`` and ``log_leaves`` columns added.

    ``loss`` is the metric, ``1 - metric`` when larger is better, divided by the
    data set's mean unpruned loss (over all its unpruned trees) for
    :func:`prunebench.vocabulary.is_relative` metrics.

    Parameters
    ----------
    folds : DataFrame
        One row per trial, outer fold and arm (:func:`prunebench.results.load_folds`).
    family : {"classification", "regression"}
    metric : str

    Returns
    -------
    DataFrame
    """
    missing = {"dataset", "task", "trial_id", "repeat", "fold", "arm", "n_train", "n_test"}
    missing |= {"n_leaves", metric, *FACTORS}
    missing -= set(folds.columns)
    defaulted = missing & set(_LATER_FACTORS)
    missing -= defaulted
    if missing:
        raise EffectsError(f"the folds lack the column(s) {', '.join(sorted(missing))}")
    rows = folds[folds["task"].map(family_of) == family].copy()
    if rows.empty:
        raise EffectsError(f"no {family} data set in the folds")
    for factor in sorted(defaulted):
        rows[factor] = _FACTOR_SPECS[factor].default[family]
    loss = rows[metric].astype(float)
    if higher_is_better(metric):
        loss = 1.0 - loss
    if is_relative(metric):
        scale = loss[rows["arm"] == "unpruned"].groupby(rows["dataset"]).mean()
        loss = loss / rows["dataset"].map(scale)
    rows["loss"] = loss
    rows["log_leaves"] = np.log(rows["n_leaves"].astype(float))
    return rows


def loss_frame(folds: pd.DataFrame, family: str, metric: str, levels: dict) -> pd.DataFrame:
    """:func:`losses` plus a level code per factor.

    Each factor gets a column ``code_<factor>``: the position of the row's level in
    ``levels``, so the first listed (reference) level is code 0.

    Parameters
    ----------
    folds : DataFrame
    family : {"classification", "regression"}
    metric : str
    levels : dict
        As :func:`normalise_levels`.

    Returns
    -------
    DataFrame
    """
    rows = losses(folds, family, metric)
    lv = normalise_levels(levels, family)
    for factor in FACTORS:
        seen = [_norm(v) for v in rows[factor].astype(object)]
        order = lv.get(factor)
        distinct = list(dict.fromkeys(seen))
        if order is None:
            if len(distinct) > 1:
                raise parameter_error(
                    "levels", "factor_effects", f"a level order for {factor!r}", sorted(lv)
                )
            order = distinct
        position = {v: i for i, v in enumerate(order)}
        unknown = [v for v in distinct if v not in position]
        if unknown:
            raise parameter_error(
                f"levels[{factor!r}]", "factor_effects", f"a list holding {unknown!r}", order
            )
        rows[f"code_{factor}"] = [position[v] for v in seen]
    return rows


# ---- contrasts -------------------------------------------------------------------------


def _fold_info(rows: pd.DataFrame) -> pd.DataFrame:
    return rows.groupby(["dataset", "repeat", "fold"])[["n_train", "n_test"]].first()


def _factor_folds(pruned: pd.DataFrame, factor: str, level: int, value: str) -> pd.Series:
    """Per (dataset, repeat, fold): mean over other-factor cells of value(level) - value(ref)."""
    code = f"code_{factor}"
    others = [f"code_{f}" for f in FACTORS if f != factor]
    sub = pruned[pruned[code].isin([0, level])]
    wide = sub.set_index(["dataset", "repeat", "fold", *others, code])[value].unstack(code)
    if level not in wide or 0 not in wide:
        return pd.Series(dtype=float)
    d = (wide[level] - wide[0]).dropna()
    return d.groupby(level=["dataset", "repeat", "fold"]).mean()


def _pruning_folds(rows: pd.DataFrame, value: str) -> pd.Series:
    """Per (dataset, repeat, fold): mean over trials of value(pruned) - value(unpruned)."""
    keys = ["trial_id", "repeat", "fold"]
    p = rows[rows["arm"] == "pruned"].set_index(keys)
    u = rows[rows["arm"] == "unpruned"].set_index(keys)[value]
    d = (p[value] - u.reindex(p.index)).dropna()
    frame = pd.DataFrame({"d": d, "dataset": p.loc[d.index, "dataset"]}).reset_index()
    return frame.groupby(["dataset", "repeat", "fold"])["d"].mean()


def _per_dataset(contrasts: pd.Series, info: pd.DataFrame) -> pd.DataFrame:
    """Mean, Nadeau-Bengio variance and fold count of the per-fold contrasts per data set."""
    frame = pd.DataFrame({"d": contrasts}).join(info, how="left")
    frame["ratio"] = frame["n_test"] / frame["n_train"]
    g = frame.groupby(level="dataset")
    out = pd.DataFrame({"y": g["d"].mean(), "s2": g["d"].var(ddof=1), "j": g["d"].size()})
    out["ratio"] = g["ratio"].mean()
    out["v"] = (1 / out["j"] + out["ratio"]) * out["s2"]
    return out


def _contrast_list(rows: pd.DataFrame) -> list[tuple[str, int]]:
    """(factor, level code) of every non-reference level present, pruning first."""
    pruned = rows[rows["arm"] == "pruned"]
    out = [("pruning", 1)] if (rows["arm"] == "unpruned").any() else []
    for factor in FACTORS:
        codes = sorted(pruned[f"code_{factor}"].unique())
        if len(codes) >= 2:
            out += [(factor, int(c)) for c in codes if c != codes[0]]
    return out


def _family_metric(folds: pd.DataFrame, metric: str | None) -> dict[str, str]:
    families = sorted(set(folds["task"].map(family_of)))
    chosen = {}
    for family in families:
        m = for_family(metric, family) or DEFAULT_METRIC[family]
        if m in _family_metrics(family):
            chosen[family] = m
    if not chosen:
        raise parameter_error("metric", "factor_effects", "a metric of the folds' tasks", metric)
    return chosen


def _level_names(rows: pd.DataFrame, levels: dict, family: str, factor: str, code: int):
    if factor == "pruning":
        return ("pruned", "unpruned")
    lv = normalise_levels(levels, family).get(factor)
    if lv is None:
        lv = [_norm(rows[factor].iloc[0])]
    present = sorted(rows.loc[rows["arm"] == "pruned", f"code_{factor}"].unique())
    # as the machine outputs spell levels: no class weighting is "none", as in a study file
    return spelled_level(factor, lv[code]), spelled_level(factor, lv[present[0]])


def _reference_code(rows: pd.DataFrame, factor: str) -> int:
    return int(rows.loc[rows["arm"] == "pruned", f"code_{factor}"].min())


def _contrast_folds(rows: pd.DataFrame, factor: str, code: int, ref: int, value: str) -> pd.Series:
    if factor == "pruning":
        return _pruning_folds(rows, value)
    pruned = rows[rows["arm"] == "pruned"]
    if ref != 0:  # the first listed level is absent here: the first present is the reference
        pruned = pruned.assign(**{f"code_{factor}": pruned[f"code_{factor}"].replace(ref, 0)})
    return _factor_folds(pruned, factor, code, value)


def factor_effects(
    folds: pd.DataFrame,
    levels: dict,
    metric: str | None = None,
    margin: float | None = None,
    alpha: float = 0.05,
) -> pd.DataFrame:
    """Each factor level's effect on the primary metric and on tree size, across data sets.

    Parameters
    ----------
    folds : DataFrame
        One row per trial, outer fold and arm (:func:`prunebench.results.load_folds`).
    levels : dict
        Factor -> levels in the study file's order (the first is the reference), or
        family -> such a mapping; ``None`` or ``"none"`` for an unlimited depth.
    metric : str or dict, optional
        The primary metric, or family -> metric; default ``error`` for classification,
        ``mse`` for regression. Families without the metric are left out.
    margin : float or dict, optional
        Practical-equivalence margin in the metric's loss units, or family -> margin;
        default :func:`prunebench.vocabulary.default_margin` of the metric.
    alpha : float, default=0.05
        Level of the tests; the intervals are ``1 - alpha``, the equivalence interval
        ``1 - 2 alpha``.

    Returns
    -------
    DataFrame
        :data:`EFFECT_COLUMNS`: per family, factor (``"pruning"`` included) and
        non-reference level, one row for the metric and one for ``n_leaves`` (its
        estimate and interval on the log scale, and ``ratio``/``ratio_low``/
        ``ratio_high`` = their exponentials).
    """
    check_decision("factor_effects", margin, alpha)
    out = []
    for family, m in _family_metric(folds, metric).items():
        rows = loss_frame(folds, family, m, levels)
        info = _fold_info(rows)
        fam_margin = for_family(margin, family)
        fam_margin = default_margin(m) if fam_margin is None else float(fam_margin)
        records = []
        for factor, code in _contrast_list(rows):
            level, reference = _level_names(rows, levels, family, factor, code)
            for value, name in (("loss", m), ("log_leaves", "n_leaves")):
                ref = 0 if factor == "pruning" else _reference_code(rows, factor)
                per = _per_dataset(_contrast_folds(rows, factor, code, ref, value), info)
                if per.empty:
                    continue
                r = combine(per, alpha)
                rec = {
                    "family": family,
                    "factor": factor,
                    "level": level,
                    "reference": reference,
                    "metric": name,
                    "n_datasets": int(r["k"]),
                    "margin": fam_margin if name == m else np.nan,
                    **{k: r[k] for k in ("estimate", "ci_low", "ci_high", "ci90_low", "ci90_high")},
                    **{k: r[k] for k in ("pi_low", "pi_high", "tau2", "i2", "p_value", "note")},
                }
                if name == "n_leaves":
                    rec.update(
                        ratio=float(np.exp(r["estimate"])),
                        ratio_low=float(np.exp(r["ci_low"])),
                        ratio_high=float(np.exp(r["ci_high"])),
                    )
                records.append(rec)
        if not records:  # no level has a paired reference (e.g. a search's configurations)
            continue
        table = pd.DataFrame(records)
        for name in (m, "n_leaves"):
            mask = table["metric"] == name
            table.loc[mask, "p_holm"] = holm(table.loc[mask, "p_value"].to_numpy())
        table["verdict"] = [_verdict(row, alpha) for row in table.itertuples(index=False)]
        out.append(table)
    if not out:
        return pd.DataFrame(columns=EFFECT_COLUMNS)
    result = pd.concat(out, ignore_index=True)
    return result.reindex(columns=EFFECT_COLUMNS)


def effect_records(table: pd.DataFrame) -> list[dict]:
    """:func:`factor_effects`' table as the rows of ``prunebench effects --json``.

    Each row has the keys of :data:`JSON_COLUMNS`; a tree-size row (``metric`` =
    ``n_leaves``) also has ``ratio``, ``ratio_low`` and ``ratio_high``.  NaN becomes
    None and numpy scalars Python ones, so integer levels stay integers.

    Parameters
    ----------
    table : DataFrame
        From :func:`factor_effects`.

    Returns
    -------
    list of dict
    """
    out = []
    for row in table.to_dict("records"):
        keys = JSON_COLUMNS + (_RATIO_COLUMNS if row["metric"] == "n_leaves" else [])
        record = {}
        for key in keys:
            value = row[key]
            if hasattr(value, "item") and not isinstance(value, str):
                value = value.item()
            if isinstance(value, float) and np.isnan(value):
                value = None
            record[key] = value
        out.append(record)
    return out


def _verdict(row, alpha: float) -> str:
    if row.metric == "n_leaves":
        if row.p_holm < alpha:
            return "smaller" if row.estimate < 0 else "larger"
        return "undecided"
    if -row.margin < row.ci90_low and row.ci90_high < row.margin:
        return "equivalent"
    if row.p_holm < alpha:
        return "better" if row.estimate < 0 else "worse"
    return "undecided"


def interaction_effects(
    folds: pd.DataFrame,
    levels: dict,
    metric: str | None = None,
    margin: float | None = None,
    alpha: float = 0.05,
) -> pd.DataFrame:
    """Each factor contrast on the primary metric within each level of another factor.

    The contrast of :func:`factor_effects` computed on the trials at one level of a
    second factor ``by`` (marginal over the remaining factors) and combined across
    data sets the same way. A (factor, level, by) triple is ``flagged`` when its
    within-level estimates differ by more than the margin (``spread`` = max - min):
    the best default for one factor then depends on the other.

    Parameters
    ----------
    folds, levels, metric, margin, alpha
        As :func:`factor_effects`.

    Returns
    -------
    DataFrame
        :data:`INTERACTION_COLUMNS`.
    """
    records = []
    for family, m in _family_metric(folds, metric).items():
        rows = loss_frame(folds, family, m, levels)
        info = _fold_info(rows)
        fam_margin = for_family(margin, family)
        fam_margin = default_margin(m) if fam_margin is None else float(fam_margin)
        lv = normalise_levels(levels, family)
        pruned = rows[rows["arm"] == "pruned"]
        by_factors = [f for f in FACTORS if pruned[f"code_{f}"].nunique() >= 2]
        for factor, code in _contrast_list(rows):
            level, reference = _level_names(rows, levels, family, factor, code)
            ref = 0 if factor == "pruning" else _reference_code(rows, factor)
            for by in by_factors:
                if by == factor:
                    continue
                found = []
                for by_code in sorted(pruned[f"code_{by}"].unique()):
                    within = rows[rows[f"code_{by}"] == by_code]
                    per = _per_dataset(_contrast_folds(within, factor, code, ref, "loss"), info)
                    if per.empty:
                        continue
                    r = combine(per, alpha)
                    found.append(
                        {
                            "family": family,
                            "factor": factor,
                            "level": level,
                            "reference": reference,
                            "metric": m,
                            "by": by,
                            "by_level": spelled_level(by, lv[by][by_code]) if by in lv else None,
                            "estimate": r["estimate"],
                            "ci_low": r["ci_low"],
                            "ci_high": r["ci_high"],
                            "n_datasets": int(r["k"]),
                            "margin": fam_margin,
                        }
                    )
                if len(found) < 2:
                    continue
                estimates = [f["estimate"] for f in found]
                spread = float(max(estimates) - min(estimates))
                for f in found:
                    f.update(spread=spread, flagged=bool(spread > fam_margin))
                records += found
    return pd.DataFrame(records).reindex(columns=INTERACTION_COLUMNS)
