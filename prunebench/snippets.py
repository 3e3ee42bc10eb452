"""The recommendation as code a team can paste: an estimator and a study-file fragment.

Both are built from a configuration's levels and the vocabulary, so a factor
added there shows in the fragment.  :data:`CAUTION` is the note every
recommendation carries, and :func:`recommendation_records` the JSON shape of
``prunebench recommend --json``.  :func:`with_study` adds what the stored study
file says beyond the levels (its loss matrix, priors and smoothing, and whether
its data are the team's own), so the estimator builds the configuration the
study chose and the caution fits the data.
"""

from __future__ import annotations

import tomllib

from .vocabulary import (
    CLASSIFICATION,
    FACTORS,
    REGRESSION,
    Configuration,
    family_of,
    growth_factors,
)

__all__ = [
    "CAUTION",
    "CAUTION_OWN_DATA",
    "ESTIMATORS",
    "caution_for",
    "decision_sentence",
    "long_label",
    "rule_words",
    "estimator_block",
    "estimator_for",
    "estimator_params",
    "own_data",
    "plain_json",
    "recommendation_records",
    "study_fragment",
    "with_study",
]

CAUTION = (
    "A default chosen on benchmark data is a starting point. Validate it on your own data, and "
    "where the trees steer decisions about people (credit, health, insurance) follow your "
    "organisation's model-risk, fairness and legal review."
)

CAUTION_OWN_DATA = (
    "This default was chosen on your own data, so it fits the data you have today: re-run the "
    "study when the data drift or the population changes, keep a held-out check after "
    "deployment, and where the trees steer decisions about people (credit, health, insurance) "
    "follow your organisation's model-risk, fairness and legal review."
)


def caution_for(own_data: bool) -> str:
    """The caution worded for benchmark data (False) or for the team's own data (True)."""
    return CAUTION_OWN_DATA if own_data else CAUTION


def own_data(study_text: str) -> bool:
    """Whether the study's data sets are the team's own (every one described by a manifest)."""
    datasets = tomllib.loads(study_text).get("datasets", [])
    return bool(datasets) and all(isinstance(d, dict) for d in datasets)


_RISK_WORDS = {
    "error": "misclassification",
    "impurity": "impurity",
    "cost": "misclassification cost",
    "squared_error": "squared error",
}
#: the losses the inner CV can choose alpha by, in words
_LOSS_WORDS = {
    "error": "misclassification rate",
    "cost": "expected cost",
    "brier": "Brier score",
    "log_loss": "log loss",
    "auc": "AUC",
    "average_precision": "average precision",
    "mse": "MSE",
}
_CRITERION_WORDS = {
    "log_loss": "log loss",
    "squared_error": "squared error",
    "absolute_error": "absolute error",
    "friedman_mse": "Friedman's MSE",
}


def rule_words(rule: str) -> str:
    """A selection rule in words: ``"min"`` -> "the minimum rule", ``"1se"`` -> ...

    Parameters
    ----------
    rule : str
        ``"min"``, a k-SE rule (``"1se"``, ``"0.5se"``) or a fixed rule (``"fixed0.01"``).

    Returns
    -------
    str
    """
    if rule == "min":
        return "the minimum rule"
    if rule.endswith("se"):
        k = rule[:-2]
        return (
            "the one-standard-error rule" if k in ("1", "1.0") else f"the {k}-standard-error rule"
        )
    if rule.startswith("fixed"):
        return f"a fixed alpha of {rule[5:]} × the root's risk"
    return rule


def long_label(config) -> str:
    """A configuration written out, e.g. "entropy · no cap · leaf ≥ 5 · 10-fold · min · error risk".

    A class weight and a loss to choose alpha by other than the defaults are written
    too ("balanced class weights" after the leaf size, "alpha by AUC" at the end), so
    configurations that differ in any level read differently.

    Parameters
    ----------
    config : Configuration, tuple or mapping

    Returns
    -------
    str
    """
    c = Configuration.of(config)
    depth = "no cap" if c.max_depth is None else f"depth ≤ {int(c.max_depth)}"
    head = [
        _CRITERION_WORDS.get(c.criterion, c.criterion),
        depth,
        f"leaf ≥ {int(c.min_samples_leaf)}",
    ]
    if c.shows("class_weight"):
        head.append(f"{c.class_weight} class weights")
    if not c.pruned:
        return " · ".join([*head, "unpruned"])
    folds = "no CV" if str(c.rule).startswith("fixed") else f"{int(c.inner_folds)}-fold"
    tail = [folds, str(c.rule), f"{str(c.prune_risk).replace('_', ' ')} risk"]
    if c.shows("select_by"):
        tail.append(f"alpha by {_LOSS_WORDS.get(c.select_by, c.select_by)}")
    return " · ".join([*head, *tail])


def decision_sentence(config) -> str:
    """The recommended default in one plain sentence.

    Parameters
    ----------
    config : Configuration, tuple or mapping

    Returns
    -------
    str
        E.g. "Grow with entropy, no depth cap, leaves of at least 5 rows; choose alpha by
        10-fold CV with the minimum rule on misclassification."

    Examples
    --------
    >>> decision_sentence({"criterion": "gini", "max_depth": 4, "min_samples_leaf": 1,
    ...     "inner_folds": None, "rule": "unpruned", "prune_risk": None})
    'Grow with gini, a depth cap of 4, leaves of at least 1 row; do not prune.'
    """
    c = Configuration.of(config)
    depth = "no depth cap" if c.max_depth is None else f"a depth cap of {int(c.max_depth)}"
    leaf = int(c.min_samples_leaf)
    grow = (
        f"Grow with {_CRITERION_WORDS.get(c.criterion, c.criterion)}, {depth}, "
        f"leaves of at least {leaf} row{'s' if leaf != 1 else ''}"
    )
    if c.shows("class_weight"):
        grow += f", {c.class_weight} class weights"
    if not c.pruned:
        return grow + "; do not prune."
    risk = _RISK_WORDS.get(c.prune_risk, c.prune_risk)
    scored = (
        f", scoring the held-out folds by {_LOSS_WORDS.get(c.select_by, c.select_by)}"
        if c.shows("select_by")
        else ""
    )
    if str(c.rule).startswith("fixed"):
        return f"{grow}; prune with {rule_words(c.rule)} (no CV), on {risk}."
    return (
        f"{grow}; choose alpha by {int(c.inner_folds)}-fold CV with {rule_words(c.rule)} on "
        f"{risk}{scored}."
    )


#: family -> (prunebench's pruned estimator, scikit-learn's plain tree)
ESTIMATORS = {
    CLASSIFICATION: ("PrunedTreeClassifier", "DecisionTreeClassifier"),
    REGRESSION: ("PrunedTreeRegressor", "DecisionTreeRegressor"),
}


def estimator_for(task: str) -> type:
    """The pruned-tree estimator class for a task (``binary``, ``multiclass``, ``regression``).

    Parameters
    ----------
    task : str
        A data set's task or a task family.

    Returns
    -------
    type
        :class:`~prunebench.PrunedTreeClassifier` or :class:`~prunebench.PrunedTreeRegressor`.
    """
    from . import estimators  # scikit-learn: imported only when a tree is wanted

    return getattr(estimators, ESTIMATORS[family_of(task)][0])


def _number(value: float) -> int | float:
    return int(value) if float(value).is_integer() else float(value)


def _plain_costs(entry: dict) -> dict:
    """A data set's costs as estimator arguments: a list loss matrix, priors other than "data"."""
    out = {}
    if entry.get("loss_matrix") is not None:
        out["loss_matrix"] = [[_number(v) for v in row] for row in entry["loss_matrix"]]
    priors = entry.get("priors", "data")
    if not (isinstance(priors, str) and priors == "data"):
        out["priors"] = priors if isinstance(priors, str) else [_number(p) for p in priors]
    return out


def _study_costs(rec: dict) -> dict:
    """Data set -> its estimator cost arguments, for the recommendation's data sets."""
    costs = rec.get("costs") or {}
    return {d: _plain_costs(costs.get(d, {})) for d in rec.get("datasets") or sorted(costs)}


def estimator_params(rec: dict, dataset: str | None = None) -> dict:
    """The arguments of the recommended estimator, as :func:`estimator_block` passes them.

    Parameters
    ----------
    rec : dict
        One entry of :func:`prunebench.recommend.recommend` (``family``, ``config``),
        with the study's ``costs`` and ``smoothing`` when :func:`with_study` added them.
    dataset : str, optional
        Whose loss matrix and priors to take when the study's costs differ by data
        set (default: the first data set).

    Returns
    -------
    dict
        Parameter -> value for ``PrunedTreeClassifier`` / ``PrunedTreeRegressor`` (or,
        for an unpruned winner, scikit-learn's plain tree); a pruned classifier also
        gets ``loss_matrix`` (in ``classes_`` order), ``priors`` and ``smoothing``
        when the study set them.
    """
    config = Configuration.of(rec["config"])
    classification = rec["family"] == CLASSIFICATION
    params = {
        "criterion": config.criterion,
        "max_depth": None if config.max_depth is None else int(config.max_depth),
        "min_samples_leaf": int(config.min_samples_leaf),
    }
    if classification:
        weight = config.class_weight
        params["class_weight"] = None if weight in (None, "none") else weight
    if not config.pruned:
        return params
    params["prune_risk"] = config.prune_risk
    params["cv"] = int(config.inner_folds)
    params["rule"] = config.rule
    if config.select_by is not None:
        params["select_by"] = config.select_by
    if classification:
        costs = _study_costs(rec)
        if costs:
            params.update(costs[dataset if dataset in costs else next(iter(costs))])
        if rec.get("smoothing") is not None:
            params["smoothing"] = rec["smoothing"]
    return params


def _arguments(params: dict, notes: dict | None = None) -> str:
    """``name=value,`` lines; ``notes`` name -> comment lines written above an argument."""
    notes = notes or {}
    return "".join(
        "".join(f"    # {line}\n" for line in notes.get(k, [])) + f"    {k}={v!r},\n"
        for k, v in params.items()
    )


def _class_order(rec: dict) -> list[str]:
    """Comment lines: the classes_ order the loss matrix is written in, per data set."""
    import textwrap

    costs = rec.get("costs") or {}
    orders = {d: ", ".join(map(str, c["classes"])) for d, c in costs.items()}
    common = list(dict.fromkeys(orders.values()))
    lines = ["the study's costs: rows true class, columns predicted, in classes_ order"]
    if len(common) == 1:
        return [lines[0] + ":", "  " + common[0]]
    for o in common:
        named = ", ".join(d for d in orders if orders[d] == o)
        lines += textwrap.wrap(f"{o} ({named})", 78, initial_indent="  ", subsequent_indent="    ")
    return lines


def estimator_block(rec: dict) -> str:
    """Python that builds the recommended estimator.

    Every level of the configuration is passed (``select_by`` and ``class_weight``
    too), and for a classifier the study's loss matrix, priors and smoothing, so the
    estimator is the configuration the study chose, not the same levels under 0-1
    loss.  When the study's costs differ by data set, a ``COSTS`` table holds each
    data set's and the model takes the first one's.

    Parameters
    ----------
    rec : dict
        One entry of :func:`prunebench.recommend.recommend` (``family`` and ``config``),
        with ``costs`` and ``smoothing`` when :func:`with_study` added them.

    Returns
    -------
    str
        An import and ``model = ...``; a plain scikit-learn tree when no pruning won.
    """
    config = Configuration.of(rec["config"])
    pruned, plain = ESTIMATORS[rec["family"]]
    params = estimator_params(rec)
    if not config.pruned:
        return (
            f"from sklearn.tree import {plain}\n\nmodel = {plain}(\n"
            f"{_arguments(params)})  # no pruning won"
        )
    costs = _study_costs(rec) if rec["family"] == CLASSIFICATION else {}
    distinct = {repr(c) for c in costs.values()}
    if len(distinct) > 1:
        first = next(iter(costs))
        for key in ("loss_matrix", "priors"):
            params.pop(key, None)
        table = "".join(f"    {d!r}: {c!r},\n" for d, c in costs.items())
        return (
            f"from prunebench import {pruned}\n\n"
            + "".join(f"# {line}\n" for line in _class_order(rec))
            + "# (they differ by data set: pass your data set's)\n"
            f"COSTS = {{\n{table}}}\n\n"
            f"model = {pruned}(\n{_arguments(params)}    **COSTS[{first!r}],  # your data set's\n)"
        )
    notes = {"loss_matrix": _class_order(rec)} if "loss_matrix" in params else {}
    return f"from prunebench import {pruned}\n\nmodel = {pruned}(\n{_arguments(params, notes)})"


def _toml_level(value: object) -> str:
    if value is None:
        return '"none"'
    if isinstance(value, str):
        return f'"{value}"'
    return str(int(value))


def study_fragment(rec: dict) -> str:
    """The recommended levels as a ``[factors.<family>]`` table of a study file.

    Every factor is named (``select_by`` and ``class_weight`` too, at their defaults),
    so the table pasted into a study that sweeps them gives the recommended levels
    alone.  An unpruned winner names only the factors that change the grown tree.
    """
    config = Configuration.of(rec["config"])
    levels = config.record()
    names = list(FACTORS) if config.pruned else growth_factors()
    if levels.get("select_by") is None and "select_by" in names:
        levels["select_by"] = FACTORS["select_by"].default[rec["family"]]
    lines = [f"[factors.{rec['family']}]"]
    lines += [f"{name} = [{_toml_level(levels[name])}]" for name in names]
    return "\n".join(lines)


def plain_json(value):
    """A nested value made JSON-ready: NaN -> None, numpy scalars -> Python scalars."""
    import math

    if isinstance(value, dict):
        return {k: plain_json(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [plain_json(v) for v in value]
    if hasattr(value, "item") and not isinstance(value, str):
        value = value.item()
    if isinstance(value, float) and math.isnan(value):
        return None
    return value


_RECORD_KEYS = (
    "family",
    "decided",
    "reason",
    "metric",
    "margin",
    "alpha",
    "config",
    "label",
    "mean_loss",
    "mean_leaves",
    "best",
    "acceptable",
    "held_out",
    "trials",
    "datasets",
    "n_configurations",
    "stability",
)


def with_study(recs: list[dict], study_text: str) -> list[dict]:
    """The recommendations with what the stored study file says beyond the levels.

    Parameters
    ----------
    recs : list of dict
        From :func:`prunebench.recommend.recommend` (or ``Results.recommendation``).
    study_text : str
        The study file as the results database stores it.

    Returns
    -------
    list of dict
        Copies of ``recs``, each with ``own_data`` (:func:`own_data`), ``costs`` (data
        set -> ``classes``, ``loss_matrix``, ``priors``, for the family's data sets
        with costs) and ``smoothing``; what :func:`estimator_block` and
        :func:`recommendation_records` read.
    """
    from .study_costs import costs_of_text, smoothing_of_text

    mine = own_data(study_text)
    smoothing = smoothing_of_text(study_text)
    out = []
    for r in recs:
        classification = r["family"] == CLASSIFICATION
        costs = costs_of_text(study_text, list(r.get("datasets") or [])) if classification else {}
        out.append(
            {
                **r,
                "own_data": mine,
                "costs": costs,
                "smoothing": smoothing if classification else None,
            }
        )
    return out


def recommendation_records(recs: list[dict]) -> list[dict]:
    """The recommendations as JSON-ready records, with the code to paste and the caution.

    Parameters
    ----------
    recs : list of dict
        From :func:`prunebench.recommend.recommend` (or ``Results.recommendation``),
        best through :func:`with_study` (the costs the estimator needs, and whether the
        data are the team's own).

    Returns
    -------
    list of dict
        Per family the keys of :func:`~prunebench.recommend.recommend` (``config``,
        ``label``, ``mean_loss``, ``mean_leaves``, ``margin``, ``best``, ``acceptable``,
        ``held_out``, ``trials``, ``decided``, ``reason``, ``stability``, ...; NaN as
        None, integer levels as integers, no class weighting as ``"none"``), plus
        ``estimator`` and ``study_fragment`` of the recommended configuration (None
        when undecided), ``own_data`` and the ``caution`` worded for it.
    """
    out = []
    for r in recs:
        record = plain_json({k: r.get(k) for k in _RECORD_KEYS})
        chosen = r.get("config") is not None
        record["estimator"] = estimator_block(r) if chosen else None
        record["study_fragment"] = study_fragment(r) if chosen else None
        record["own_data"] = bool(r.get("own_data", False))
        record["caution"] = "Caution: " + caution_for(record["own_data"])
        out.append(record)
    return out
