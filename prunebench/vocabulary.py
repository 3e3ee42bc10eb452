"""The names prunebench speaks in, declared once: task families, factors, metrics, criteria.

Every other module takes these names from here; this module imports nothing of
the package, so anything may import it.  Adding a metric is one entry in
:data:`METRICS` plus its computation in :func:`prunebench.losses.fold_metrics`
(classification) or :mod:`prunebench.evaluate` (regression): the results
database's columns and views, the statistics, the command line and the exports
follow from the entry.

The registries are plain dicts read when they are used (never copied at import
time), so a test can add a throw-away entry with ``monkeypatch.setitem``.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass, fields

__all__ = [
    "CLASSIFICATION",
    "CLASS_WEIGHTS",
    "CRITERIA",
    "DEFAULT_METRIC",
    "FACTORS",
    "FAMILIES",
    "METRICS",
    "PRUNE_RISKS",
    "REGRESSION",
    "SELECT_BY",
    "THREE_DECIMAL_METRICS",
    "Configuration",
    "Factor",
    "Metric",
    "config_label",
    "counted",
    "default_margin",
    "default_metric",
    "factor_names",
    "family_of",
    "growth_factors",
    "higher_is_better",
    "integer_factors",
    "is_relative",
    "metric_names",
    "prune_risk_names",
    "spelled_level",
]

# ---- task families ---------------------------------------------------------------------

CLASSIFICATION = "classification"
REGRESSION = "regression"
#: the task families, in the order results are reported
FAMILIES = (CLASSIFICATION, REGRESSION)


def family_of(task: str) -> str:
    """The task family of a data set's task (``binary``, ``multiclass``, ``regression``).

    A family name is its own family, so ``family_of("classification")`` is
    ``"classification"``.
    """
    return REGRESSION if task == REGRESSION else CLASSIFICATION


# ---- criteria and pruning risks --------------------------------------------------------

#: growing criteria a study may name, per family (scikit-learn's names)
CRITERIA: dict[str, tuple[str, ...]] = {
    CLASSIFICATION: ("gini", "entropy", "log_loss"),
    REGRESSION: ("squared_error", "absolute_error", "poisson", "friedman_mse"),
}
#: risks R(t) the weakest-link pruning can use, per family
PRUNE_RISKS: dict[str, tuple[str, ...]] = {
    CLASSIFICATION: ("error", "impurity", "cost"),
    REGRESSION: ("squared_error", "impurity"),
}
#: losses the inner CV can choose alpha by, per family (``auc`` scored as 1 - AUC,
#: ``average_precision`` as 1 - AP, binary only); the same as ``scoring.SELECT_BY``
SELECT_BY: dict[str, tuple[str, ...]] = {
    CLASSIFICATION: ("error", "cost", "brier", "log_loss", "auc", "average_precision"),
    REGRESSION: ("mse",),
}
#: how the trees weight the classes while they grow (scikit-learn's ``class_weight``)
CLASS_WEIGHTS: dict[str, tuple[str, ...]] = {
    CLASSIFICATION: ("none", "balanced"),
    REGRESSION: ("none",),
}


def prune_risk_names() -> tuple[str, ...]:
    """Every pruning risk of any family, each once, classification's first."""
    return tuple(dict.fromkeys(r for family in FAMILIES for r in PRUNE_RISKS[family]))


# ---- factors ---------------------------------------------------------------------------


@dataclass(frozen=True)
class Factor:
    """One factor a study sweeps.

    Attributes
    ----------
    name : str
        Its key in a study file and its column in ``trials``.
    kind : str
        ``"choice"`` (a name from ``levels``), ``"int"`` (an integer >= ``least``),
        ``"depth"`` (an integer >= 1 or ``"none"``) or ``"rule"`` (``"min"`` or a k-SE rule).
    default : dict
        Family -> the level a study gets when it does not name the factor.
    changes_tree : bool
        Whether the factor changes the grown tree ``T_max`` (trials that differ only
        in factors that do not can share tree fits).
    noun : str
        What one level is called in messages ("a leaf size", "a pruning risk").
    levels : dict or None
        Family -> allowed levels, for ``"choice"`` factors.
    least : int
        Smallest level of an ``"int"`` factor.
    """

    name: str
    kind: str
    default: Mapping[str, object]
    changes_tree: bool
    noun: str
    levels: Mapping[str, tuple[str, ...]] | None = None
    least: int = 1


def _every_family(level: object) -> dict:
    return {CLASSIFICATION: level, REGRESSION: level}


#: the factors of a study, in the order of a configuration
FACTORS: dict[str, Factor] = {
    f.name: f
    for f in (
        Factor(
            "criterion",
            "choice",
            {CLASSIFICATION: "gini", REGRESSION: "squared_error"},
            True,
            "criterion",
            CRITERIA,
        ),
        Factor("max_depth", "depth", _every_family("none"), True, "depth"),
        Factor("min_samples_leaf", "int", _every_family(1), True, "leaf size", least=1),
        Factor("inner_folds", "int", _every_family(10), False, "fold count", least=2),
        Factor("rule", "rule", _every_family("1se"), False, "rule"),
        Factor(
            "prune_risk",
            "choice",
            {CLASSIFICATION: "error", REGRESSION: "squared_error"},
            False,
            "pruning risk",
            PRUNE_RISKS,
        ),
        Factor(
            "select_by",
            "choice",
            {CLASSIFICATION: "error", REGRESSION: "mse"},
            False,
            "loss to choose alpha by",
            SELECT_BY,
        ),
        Factor(
            "class_weight", "choice", _every_family("none"), True, "class weight", CLASS_WEIGHTS
        ),
    )
}


def factor_names() -> list[str]:
    """The factor names, in configuration order."""
    return list(FACTORS)


def growth_factors() -> list[str]:
    """The factors that change the grown tree (an unpruned tree is one level of each)."""
    return [f.name for f in FACTORS.values() if f.changes_tree]


def integer_factors() -> list[str]:
    """The factors whose levels are integers (``max_depth`` also "none", unlimited)."""
    return [f.name for f in FACTORS.values() if f.kind in ("int", "depth")]


def spelled_level(factor: str, value: object) -> object:
    """A level as the machine outputs (JSON, CSV) write it, one spelling per level.

    Integer levels as Python ints, an unlimited ``max_depth`` as None (JSON ``null``,
    an empty CSV field), no class weighting as ``"none"`` (as a study file spells it,
    whether the level arrives as ``"none"``, None or NaN); other levels unchanged.

    Parameters
    ----------
    factor : str
        A factor name (another name returns ``value`` with only NaN made None).
    value : object

    Returns
    -------
    object

    Examples
    --------
    >>> spelled_level("inner_folds", 5.0), spelled_level("class_weight", None)
    (5, 'none')
    """
    value = _plain(value)
    if factor == "class_weight":
        return "none" if value is None else value
    if factor == "max_depth" and isinstance(value, str) and value.lower() == "none":
        return None
    if factor in FACTORS and FACTORS[factor].kind in ("int", "depth") and value is not None:
        return int(value)
    return value


# ---- metrics ---------------------------------------------------------------------------


@dataclass(frozen=True)
class Metric:
    """One test metric stored for every outer fold and arm.

    Attributes
    ----------
    name : str
        Its column in ``folds`` and its name on the command line.
    family : str
        ``"classification"`` or ``"regression"``.
    higher_is_better : bool
        False for a loss.
    margin : float
        The default margin of practical equivalence, in the metric's units, or as a
        share of the reference loss when ``relative``.
    relative : bool
        Whether ``margin`` is relative (losses whose scale depends on the data set).
    """

    name: str
    family: str
    higher_is_better: bool
    margin: float
    relative: bool = False


#: every stored metric, in column order
METRICS: dict[str, Metric] = {
    m.name: m
    for m in (
        Metric("error", CLASSIFICATION, False, 0.01),
        Metric("accuracy", CLASSIFICATION, True, 0.01),
        Metric("balanced_accuracy", CLASSIFICATION, True, 0.01),
        Metric("log_loss", CLASSIFICATION, False, 0.02),
        Metric("brier", CLASSIFICATION, False, 0.01),
        # ROC AUC: binary, or the one-vs-rest macro average over the classes
        Metric("auc", CLASSIFICATION, True, 0.01),
        # average precision: binary data sets only (NULL for three or more classes)
        Metric("average_precision", CLASSIFICATION, True, 0.01),
        # Murphy's (1973) decomposition of ``brier`` over the tree's distinct leaf
        # probabilities: calibration = the reliability term, refinement = uncertainty -
        # resolution, so brier = brier_calibration + brier_refinement
        Metric("brier_calibration", CLASSIFICATION, False, 0.005),
        Metric("brier_refinement", CLASSIFICATION, False, 0.01),
        # mean cost per row under the study's loss matrix (0-1 loss, = error, without one)
        Metric("expected_cost", CLASSIFICATION, False, 0.02, relative=True),
        Metric("mse", REGRESSION, False, 0.01, relative=True),
        Metric("mae", REGRESSION, False, 0.01, relative=True),
        Metric("r2", REGRESSION, True, 0.01),
    )
}
#: metrics the tables and the report write with three decimals (rates, probabilities,
#: log loss, R²); the others (losses in the data's units, small decompositions) by size
THREE_DECIMAL_METRICS = frozenset(
    {"error", "accuracy", "balanced_accuracy", "brier", "log_loss", "auc", "r2"}
)
#: the metric statistics use when none is named, per family
DEFAULT_METRIC = {CLASSIFICATION: "error", REGRESSION: "mse"}


def metric_names(family: str | None = None) -> list[str]:
    """The stored metrics, in column order; only one family's when ``family`` is given."""
    return [m.name for m in METRICS.values() if family is None or m.family == family]


def default_metric(task: str) -> str:
    """``error`` for classification tasks, ``mse`` for regression."""
    return DEFAULT_METRIC[family_of(task)]


def higher_is_better(metric: str) -> bool:
    """Whether larger values of a metric are better (False for a loss)."""
    return METRICS[metric].higher_is_better


def default_margin(metric: str) -> float:
    """The default margin of practical equivalence of a metric (DESIGN.md "Decision").

    In the metric's units (0.01 of error, accuracy and Brier, 0.02 of log loss), or
    as a share of the data set's unpruned loss when :func:`is_relative` (1% for MSE and
    MAE).  The one source of margins: effects, the recommendation, ``compare`` and
    ``rank`` all read it.
    """
    return METRICS[metric].margin


def is_relative(metric: str) -> bool:
    """Whether a metric's margin and contrasts are relative to the unpruned loss."""
    return METRICS[metric].relative


# ---- configurations --------------------------------------------------------------------

_SHORT = {
    "entropy": "entr",
    "log_loss": "logl",
    "squared_error": "sq",
    "friedman_mse": "fmse",
    "absolute_error": "abs",
    "poisson": "pois",
    "error": "err",
    "impurity": "imp",
    "gini": "gini",
    "balanced": "bal",
    "average_precision": "ap",
}


def _plain(value: object) -> object:
    """None for a missing level (None, NaN, pandas' NA), the value otherwise."""
    if value is None:
        return None
    try:
        if value != value or (isinstance(value, float) and math.isnan(value)):
            return None
    except TypeError:  # pandas.NA refuses to say whether it equals itself
        return None
    return value


# levels a label leaves out: the defaults, which every study had before these factors
_DEFAULT_LEVELS = {"select_by": ("error", "mse"), "class_weight": ("none",)}


@dataclass(frozen=True)
class Configuration:
    """One configuration: the level of every factor.

    ``rule == "unpruned"`` names the unpruned tree of the growth levels; its
    ``inner_folds``, ``prune_risk`` and ``select_by`` are None.  ``max_depth`` None is
    unlimited.  ``select_by`` and ``class_weight`` are None when not known (a row
    or tuple without them); labels leave out their default levels.
    """

    criterion: str
    max_depth: int | None
    min_samples_leaf: int
    inner_folds: int | None
    rule: str
    prune_risk: str | None
    select_by: str | None = None
    class_weight: str | None = None

    @classmethod
    def of(cls, levels) -> Configuration:
        """The configuration of a mapping or row with the factor names (missing = None)."""
        if isinstance(levels, Configuration):
            return levels
        if isinstance(levels, tuple):
            return cls(*(_plain(v) for v in levels))
        return cls(
            **{f.name: _plain(levels[f.name]) if f.name in levels else None for f in fields(cls)}
        )

    @property
    def pruned(self) -> bool:
        """Whether this is a pruned configuration (not an unpruned tree)."""
        return self.rule != "unpruned"

    def levels(self) -> dict:
        """The levels as a dict, in factor order."""
        return {f.name: getattr(self, f.name) for f in fields(self)}

    def key(self) -> tuple:
        """The levels as a plain tuple in factor order (a table's column key)."""
        return tuple(getattr(self, f.name) for f in fields(self))

    def unpruned(self) -> Configuration:
        """The unpruned tree with the same growth levels."""
        return Configuration(
            self.criterion,
            self.max_depth,
            self.min_samples_leaf,
            None,
            "unpruned",
            None,
            None,
            self.class_weight,
        )

    def record(self) -> dict:
        """The levels as the machine outputs write them (:func:`spelled_level`).

        Integer levels as ints, an unlimited depth as None, no class weighting as
        ``"none"``; an unpruned tree's ``inner_folds``, ``prune_risk`` and
        ``select_by`` stay None.
        """
        return {name: spelled_level(name, value) for name, value in self.levels().items()}

    def shows(self, factor: str) -> bool:
        """Whether labels show this configuration's ``select_by`` or ``class_weight``.

        They do when the level is known and not the default (``error`` / ``mse``,
        ``none``), the levels every study had before these factors.
        """
        return getattr(self, factor) not in (None, *_DEFAULT_LEVELS[factor])

    def label(self, named: bool = False) -> str:
        """A short label, e.g. ``"entr d=none l=5 k=10 1se err"``.

        Levels other than the defaults add ``cw=bal`` (class weight) after the growth
        levels and ``by=auc`` (the loss that chose alpha) at the end.  Two
        configurations that differ in any level have different labels.

        Parameters
        ----------
        named : bool, default=False
            The longer form ``recommend`` prints, levels unabbreviated and named:
            ``"entropy depth=none leaf=5 class_weight=balanced k=10 1se error
            select_by=auc"``.
        """
        depth = "none" if self.max_depth is None else int(self.max_depth)
        short = (lambda v: v) if named else (lambda v: _SHORT.get(v, v))
        keys = ("depth", "leaf", "class_weight", "select_by") if named else ("d", "l", "cw", "by")
        head = f"{short(self.criterion)} {keys[0]}={depth} {keys[1]}={int(self.min_samples_leaf)}"
        if self.shows("class_weight"):
            head += f" {keys[2]}={short(self.class_weight)}"
        if not self.pruned:
            return f"{head} unpruned"
        label = f"{head} k={int(self.inner_folds)} {self.rule} {short(self.prune_risk)}"
        if self.shows("select_by"):
            label += f" {keys[3]}={short(self.select_by)}"
        return label


def config_label(config) -> str:
    """A short label of a configuration given as a :class:`Configuration`, tuple or mapping."""
    return Configuration.of(config).label()


# ---- words in messages -------------------------------------------------------------------


def counted(n: int, noun: str, plural: str | None = None) -> str:
    """``"1 row"``, ``"2 rows"``: a count with its noun in the number it needs.

    Parameters
    ----------
    n : int
    noun : str
        The singular (``"row"``, ``"class"``, ``"study"``).
    plural : str, optional
        The plural when English spells it otherwise (``"leaves"``); by default ``-es``
        after s, x, z, ch and sh, ``-ies`` for a consonant and y, else ``-s``.
    """
    if n == 1:
        return f"{n} {noun}"
    if plural is None:
        if noun.endswith(("s", "x", "z", "ch", "sh")):
            plural = noun + "es"
        elif noun.endswith("y") and noun[-2:-1] not in tuple("aeiou"):
            plural = noun[:-1] + "ies"
        else:
            plural = noun + "s"
    return f"{n} {plural}"
