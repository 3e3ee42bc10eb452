"""Study files: parse and validate them into a :class:`~prunebench.trials.Study`.

A study file is TOML::

    name = "harbour-loans"
    description = "Which pruning defaults for the loan-desk trees?"
    seed = 7
    database = "harbour-loans.sqlite"     # optional; relative to the study file
    max_tree_fits = 50_000_000            # optional; plans above 10,000,000 fits need it
    datasets = ["breast_cancer", "wine"]  # or [[datasets]] tables: name = "...", plus parameters

    [outer]                               # nested CV: outer repeated K-fold
    repeats = 10
    folds = 10

    [factors]                             # levels to sweep; every combination is a trial
    criterion = ["gini", "entropy"]
    max_depth = ["none", 4, 8]            # "none" = unlimited
    min_samples_leaf = [1, 5]
    inner_folds = [5, 10]                 # folds of the inner CV that chooses alpha
    rule = ["min", "1se"]
    prune_risk = ["error"]
    select_by = ["error", "auc"]          # the loss the inner CV chooses alpha by
    class_weight = ["none", "balanced"]   # how the trees weight the classes as they grow

    smoothing = "laplace"                 # optional (top level): "laplace" or "m<m>"

    [costs]                               # optional: CART's loss matrix and priors
    loss = { bad = { good = 5 }, good = { bad = 1 } }  # true class = { predicted = cost }
    priors = "data"                       # or "equal", or { bad = 0.3, good = 0.7 }

    [costs."rare_logistic"]               # optional: one dataset's own (other labels)
    loss = { 1 = { 0 = 10 }, 0 = { 1 = 1 } }

``[costs]`` applies to every classification data set without a table of its own,
and each must have exactly the labels it names (every mistake costed, no cost on
the diagonal); a ``[costs."<dataset>"]`` table serves a data set whose labels
differ, so one study can span data sources that spell their classes differently.

Classification and regression data sets may share a study only when the
task-specific factors are given per task: ``[factors.classification]`` and
``[factors.regression]`` tables override ``[factors]`` for the data sets of
that task, and ``criterion`` and ``prune_risk`` must then suit every task they
apply to.  Every mistake raises :class:`StudyError` with one line naming the file,
the line where it could be found, and the key.
"""

from __future__ import annotations

import os
import re
import tomllib
from pathlib import Path

import numpy as np

from .datasets import (
    DatasetError,
    LoadedDataset,
    load_dataset,
    read_manifest,
    register_manifest,
)
from .exceptions import InvalidParameterError, StudyError
from .losses import parse_smoothing
from .selection import parse_rule
from .trials import FACTORS, SearchSpec, Study, Trial, TrialGroup
from .vocabulary import (
    CLASSIFICATION,
    CRITERIA,
    DEFAULT_METRIC,
    FAMILIES,
    REGRESSION,
    counted,
    default_margin,
    family_of,
    growth_factors,
    metric_names,
)
from .vocabulary import FACTORS as _FACTOR_SPECS

__all__ = [
    "CLASSIFICATION_CRITERIA",
    "FACTORS",
    "REGRESSION_CRITERIA",
    "SearchSpec",
    "Study",
    "StudyError",
    "Trial",
    "TrialGroup",
    "decision_of_text",
    "levels_of_text",
    "load_study",
    "parse_study",
    "study_database",
]

CLASSIFICATION_CRITERIA = CRITERIA[CLASSIFICATION]
REGRESSION_CRITERIA = CRITERIA[REGRESSION]
_TOP_KEYS = {
    "name",
    "description",
    "seed",
    "database",
    "datasets",
    "outer",
    "factors",
    "search",
    "time_limit",
    "max_tree_fits",
    "decision",
    "costs",
    "smoothing",
}
#: tree fits a study may plan without saying so (``max_tree_fits``): about 14 times the
#: largest example study (studies/overnight.toml, 714,000 fits); at a few milliseconds a
#: fit that is a day or more of one core, so a larger plan is more often a mistyped
#: number than an intent
MAX_TREE_FITS = 10_000_000
_DECISION_KEYS = ("metric", "margin", "alpha")
_COST_KEYS = ("loss", "priors")
_SAMPLERS = ("tpe", "random", "grid")
_SEARCH_KEYS = {"sampler", "configurations", "early_stopping", "seed", "space"}
# a search varies the k of the k-SE rule ("se") where a sweep names rules
_SPACE_KEYS = tuple("se" if name == "rule" else name for name in FACTORS)
_NAME = re.compile(r"^[A-Za-z0-9][A-Za-z0-9_.-]{0,79}$")


class _Checker:
    """Raises one clear line per mistake, with the file and line where possible."""

    def __init__(self, text: str, source: str) -> None:
        self.lines = text.splitlines()
        self.source = source

    def line_of(self, key: str) -> int | None:
        *tables, leaf = key.split(".")
        table = ".".join(tables)
        current = ""
        pattern = re.compile(rf"^\s*{re.escape(leaf)}\s*=")
        header = re.compile(r"^\s*\[\[?\s*([^\]]+?)\s*\]\]?")
        for number, line in enumerate(self.lines, start=1):
            match = header.match(line)
            if match:
                current = match.group(1)
                continue
            if current == table and pattern.match(line):
                return number
        for number, line in enumerate(self.lines, start=1):
            if re.match(rf"^\s*\[\[?\s*{re.escape(key)}\s*\]\]?", line):
                return number
        return None

    def fail(self, key: str, message: str, line_key: str | None = None) -> StudyError:
        line = self.line_of(line_key or key)
        where = f"{self.source}:{line}" if line else self.source
        return StudyError(f"{where}: key '{key}': {message}")


def _is_int(v: object) -> bool:
    return isinstance(v, int) and not isinstance(v, bool)


def _levels(check: _Checker, key: str, value: object) -> list:
    if not isinstance(value, list):
        value = [value]
    if not value:
        raise check.fail(key, "needs at least one level")
    if len(set(map(repr, value))) != len(value):
        raise check.fail(key, f"has a repeated level in {value!r}")
    return value


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


def _datasets(
    check: _Checker, value: object, base: Path
) -> list[tuple[str, str, dict, str | None]]:
    if not isinstance(value, list) or not value:
        raise check.fail("datasets", "must be a non-empty list of dataset names or tables")
    out = []
    for item in value:
        manifest = None
        if isinstance(item, str):
            name, params = item, {}
        elif isinstance(item, dict):
            params = {k: v for k, v in item.items() if k not in ("name", "manifest")}
            if "manifest" in item:
                if not isinstance(item["manifest"], str):
                    raise check.fail("datasets", "a dataset's manifest must be a file path")
                manifest = os.path.normpath(base / item["manifest"])
                try:
                    entries = read_manifest(manifest)
                except DatasetError as err:
                    raise check.fail("datasets", str(err)) from None
                names = [e.name for e in entries]
                name = item.get("name", names[0] if len(names) == 1 else None)
                if name not in names:
                    raise check.fail(
                        "datasets",
                        f"manifest {manifest} describes {', '.join(names)}; "
                        'say which with name = "..."',
                    )
            elif isinstance(item.get("name"), str):
                name = item["name"]
            else:
                raise check.fail(
                    "datasets", 'every dataset table needs name = "..." or manifest = "..."'
                )
        else:
            raise check.fail("datasets", f"{item!r} is neither a dataset name nor a table")
        key = (
            name
            if not params
            else f"{name}({', '.join(f'{k}={v}' for k, v in sorted(params.items()))})"
        )
        if key in [k for k, *_ in out]:
            raise check.fail("datasets", f"names {key!r} twice")
        out.append((key, name, params, manifest))
    return out


def _search(check: _Checker, doc: object, seed: int) -> SearchSpec:
    if not isinstance(doc, dict):
        raise check.fail("search", "must be a table")
    for key in doc:
        if key not in _SEARCH_KEYS:
            raise check.fail(
                f"search.{key}",
                f"is not a search key; the keys are {', '.join(sorted(_SEARCH_KEYS))}",
            )
    sampler = doc.get("sampler", "tpe")
    if sampler not in _SAMPLERS:
        raise check.fail(
            "search.sampler", f"{sampler!r} is not a sampler; use {', '.join(_SAMPLERS)}"
        )
    n = doc.get("configurations", 20)
    if not _is_int(n) or n < 1:
        raise check.fail("search.configurations", f"must be an integer >= 1; got {n!r}")
    early = doc.get("early_stopping", True)
    if not isinstance(early, bool):
        raise check.fail("search.early_stopping", "must be true or false")
    search_seed = doc.get("seed", seed)
    if not _is_int(search_seed) or search_seed < 0:
        raise check.fail("search.seed", "must be an integer >= 0")
    space = _search_space(check, doc.get("space"))
    if sampler == "grid" and any(v[0] != "choices" for v in space.values()):
        raise check.fail(
            "search.sampler", "the grid sampler needs every space entry as a list of choices"
        )
    return SearchSpec(sampler, n, early, search_seed, space)


def _search_space(check: _Checker, raw: object) -> dict:
    """``[search.space]``: name -> ("choices", levels) or a numeric range."""
    if not isinstance(raw, dict) or not raw:
        raise check.fail("search.space", "needs a table of choices or ranges")
    space = {}
    for name, value in raw.items():
        key = f"search.space.{name}"
        if name not in _SPACE_KEYS:
            raise check.fail(key, f"is not searchable; use {', '.join(_SPACE_KEYS)}")
        if isinstance(value, list):
            space[name] = ("choices", _levels(check, key, value))
        elif isinstance(value, dict):
            space[name] = _search_range(check, key, name, value)
        else:
            raise check.fail(key, "must be a list of choices or a { low, high } range")
    return space


def _search_range(check: _Checker, key: str, name: str, value: dict) -> tuple:
    """One ``{ low, high, log }`` range of the search space."""
    if set(value) - {"low", "high", "log"} or not {"low", "high"} <= set(value):
        raise check.fail(key, "a range is { low = ..., high = ... } with optional log = true")
    low, high = value["low"], value["high"]
    if name == "se":
        numbers = all(isinstance(v, (int, float)) and not isinstance(v, bool) for v in (low, high))
        if not numbers or not 0 <= low < high:
            raise check.fail(key, "needs numbers 0 <= low < high")
        return ("float", float(low), float(high))
    if name in ("max_depth", "min_samples_leaf", "inner_folds"):
        least = _FACTOR_SPECS[name].least
        if not (_is_int(low) and _is_int(high) and least <= low < high):
            raise check.fail(key, f"needs integers {least} <= low < high")
        return ("int", low, high, bool(value.get("log", False)))
    raise check.fail(key, "takes a list of choices, not a range")


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


def parse_study(text: str, source: str = "<study>", base: Path | None = None) -> Study:
    """Validate a study file's text and load its data sets.

    Three steps: pure validators of each section, then the data sets are loaded
    (a manifest's data sets are registered here, and only here, so workers can load
    them by name), then the checks that need the data (task families, fold counts).

    Parameters
    ----------
    text : str
        TOML text.
    source : str
        Name used in messages (the file's path).
    base : Path, optional
        Folder against which a relative ``database`` and manifests are resolved.

    Returns
    -------
    Study

    Raises
    ------
    StudyError
        One line naming the file, line and key of the first mistake.
    """
    check = _Checker(text, source)
    try:
        doc = tomllib.loads(text)
    except tomllib.TOMLDecodeError as err:
        raise StudyError(f"{source}: not valid TOML: {err}") from None
    top = _top_section(check, doc, source)
    repeats, folds = _outer_section(check, doc.get("outer", {}))
    factors_doc, per_task = _factors_section(check, doc.get("factors", {}))
    search = _search_section(check, doc, top["seed"])
    costs_doc = _costs_section(check, doc.get("costs"))
    smoothing = _smoothing(check, doc.get("smoothing"))
    base = base or Path(".")
    entries = _datasets(check, doc["datasets"], base)

    loaded, specs = _load_datasets(check, entries)

    tasks = sorted({family_of(d.task) for d in loaded.values()})
    _check_tasks(check, tasks, per_task, search)
    factors = {task: _task_levels(check, task, tasks, factors_doc, per_task) for task in tasks}
    for key, data in loaded.items():
        _check_folds(check, key, data, folds, factors, per_task)
        _check_leaves(check, key, data, folds, factors, per_task, search)
    _check_fits(check, top["max_tree_fits"], repeats, folds, loaded, factors, search)
    _decision_section(check, doc.get("decision", {}), tasks)
    for key, data in loaded.items():
        _check_select_by(check, key, data, factors, per_task)
    costs = _costs_of_datasets(check, costs_doc, loaded)
    database = top["database"]
    return Study(
        name=top["name"],
        description=top["description"],
        seed=top["seed"],
        repeats=repeats,
        folds=folds,
        datasets=loaded,
        dataset_specs=specs,
        factors=factors,
        text=text,
        database=Path(os.path.normpath(base / database)) if database else None,
        search=search,
        time_limit=float(top["time_limit"]) if top["time_limit"] is not None else None,
        costs=costs,
        smoothing=smoothing,
    )


# ---- pure section validators -------------------------------------------------------------


def _top_section(check: _Checker, doc: dict, source: str) -> dict:
    """The top-level keys: ``name``, ``description``, ``seed``, ``time_limit``, ``database``."""
    for key in doc:
        if key not in _TOP_KEYS:
            raise check.fail(
                key, f"is not a study key; the keys are {', '.join(sorted(_TOP_KEYS))}"
            )
    for key in ("name", "seed", "datasets"):
        if key not in doc:
            raise StudyError(f"{source}: key '{key}' is missing")
    name = doc["name"]
    if not isinstance(name, str) or not _NAME.match(name):
        raise check.fail(
            "name", "must be 1-80 letters, digits, '_', '-' or '.', starting with a letter or digit"
        )
    description = doc.get("description", "")
    if not isinstance(description, str):
        raise check.fail("description", "must be a string")
    seed = doc["seed"]
    if not _is_int(seed) or not 0 <= seed < 2**32:
        raise check.fail("seed", f"must be an integer in [0, 2**32); got {seed!r}")
    time_limit = doc.get("time_limit")
    if time_limit is not None and (
        isinstance(time_limit, bool) or not isinstance(time_limit, (int, float)) or time_limit <= 0
    ):
        raise check.fail("time_limit", f"must be a number of seconds > 0; got {time_limit!r}")
    database = doc.get("database")
    if database is not None and (not isinstance(database, str) or not database.strip()):
        raise check.fail("database", "must be a file path")
    max_fits = doc.get("max_tree_fits")
    if max_fits is not None and (not _is_int(max_fits) or max_fits < 1):
        raise check.fail("max_tree_fits", f"must be an integer >= 1; got {max_fits!r}")
    return {
        "max_tree_fits": max_fits,
        "name": name,
        "description": description,
        "seed": seed,
        "time_limit": time_limit,
        "database": database,
    }


def _outer_section(check: _Checker, outer: object) -> tuple[int, int]:
    """``[outer]``: repeats and folds."""
    if not isinstance(outer, dict):
        raise check.fail("outer", "must be a table with repeats and folds")
    for key in outer:
        if key not in ("repeats", "folds"):
            raise check.fail(f"outer.{key}", "is not an outer key; use repeats and folds")
    repeats, folds = outer.get("repeats", 10), outer.get("folds", 10)
    if not _is_int(repeats) or repeats < 1:
        raise check.fail("outer.repeats", f"must be an integer >= 1; got {repeats!r}")
    if not _is_int(folds) or folds < 2:
        raise check.fail("outer.folds", f"must be an integer >= 2; got {folds!r}")
    return repeats, folds


def _factors_section(check: _Checker, factors_doc: object) -> tuple[dict, dict]:
    """``[factors]`` and its per-family tables: (common levels, family -> levels)."""
    if not isinstance(factors_doc, dict):
        raise check.fail("factors", "must be a table of factor levels")
    per_task = {}
    for key, value in factors_doc.items():
        if key in FAMILIES:
            if not isinstance(value, dict):
                raise check.fail(f"factors.{key}", "must be a table of factor levels")
            for sub in value:
                if sub not in FACTORS:
                    raise check.fail(
                        f"factors.{key}.{sub}",
                        f"is not a factor; the factors are {', '.join(FACTORS)}",
                    )
            per_task[key] = value
        elif key not in FACTORS:
            raise check.fail(
                f"factors.{key}", f"is not a factor; the factors are {', '.join(FACTORS)}"
            )
    return factors_doc, per_task


def _search_section(check: _Checker, doc: dict, seed: int) -> SearchSpec | None:
    """``[search]``, which excludes ``[factors]``."""
    if "search" not in doc:
        return None
    search = _search(check, doc["search"], seed)
    if "factors" in doc:
        raise check.fail(
            "factors",
            "a study with [search] takes its levels from [search.space]; remove [factors]",
        )
    return search


def _decision_section(check: _Checker, doc: object, families) -> dict:
    """``[decision]``: the primary metric, its margin and alpha, per task family.

    ``metric`` and ``margin`` may be given for every family in ``[decision]`` or per
    family in ``[decision.classification]`` / ``[decision.regression]``; a margin is in
    its metric's units (a share of the unpruned loss for MSE and MAE) and defaults to
    the vocabulary's margin of the metric; ``alpha`` lies in (0, 0.5].
    """
    if not isinstance(doc, dict):
        raise check.fail("decision", "must be a table with metric, margin and alpha")
    for key, value in doc.items():
        if key in FAMILIES:
            if not isinstance(value, dict):
                raise check.fail(f"decision.{key}", "must be a table with metric and margin")
            for sub in value:
                if sub not in ("metric", "margin"):
                    raise check.fail(
                        f"decision.{key}.{sub}", "is not a decision key; use metric and margin"
                    )
        elif key not in _DECISION_KEYS:
            raise check.fail(
                f"decision.{key}",
                f"is not a decision key; the keys are {', '.join(_DECISION_KEYS)} "
                "and the tables [decision.classification], [decision.regression]",
            )
    alpha = doc.get("alpha", 0.05)
    if not _number(alpha) or not 0 < alpha <= 0.5:
        raise check.fail("decision.alpha", f"must be a number in (0, 0.5]; got {alpha!r}")
    for family in doc:
        if family in FAMILIES and family not in families:
            raise check.fail(f"decision.{family}", f"no {family} dataset in the study")
    out: dict = {"alpha": float(alpha), "metric": {}, "margin": {}}
    for family in families:
        own = doc.get(family, {})
        prefix = f"decision.{family}." if "metric" in own else "decision."
        metric = own.get("metric", doc.get("metric", DEFAULT_METRIC[family]))
        allowed = metric_names(family)
        if metric not in allowed:
            hint = (
                f"; with both tasks in one study give metric in [decision.{family}]"
                if len(families) > 1 and "metric" not in own
                else ""
            )
            raise check.fail(
                prefix + "metric",
                f"{metric!r} is not a {family} metric; use one of {', '.join(allowed)}{hint}",
            )
        key = f"decision.{family}.margin" if "margin" in own else "decision.margin"
        margin = own.get("margin", doc.get("margin"))
        if margin is None:
            margin = default_margin(metric)
        elif not _number(margin) or not margin > 0:
            raise check.fail(key, f"must be a number > 0 in {metric}'s units; got {margin!r}")
        out["metric"][family], out["margin"][family] = metric, float(margin)
    return out


def decision_of_text(text: str, families=FAMILIES, source: str = "<study>") -> dict:
    """The ``[decision]`` settings of a study file's text, defaults filled in.

    Parameters
    ----------
    text : str
        A study file's TOML text (as stored in ``studies.study_text``).
    families : iterable of str
        The task families whose metric and margin are wanted.
    source : str
        Name used in messages.

    Returns
    -------
    dict
        ``alpha`` (float), ``metric`` (family -> metric) and ``margin`` (family -> margin).

    Raises
    ------
    StudyError
        One line naming the key of a mistake.
    """
    try:
        doc = tomllib.loads(text)
    except tomllib.TOMLDecodeError as err:
        raise StudyError(f"{source}: not valid TOML: {err}") from None
    return _decision_section(_Checker(text, source), doc.get("decision", {}), list(families))


def levels_of_text(text: str, family: str) -> dict[str, list]:
    """One task family's factor levels in the study file's order (the first is the reference).

    The per-family table, else ``[factors]``, else the vocabulary's default; rules in
    their canonical spelling, ``"none"`` for an unlimited depth.  The text is assumed
    valid (it was checked when the study was conducted).

    Parameters
    ----------
    text : str
        A study file's TOML text.
    family : {"classification", "regression"}

    Returns
    -------
    dict
        Factor -> list of levels.
    """
    doc = tomllib.loads(text)
    if "search" in doc:
        return {}
    factors_doc = doc.get("factors", {})
    own = factors_doc.get(family, {})
    levels = {}
    for factor in FACTORS:
        value = own.get(factor, factors_doc.get(factor, [_FACTOR_SPECS[factor].default[family]]))
        value = value if isinstance(value, list) else [value]
        if factor == "rule":
            value = [parse_rule(v).name for v in value]
        levels[factor] = value
    return levels


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


def _number(v: object) -> bool:
    return isinstance(v, (int, float)) and not isinstance(v, bool) and np.isfinite(v)


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


# ---- loading the data sets ---------------------------------------------------------------


def _load_datasets(check: _Checker, entries: list) -> tuple[dict, dict]:
    """Load every data set (registering a manifest's first): key -> data, key -> spec."""
    loaded: dict[str, LoadedDataset] = {}
    specs: dict[str, tuple[str, dict, str | None]] = {}
    for key, ds_name, params, manifest in entries:
        try:
            if manifest is not None:
                register_manifest(manifest)
            loaded[key] = load_dataset(ds_name, **params)
        except DatasetError as err:
            raise check.fail("datasets", str(err)) from None
        specs[key] = (ds_name, params, manifest)
    return loaded, specs


# ---- checks that need the data -----------------------------------------------------------


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
        where = f"dataset {key!r}"
        if data.info.file:
            where += f" (column {data.info.target!r} of {data.info.file})"
        raise check.fail(
            "outer.folds",
            f"{folds} folds is more than the {counted(data.smallest_class, 'row')} of class "
            f"{labels[np.argmin(counts)]!r}, the smallest class of {where}",
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


def study_database(path: str | Path) -> Path | None:
    """The results database a study file writes to, read without loading its data sets.

    Parameters
    ----------
    path : str or Path

    Returns
    -------
    Path or None
        Its ``database`` (relative to the study file), else ``<stem>.sqlite`` beside it,
        as ``prunebench conduct`` uses without ``--db``; None when the file is not a study
        file (not TOML text, or without the keys every study has).
    """
    path = Path(path)
    try:
        doc = tomllib.loads(path.read_text(encoding="utf-8"))
    except (OSError, UnicodeDecodeError, tomllib.TOMLDecodeError):
        return None
    if not {"name", "seed", "datasets"} <= set(doc):
        return None
    database = doc.get("database")
    if isinstance(database, str) and database.strip():
        return Path(os.path.normpath(path.parent / database))
    return path.with_suffix(".sqlite")


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


def load_study(path: str | Path) -> Study:
    """Read and validate a study file.

    Parameters
    ----------
    path : str or Path

    Returns
    -------
    Study

    Raises
    ------
    StudyError
        If the file cannot be read or has a mistake (one line naming the key).
    """
    path = Path(path)
    try:
        text = path.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise StudyError(f"{path}: no such study file") from None
    except UnicodeDecodeError as err:
        raise StudyError(f"{path}: not UTF-8 text ({err.reason} at byte {err.start})") from None
    except OSError as err:
        raise StudyError(f"{path}: cannot read the study file: {err.strerror}") from None
    study = parse_study(text, source=str(path), base=path.parent)
    study.path = path
    return study
