"""The recommendation as code a team can paste: an estimator and a study-file fragment.

Both are built from a configuration's levels and the vocabulary, so a factor
added there shows in the fragment.  :data:`CAUTION` is the note every
recommendation carries, and :func:`recommendation_records` the JSON shape of
``prunebench recommend --json``.
"""

from __future__ import annotations

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
    "plain_json",
    "recommendation_records",
    "study_fragment",
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


_RISK_WORDS = {
    "error": "misclassification",
    "impurity": "impurity",
    "cost": "misclassification cost",
    "squared_error": "squared error",
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
    if not c.pruned:
        return " · ".join([*head, "unpruned"])
    folds = "no CV" if str(c.rule).startswith("fixed") else f"{int(c.inner_folds)}-fold"
    return " · ".join([*head, folds, str(c.rule), f"{str(c.prune_risk).replace('_', ' ')} risk"])


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
    if not c.pruned:
        return grow + "; do not prune."
    risk = _RISK_WORDS.get(c.prune_risk, c.prune_risk)
    if str(c.rule).startswith("fixed"):
        return f"{grow}; prune with {rule_words(c.rule)} (no CV), on {risk}."
    return (
        f"{grow}; choose alpha by {int(c.inner_folds)}-fold CV with {rule_words(c.rule)} on {risk}."
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


def _growth_arguments(config: Configuration) -> str:
    depth = "None" if config.max_depth is None else int(config.max_depth)
    weights = (
        f"    class_weight={config.class_weight!r},\n"
        if config.class_weight not in (None, "none")
        else ""
    )
    return (
        f"    criterion={config.criterion!r},\n    max_depth={depth},\n"
        f"    min_samples_leaf={int(config.min_samples_leaf)},\n{weights}"
    )


def estimator_block(rec: dict) -> str:
    """Python that builds the recommended estimator.

    Parameters
    ----------
    rec : dict
        One entry of :func:`prunebench.recommend.recommend` (``family`` and ``config``).

    Returns
    -------
    str
        An import and ``model = ...``; a plain scikit-learn tree when no pruning won.
    """
    config = Configuration.of(rec["config"])
    pruned, plain = ESTIMATORS[rec["family"]]
    select_by = (
        f"    select_by={config.select_by!r},\n"
        if config.select_by not in (None, "error", "mse")
        else ""
    )
    if not config.pruned:
        return (
            f"from sklearn.tree import {plain}\n\nmodel = {plain}(\n"
            f"{_growth_arguments(config)})  # no pruning won"
        )
    return (
        f"from prunebench import {pruned}\n\nmodel = {pruned}(\n{_growth_arguments(config)}"
        f"    prune_risk={config.prune_risk!r},\n    cv={int(config.inner_folds)},\n"
        f"    rule={config.rule!r},\n{select_by})"
    )


def _toml_level(value: object) -> str:
    if value is None:
        return '"none"'
    if isinstance(value, str):
        return f'"{value}"'
    return str(int(value))


def study_fragment(rec: dict) -> str:
    """The recommended levels as a ``[factors.<family>]`` table of a study file.

    An unpruned winner names only the factors that change the grown tree.
    """
    config = Configuration.of(rec["config"])
    levels = config.levels()
    names = list(FACTORS) if config.pruned else growth_factors()
    lines = [f"[factors.{rec['family']}]"]
    # the loss that chose alpha and the class weights only when a study must name them
    names = [
        n
        for n in names
        if n not in ("select_by", "class_weight") or levels[n] not in (None, "none", "error", "mse")
    ]
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


def recommendation_records(recs: list[dict]) -> list[dict]:
    """The recommendations as JSON-ready records, with the code to paste and the caution.

    Parameters
    ----------
    recs : list of dict
        From :func:`prunebench.recommend.recommend` (or ``Results.recommendation``).

    Returns
    -------
    list of dict
        Per family the keys of :func:`~prunebench.recommend.recommend` (``config``,
        ``label``, ``mean_loss``, ``mean_leaves``, ``margin``, ``best``, ``acceptable``,
        ``held_out``, ``trials``, ``decided``, ``reason``, ``stability``, ...; NaN as
        None, integer levels as integers), plus ``estimator`` and ``study_fragment`` of
        the recommended configuration (None when undecided) and ``caution``.
    """
    out = []
    for r in recs:
        record = plain_json({k: r.get(k) for k in _RECORD_KEYS})
        chosen = r.get("config") is not None
        record["estimator"] = estimator_block(r) if chosen else None
        record["study_fragment"] = study_fragment(r) if chosen else None
        record["caution"] = "Caution: " + CAUTION
        out.append(record)
    return out
