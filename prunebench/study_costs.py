"""A study file's ``[costs]`` (CART's loss matrix and priors) and its ``smoothing``.

``[costs]`` is checked in two steps: its shape before the data sets are loaded
(:func:`_costs_section`), then, once they are, each classification data set's labels
against the table that serves it (:func:`_costs_of_datasets`).
"""

from __future__ import annotations

import tomllib

import numpy as np

from .exceptions import InvalidParameterError
from .losses import parse_smoothing
from .study_checker import _Checker, _number
from .vocabulary import CLASSIFICATION, family_of

_COST_KEYS = ("loss", "priors")


def _smoothing(check: _Checker, value: object) -> str | None:
    """``smoothing``: ``"laplace"`` or an m-estimate ``"m<m>"`` (opt-in; none by default)."""
    if value is None or value == "none":
        return None
    try:
        parse_smoothing(value)
    except InvalidParameterError:
        raise check.fail(
            "smoothing",
            f'{value!r} is not a smoothing: use "laplace" or an m-estimate like "m2" or "m10"',
        ) from None
    return value


def _costs_section(check: _Checker, doc: object) -> dict:
    """``[costs]``: its shape only (the labels are checked once the data are loaded).

    Returns ``{"": common table or None, data set key: table, ...}``.
    """
    if doc is None:
        return {"": None}
    if not isinstance(doc, dict):
        raise check.fail("costs", "must be a table with loss and/or priors")
    common = {k: v for k, v in doc.items() if k in _COST_KEYS}
    out: dict = {"": common or None}
    for key, value in doc.items():
        if key in _COST_KEYS:
            continue
        if not isinstance(value, dict):
            raise check.fail(
                f"costs.{key}",
                "is neither loss nor priors nor a table of one dataset's loss and priors",
            )
        for sub in value:
            if sub not in _COST_KEYS:
                raise check.fail(f"costs.{key}.{sub}", "is not a costs key; use loss and priors")
        out[key] = value
    return out


def _costs_of_datasets(check: _Checker, doc: dict, loaded: dict) -> dict:
    """Every classification data set's (labels, loss matrix, priors), checked against its labels.

    ``[costs]`` applies to every classification data set without a
    ``[costs."<dataset>"]`` table of its own; each of them must have exactly the
    labels the table names.
    """
    classification = [k for k, d in loaded.items() if family_of(d.task) == CLASSIFICATION]
    for key in doc:
        if key and key not in loaded:
            raise check.fail(
                f"costs.{key}",
                f"is not a dataset of the study; the datasets are {', '.join(loaded)}",
            )
        if key and key not in classification:
            raise check.fail(f"costs.{key}", f"dataset {key!r} is not a classification dataset")
    if doc[""] is not None and not classification:
        raise check.fail("costs", "the study has no classification dataset")
    out = {}
    for key in classification:
        spec, where = (doc[key], f"costs.{key}") if key in doc else (doc[""], "costs")
        if spec is None:
            continue
        labels = np.unique(loaded[key].y)
        names = [str(c) for c in labels]
        loss = _loss_matrix(check, where, spec.get("loss"), names, key)
        priors = _priors(check, where, spec.get("priors", "data"), names, key)
        out[key] = (tuple(labels.tolist()), loss, priors)
    return out


def _loss_matrix(check: _Checker, where: str, loss: object, names: list, dataset: str):
    """``loss = { <true> = { <predicted> = cost } }``: every mistake costed, zero diagonal."""
    if loss is None:
        return None
    key = f"{where}.loss"
    classes = f"the classes of dataset {dataset!r} are {', '.join(names)}"
    if not isinstance(loss, dict):
        raise check.fail(key, "must be a table: true class = { predicted class = cost, ... }", key)
    matrix = np.zeros((len(names), len(names)))
    for true, row in loss.items():
        if true not in names:
            raise check.fail(f"{key}.{true}", f"{true!r} is not a class: {classes}", key)
        if not isinstance(row, dict):
            raise check.fail(f"{key}.{true}", "must be a table: predicted class = cost, ...", key)
        for pred, cost in row.items():
            cell = f"{key}.{true}.{pred}"
            if pred not in names:
                raise check.fail(cell, f"{pred!r} is not a class: {classes}", key)
            if not _number(cost) or cost < 0:
                raise check.fail(cell, f"a cost is a finite number >= 0; got {cost!r}", key)
            if pred == true and cost != 0:
                raise check.fail(
                    cell, "a right prediction costs nothing: use 0 or leave it out", key
                )
            matrix[names.index(true), names.index(pred)] = float(cost)
    for i, true in enumerate(names):
        for j, pred in enumerate(names):
            if i != j and not (true in loss and pred in loss[true]):
                raise check.fail(
                    f"{key}.{true}.{pred}",
                    "is missing: give the cost of every mistake (rows: true class, "
                    "columns: predicted class)",
                    key,
                )
    return tuple(tuple(row) for row in matrix.tolist())


def _priors(check: _Checker, where: str, priors: object, names: list, dataset: str):
    """``priors``: ``"data"``, ``"equal"`` or class = probability for every class."""
    key = f"{where}.priors"
    if priors in ("data", "equal"):
        return priors
    if not isinstance(priors, dict):
        raise check.fail(
            key, f'must be "data", "equal" or a table class = probability; got {priors!r}', key
        )
    for label, p in priors.items():
        if label not in names:
            raise check.fail(
                f"{key}.{label}",
                f"{label!r} is not a class of dataset {dataset!r}; its classes are "
                f"{', '.join(names)}",
                key,
            )
        if not _number(p) or p < 0:
            raise check.fail(f"{key}.{label}", f"a prior is a number >= 0; got {p!r}", key)
    missing = [n for n in names if n not in priors]
    if missing:
        raise check.fail(f"{key}.{missing[0]}", "is missing: give every class a prior", key)
    total = sum(priors.values())
    if abs(total - 1.0) > 1e-9:
        raise check.fail(key, f"the priors must sum to 1; they sum to {total:g}", key)
    return tuple(float(priors[n]) for n in names)


def _label_order(names: list[str]) -> list[str]:
    """Class names in the order ``numpy.unique`` sorts the labels they name.

    Numbers (``0``, ``1``, ``10``) sort as numbers, any other names as text.
    """

    def number(name: str) -> float | None:
        try:
            return float(name)
        except ValueError:
            return None

    if names and all(number(n) is not None for n in names):
        return sorted(names, key=number)
    return sorted(names)


def costs_of_text(study_text: str, datasets: list[str]) -> dict:
    """The loss matrix and priors a stored study text gives each of some data sets.

    What a trial of the study used, read back without loading the data: the class
    names come from the ``loss`` and ``priors`` tables, in the order ``numpy.unique``
    sorts the labels (the estimators' ``classes_`` order).

    Parameters
    ----------
    study_text : str
        A study file's text (as stored in the results database).
    datasets : list of str
        The data sets to read the costs of (a name without costs is left out).

    Returns
    -------
    dict
        Data set -> ``{"classes": [...], "loss_matrix": tuple of rows or None,
        "priors": "data", "equal" or a tuple}``.
    """
    check = _Checker(study_text, "the stored study")
    doc = _costs_section(check, tomllib.loads(study_text).get("costs"))
    out = {}
    for name in datasets:
        spec, where = (doc[name], f"costs.{name}") if name in doc else (doc[""], "costs")
        if not spec:
            continue
        loss, priors = spec.get("loss"), spec.get("priors", "data")
        names = set(loss or {}) | {p for row in (loss or {}).values() for p in row}
        names |= set(priors) if isinstance(priors, dict) else set()
        names = _label_order([str(n) for n in names])
        out[name] = {
            "classes": names,
            "loss_matrix": _loss_matrix(check, where, loss, names, name),
            "priors": _priors(check, where, priors, names, name),
        }
    return out


def smoothing_of_text(study_text: str) -> str | None:
    """The ``smoothing`` of a stored study text (None when it sets none)."""
    check = _Checker(study_text, "the stored study")
    return _smoothing(check, tomllib.loads(study_text).get("smoothing"))
