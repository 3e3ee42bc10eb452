"""The checks of a study that need its data sets loaded.

Which task families the study has (against its per-family tables and a search),
every factor's levels per family, the outer and inner folds and the largest leaf
against each data set's rows, the plan's tree fits against ``max_tree_fits``, and
``average_precision`` against two-class data.
"""

from __future__ import annotations

import numpy as np

from .datasets import LoadedDataset
from .selection import parse_rule
from .study_checker import _Checker, _is_int, _levels
from .trials import FACTORS, SearchSpec
from .vocabulary import CLASSIFICATION, counted, family_of, growth_factors
from .vocabulary import FACTORS as _FACTOR_SPECS

#: tree fits a study may plan without saying so (``max_tree_fits``): about 27 times the
#: largest example study (studies/overnight.toml, 364,800 fits); at a few milliseconds a
#: fit that is a day or more of one core, so a larger plan is more often a mistyped
#: number than an intent
MAX_TREE_FITS = 10_000_000


def _check_factor(check: _Checker, key: str, name: str, levels: list, task: str) -> list:
    """The levels of one factor for one task family, checked against the vocabulary."""
    spec = _FACTOR_SPECS[name]
    for v in levels:
        if spec.kind == "choice":
            allowed = spec.levels[task]
            if v not in allowed:
                raise check.fail(
                    key, f"{v!r} is not a {task} {spec.noun}; use one of {', '.join(allowed)}"
                )
        elif spec.kind == "depth":
            if not (v == "none" or (_is_int(v) and v >= 1)):
                raise check.fail(key, f'{v!r} is not a depth: use an integer >= 1 or "none"')
        elif spec.kind == "int":
            if not (_is_int(v) and v >= spec.least):
                raise check.fail(key, f"{v!r} is not a {spec.noun}: use an integer >= {spec.least}")
        elif spec.kind == "rule":
            try:
                parse_rule(v)
            except ValueError:
                raise check.fail(
                    key, f'{v!r} is not a rule: use "min" or a k-SE rule like "1se", "0.5se"'
                ) from None
    if spec.kind == "rule":
        names = [parse_rule(v).name for v in levels]
        if len(set(names)) != len(names):
            raise check.fail(key, f"names one rule twice in {levels!r}")
        return names
    return levels


def _check_space(check: _Checker, search: SearchSpec, task: str) -> None:
    for name, spec in search.space.items():
        if spec[0] != "choices":
            continue
        key = f"search.space.{name}"
        if name == "se":
            if not all(
                isinstance(v, (int, float)) and not isinstance(v, bool) and v >= 0 for v in spec[1]
            ):
                raise check.fail(key, "the k of the k-SE rule is a number >= 0")
        else:
            _check_factor(check, key, name, spec[1], task)


def _check_tasks(check: _Checker, tasks: list, per_task: dict, search: SearchSpec | None) -> None:
    """Per-family tables need a data set of the family; a search needs one family."""
    for task in per_task:
        if task not in tasks:
            raise check.fail(f"factors.{task}", f"no {task} dataset in the study")
    if search is not None:
        if len(tasks) > 1:
            raise check.fail(
                "search",
                "a search needs datasets of one task family; split "
                "classification and regression into two studies",
            )
        _check_space(check, search, tasks[0])


def _task_levels(
    check: _Checker, task: str, tasks: list, factors_doc: dict, per_task: dict
) -> dict[str, list]:
    """Every factor's levels for one task family: its own table, ``[factors]``, or the default."""
    levels = {}
    for factor in FACTORS:
        if factor in per_task.get(task, {}):
            key, value = f"factors.{task}.{factor}", per_task[task][factor]
        elif factor in factors_doc:
            key, value = f"factors.{factor}", factors_doc[factor]
        else:
            key, value = f"factors.{factor}", [_FACTOR_SPECS[factor].default[task]]
        values = _levels(check, key, value)
        spec = _FACTOR_SPECS[factor]
        if len(tasks) > 1 and spec.kind == "choice" and key == f"factors.{factor}":
            # one list cannot suit both families' criteria and risks
            bad = [v for v in values if v not in spec.levels[task]]
            if bad:
                raise check.fail(
                    key,
                    f"{bad[0]!r} does not fit the {task} datasets; with both tasks in one "
                    f"study give {factor} in [factors.classification] and [factors.regression]",
                )
        levels[factor] = _check_factor(check, key, factor, values, task)
    return levels


def _check_folds(
    check: _Checker, key: str, data: LoadedDataset, folds: int, factors: dict, per_task: dict
) -> None:
    """Enough rows for the outer folds, and (classification) for the inner folds."""
    task = family_of(data.task)
    if len(data.y) < 2 * folds:
        raise check.fail(
            "outer.folds",
            f"{folds} folds need at least {2 * folds} rows; dataset {key!r} has {len(data.y)}",
        )
    if task != CLASSIFICATION:
        return
    if data.smallest_class < folds:
        labels, counts = np.unique(data.y, return_counts=True)
        label = labels[np.argmin(counts)]
        label = label.item() if isinstance(label, np.generic) else label  # 0, not np.int64(0)
        where = f"dataset {key!r}"
        if data.info.file:
            where += f" (column {data.info.target!r} of {data.info.file})"
        raise check.fail(
            "outer.folds",
            f"{folds} folds is more than the {counted(data.smallest_class, 'row')} of class "
            f"{label!r}, the smallest class of {where}",
        )
    # the inner CV runs on the outer-training part: about (folds-1)/folds of it
    inner_rows = data.smallest_class * (folds - 1) // folds
    inner_key = (
        f"factors.{task}.inner_folds"
        if "inner_folds" in per_task.get(task, {})
        else "factors.inner_folds"
    )
    too_many = [k for k in factors[task]["inner_folds"] if k > inner_rows]
    if too_many:
        raise check.fail(
            inner_key,
            f"{too_many[0]} inner folds is more than the about {counted(inner_rows, 'row')} "
            f"of the smallest class of dataset {key!r} in an outer-training part",
        )


def _largest(search: SearchSpec | None, name: str, levels: list) -> int:
    """The largest level of an integer factor: from the search space, else the sweep."""
    if search is not None and name in search.space:
        spec = search.space[name]
        return max(spec[1]) if spec[0] == "choices" else spec[2]
    return max(levels)


def _check_leaves(
    check: _Checker,
    key: str,
    data: LoadedDataset,
    folds: int,
    factors: dict,
    per_task: dict,
    search: SearchSpec | None,
) -> None:
    """A leaf may not need more rows than the smallest outer-training part holds."""
    task = family_of(data.task)
    n = len(data.y)
    rows = n - -(-n // folds)  # the largest test fold is ceil(n / folds) rows
    largest = _largest(search, "min_samples_leaf", factors[task]["min_samples_leaf"])
    if largest <= rows:
        return
    if search is not None and "min_samples_leaf" in search.space:
        leaf_key = "search.space.min_samples_leaf"
    elif "min_samples_leaf" in per_task.get(task, {}):
        leaf_key = f"factors.{task}.min_samples_leaf"
    else:
        leaf_key = "factors.min_samples_leaf"
    raise check.fail(
        leaf_key,
        f"a leaf of {largest} rows is more than the {counted(rows, 'row')} of the smallest "
        f"outer-training part of dataset {key!r} ({n} rows, {folds} folds)",
    )


def _check_fits(
    check: _Checker,
    limit: int | None,
    repeats: int,
    folds: int,
    loaded: dict,
    factors: dict,
    search: SearchSpec | None,
) -> None:
    """The plan's tree fits stay under ``max_tree_fits`` (default :data:`MAX_TREE_FITS`)."""
    fits = 0
    for data in loaded.values():
        levels = factors[family_of(data.task)]
        if search is not None:
            # each configuration is one group; count its largest inner CV
            inner = _largest(search, "inner_folds", levels["inner_folds"])
            fits += search.configurations * (1 + inner)
            continue
        # one group per growth setting: T_max once, then the fold trees of each inner fold
        # count once, shared by every pruning risk, CV loss and rule
        shared = 1
        for factor in growth_factors():
            shared *= len(levels[factor])
        fits += shared * (1 + sum(levels["inner_folds"]))
    fits *= repeats * folds
    if fits <= (limit or MAX_TREE_FITS):
        return
    if limit is not None:
        raise check.fail(
            "max_tree_fits",
            f"the plan has {fits:,} tree fits, more than max_tree_fits = {limit:,}; "
            "raise it, or lower the repeats, folds or levels",
        )
    raise check.fail(
        "max_tree_fits",
        f"the plan has {fits:,} tree fits (outer {repeats:,} x {folds:,}), more than the "
        f"{MAX_TREE_FITS:,} a study may plan without saying so; lower the repeats, folds or "
        f"levels, or allow it with max_tree_fits = {fits} at the top of the study file",
        line_key="outer.repeats",
    )


def _check_select_by(
    check: _Checker, key: str, data: LoadedDataset, factors: dict, per_task: dict
) -> None:
    """Average precision chooses alpha on two-class data sets only."""
    task = family_of(data.task)
    if task != CLASSIFICATION or data.n_classes == 2:
        return
    if "average_precision" in factors[task]["select_by"]:
        where = (
            f"factors.{task}.select_by"
            if "select_by" in per_task.get(task, {})
            else "factors.select_by"
        )
        raise check.fail(
            where,
            f"'average_precision' needs two classes; dataset {key!r} has {data.n_classes}",
        )
