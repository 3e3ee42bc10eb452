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
    "ESTIMATORS",
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
