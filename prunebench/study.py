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

This module reads the top-level keys, ``[outer]``, ``[factors]``, ``[search]`` and the
data sets; beside it are :mod:`prunebench.study_checker` (the message shape and value
helpers), :mod:`prunebench.study_decision` (``[decision]``, and a stored study text's
decision and levels), :mod:`prunebench.study_costs` (``[costs]``, ``smoothing``) and
:mod:`prunebench.study_checks` (the checks that need the data sets).
"""

from __future__ import annotations

import os
import re
import tomllib
from pathlib import Path

from .datasets import (
    DatasetError,
    LoadedDataset,
    load_dataset,
    read_manifest,
    register_manifest,
)
from .exceptions import StudyError
from .study_checker import _Checker, _is_int, _levels
from .study_checks import MAX_TREE_FITS as MAX_TREE_FITS
from .study_checks import (
    _check_fits,
    _check_folds,
    _check_leaves,
    _check_select_by,
    _check_tasks,
    _task_levels,
)
from .study_costs import _costs_of_datasets, _costs_section, _smoothing
from .study_decision import _decision_section, decision_of_text, levels_of_text
from .trials import FACTORS, SearchSpec, Study, Trial, TrialGroup
from .vocabulary import CLASSIFICATION, CRITERIA, FAMILIES, REGRESSION, family_of
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
_SAMPLERS = ("tpe", "random", "grid")
_SEARCH_KEYS = {"sampler", "configurations", "early_stopping", "seed", "space"}
# a search varies the k of the k-SE rule ("se") where a sweep names rules
_SPACE_KEYS = tuple("se" if name == "rule" else name for name in FACTORS)
_NAME = re.compile(r"^[A-Za-z0-9][A-Za-z0-9_.-]{0,79}$")


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
