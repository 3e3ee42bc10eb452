"""A study's model: the validated :class:`Study`, its trials and trial groups.

:mod:`prunebench.study` builds a :class:`Study` from a study file; a study expands
into :class:`Trial` objects (one configuration on one data set), grouped into
:class:`TrialGroup` objects that share every grown tree: the same data set and
the same level of every factor the vocabulary marks as changing the tree
(:func:`prunebench.vocabulary.growth_factors`).  The other factors (inner fold
count, pruning risk, rule, CV loss) change only what is computed from the trees.
"""

from __future__ import annotations

import hashlib
import itertools
import json
from dataclasses import dataclass, field
from pathlib import Path

from .datasets import LoadedDataset
from .vocabulary import FACTORS as _SPECS
from .vocabulary import factor_names, family_of, growth_factors

__all__ = ["FACTORS", "SearchSpec", "Study", "Trial", "TrialGroup", "growth_id"]

#: the factor names, in configuration order
FACTORS = tuple(factor_names())


@dataclass(frozen=True)
class Trial:
    """One configuration on one data set.

    Attributes
    ----------
    trial_id : str
        Deterministic id from the study name, the data set's fingerprint and the levels.
    group_id : str
        Id of the trials that share one inner-CV curve (they differ only in ``rule``);
        the ``curves`` table is keyed by it.  The trials that share the grown trees
        form a :class:`TrialGroup`.
    dataset : str
        The data set's key in the study (its name, or name plus parameters).
    criterion, max_depth, min_samples_leaf, inner_folds, rule, prune_risk
        The levels; ``max_depth`` is None for unlimited.
    select_by : str
        The loss the inner CV chooses alpha by (``error`` or ``mse`` by default).
    class_weight : str
        ``"none"`` or ``"balanced"``: how the trees weight the classes as they grow.
    """

    trial_id: str
    group_id: str
    dataset: str
    criterion: str
    max_depth: int | None
    min_samples_leaf: int
    inner_folds: int
    rule: str
    prune_risk: str
    select_by: str = "error"
    class_weight: str = "none"

    def levels(self) -> dict:
        """The factor levels as a dict."""
        return {f: getattr(self, f) for f in FACTORS if hasattr(self, f)}

    def growth(self) -> tuple:
        """The levels of the factors that change the grown tree, as ``(name, level)`` pairs."""
        return tuple((f, getattr(self, f)) for f in growth_factors() if hasattr(self, f))


def growth_id(trial: Trial, study_name: str, fingerprint: str) -> str:
    """Id of the trials that share the grown trees: study, data set and growth levels."""
    return _hash(study_name, fingerprint, "growth", *trial.growth())


@dataclass(frozen=True)
class TrialGroup:
    """Trials that share every grown tree: same data set and growth levels.

    Attributes
    ----------
    group_id : str
        Id of the group (study, data set fingerprint and growth levels).
    dataset : str
    growth : tuple of (str, object)
        The level of every factor that changes the tree, in vocabulary order.
    trials : tuple of Trial
    """

    group_id: str
    dataset: str
    growth: tuple
    trials: tuple[Trial, ...]

    @classmethod
    def of(cls, trials: list[Trial], group_id: str | None = None) -> TrialGroup:
        """The group of trials that share the grown trees (the first one's growth levels)."""
        t = trials[0]
        return cls(
            group_id=t.group_id if group_id is None else group_id,
            dataset=t.dataset,
            growth=t.growth(),
            trials=tuple(trials),
        )

    def __getattr__(self, name: str):
        # the growth levels read as attributes: group.criterion, group.max_depth, ...
        for factor, level in self.__dict__.get("growth", ()):
            if factor == name:
                return level
        # another factor reads as an attribute when every trial of the group has one level
        if name in FACTORS:
            levels = {getattr(t, name) for t in self.__dict__.get("trials", ())}
            if len(levels) == 1:
                return levels.pop()
        raise AttributeError(name)

    def growth_levels(self) -> dict:
        """The growth levels as a dict."""
        return dict(self.growth)

    @property
    def rules(self) -> list[str]:
        """The rules of the group's trials, each once, in trial order."""
        return list(dict.fromkeys(t.rule for t in self.trials))

    @property
    def inner_folds_levels(self) -> list[int]:
        """The distinct inner fold counts of the group's trials, in trial order."""
        return list(dict.fromkeys(t.inner_folds for t in self.trials))


@dataclass(frozen=True)
class SearchSpec:
    """A search over configurations instead of the full grid.

    Attributes
    ----------
    sampler : {"tpe", "random", "grid"}
    configurations : int
        Configurations to evaluate (each on every data set of the study).
    early_stopping : bool
        Stop a configuration that is clearly poor after a few data sets (Optuna's
        median pruner; "early stopping" here, so it is not confused with tree pruning).
    seed : int
    space : dict
        Name -> ``("choices", [...])``, ``("int", low, high, log)`` or
        ``("float", low, high)``; names are ``criterion``, ``max_depth`` ("none" allowed
        among choices), ``min_samples_leaf``, ``inner_folds``, ``se`` (the k of the
        k-SE rule, a float) and ``prune_risk``.
    """

    sampler: str
    configurations: int
    early_stopping: bool
    seed: int
    space: dict


@dataclass
class Study:
    """A validated study.

    Attributes
    ----------
    name, description : str
    seed : int
    repeats, folds : int
        The outer scheme.
    datasets : dict
        Study key -> :class:`~prunebench.datasets.LoadedDataset`.
    dataset_specs : dict
        Study key -> (registry name, parameters, manifest path or None), for workers
        that load by name.
    factors : dict
        Task ("classification"/"regression") -> factor -> levels.
    text : str
        The study file's text.
    path : Path or None
    database : Path or None
        From the file, resolved against its folder.
    search : SearchSpec or None
        The ``[search]`` section, when the study searches instead of sweeping.
    time_limit : float or None
        Seconds each trial group may take (``time_limit``); a group past it is stopped
        and its trials are stored as failed with the reason.
    """

    name: str
    description: str
    seed: int
    repeats: int
    folds: int
    datasets: dict[str, LoadedDataset]
    dataset_specs: dict[str, tuple[str, dict, str | None]]
    factors: dict[str, dict[str, list]]
    text: str
    path: Path | None = None
    database: Path | None = None
    search: SearchSpec | None = None
    time_limit: float | None = None
    costs: dict[str, tuple] = field(default_factory=dict)
    smoothing: str | None = None
    _trials: list[Trial] = field(default_factory=list, repr=False)

    @property
    def text_hash(self) -> str:
        """SHA-256 of the study file's text."""
        return hashlib.sha256(self.text.encode()).hexdigest()

    @property
    def study_id(self) -> str:
        """Deterministic id of the study: a hash of its name."""
        return hashlib.sha256(f"study:{self.name}".encode()).hexdigest()[:16]

    @property
    def outer_scheme(self) -> str:
        """The outer CV scheme, e.g. ``"10x10"`` (repeats x folds)."""
        return f"{self.repeats}x{self.folds}"

    def trials(self) -> list[Trial]:
        """Every trial: data sets x factor levels, in a fixed order (none for a search)."""
        if not self._trials and self.search is None:
            self._trials = list(_expand(self))
        return self._trials

    def trial_group(self, dataset: str, levels: dict) -> TrialGroup:
        """The one-trial group of a configuration on a data set (used by searches).

        Parameters
        ----------
        dataset : str
            A data set key of the study.
        levels : dict
            ``criterion``, ``max_depth`` (None = unlimited), ``min_samples_leaf``,
            ``inner_folds``, ``rule``, ``prune_risk``, and optionally ``select_by`` and
            ``class_weight`` (their defaults when missing).
        """
        trial = _make_trial(self, dataset, levels)
        return TrialGroup.of([trial], self.growth_id(trial))

    def growth_id(self, trial: Trial) -> str:
        """Id of the trials of this study that share ``trial``'s grown trees."""
        return growth_id(trial, self.name, self.datasets[trial.dataset].fingerprint)

    def groups(self) -> list[TrialGroup]:
        """The trials grouped by shared grown trees, in a fixed order."""
        groups: dict[str, list[Trial]] = {}
        for trial in self.trials():
            groups.setdefault(self.growth_id(trial), []).append(trial)
        return [TrialGroup.of(trials, gid) for gid, trials in groups.items()]

    def task_of(self, dataset: str) -> str:
        """``"classification"`` or ``"regression"`` for a data set of the study."""
        return family_of(self.datasets[dataset].task)


def _hash(*parts: object) -> str:
    return hashlib.sha256(json.dumps(parts, sort_keys=True).encode()).hexdigest()[:16]


def _make_trial(study: Study, key: str, levels: dict) -> Trial:
    fp = study.datasets[key].fingerprint
    crit, depth, leaf = levels["criterion"], levels["max_depth"], levels["min_samples_leaf"]
    inner, risk, rule = levels["inner_folds"], levels["prune_risk"], levels["rule"]
    family = study.task_of(key)
    select_by = levels.get("select_by") or _SPECS["select_by"].default[family]
    class_weight = levels.get("class_weight") or _SPECS["class_weight"].default[family]
    # levels at their defaults are left out of the hashes, so the trials of studies
    # written before these factors existed keep their ids; the curve id (group_id)
    # includes both: a CV loss or a class weighting gives another inner-CV curve, and
    # the curves table is keyed by group_id
    extra = {
        name: level
        for name, level in (("select_by", select_by), ("class_weight", class_weight))
        if level != _SPECS[name].default[family]
    }
    more = (extra,) if extra else ()
    return Trial(
        trial_id=_hash(study.name, fp, crit, depth, leaf, inner, rule, risk, *more),
        group_id=_hash(study.name, fp, crit, depth, leaf, inner, risk, *more),
        dataset=key,
        criterion=crit,
        max_depth=depth,
        min_samples_leaf=leaf,
        inner_folds=inner,
        rule=rule,
        prune_risk=risk,
        select_by=select_by,
        class_weight=class_weight,
    )


def _expand(study: Study):
    for key in study.datasets:
        levels = study.factors[study.task_of(key)]
        for crit, depth, leaf, inner, risk, cw, by, rule in itertools.product(
            levels["criterion"],
            levels["max_depth"],
            levels["min_samples_leaf"],
            levels["inner_folds"],
            levels["prune_risk"],
            levels["class_weight"],
            levels["select_by"],
            levels["rule"],
        ):
            yield _make_trial(
                study,
                key,
                {
                    "criterion": crit,
                    "max_depth": None if depth == "none" else depth,
                    "min_samples_leaf": leaf,
                    "inner_folds": inner,
                    "rule": rule,
                    "prune_risk": risk,
                    "select_by": by,
                    "class_weight": cw,
                },
            )
