"""Registry of named data sets and their loading."""

from __future__ import annotations

import hashlib
from collections.abc import Callable
from dataclasses import dataclass, field
from functools import lru_cache

import numpy as np

from ..exceptions import DatasetError
from ..vocabulary import CLASSIFICATION, family_of

TASKS = ("binary", "multiclass", "regression")



@dataclass(frozen=True)
class Dataset:
    """A registered data set.

    Attributes
    ----------
    name : str
        The name studies use.
    task : {"binary", "multiclass", "regression"}
    loader : callable
        ``loader(**params) -> (X, y)`` with numeric float X.
    source, licence, citation : str
        Where the data comes from, under which terms, and whom to cite.
    params : dict
        Default loader parameters (simulations: size and seed).
    file : str or None
        The data file, for data sets read from a file.
    target : str or None
        The target column, for data sets read from a file.
    expected : dict
        Published counts (``rows``, ``features``, ``classes``) a vendored file must match.
    kind : str
        ``"bundled"`` (ships with scikit-learn), ``"vendored"``, ``"simulated"`` or ``"file"``.
    check : callable or None
        ``check(name, params)`` raises :class:`DatasetError` on a bad loader parameter
        (simulations: sizes, seeds and the model's own parameters).
    """

    name: str
    task: str
    loader: Callable[..., tuple[np.ndarray, np.ndarray]]
    source: str
    licence: str
    citation: str
    params: dict = field(default_factory=dict)
    file: str | None = None
    target: str | None = None
    expected: dict = field(default_factory=dict)
    kind: str = "file"
    check: Callable[[str, dict], None] | None = None


@dataclass(frozen=True, eq=False)
class LoadedDataset:
    """A data set's arrays with its identity.

    Attributes
    ----------
    name : str
    task : str
    X : ndarray of shape (n_rows, n_features), float64
    y : ndarray of shape (n_rows,)
    params : dict
        The loader parameters actually used.
    fingerprint : str
        Hex SHA-256 of X and y (see :func:`fingerprint`).
    info : Dataset
        The registry entry.
    """

    name: str
    task: str
    X: np.ndarray
    y: np.ndarray
    params: dict
    fingerprint: str
    info: Dataset

    @property
    def n_classes(self) -> int | None:
        """Number of classes, or None for regression."""
        return None if self.task == "regression" else int(np.unique(self.y).size)

    @property
    def smallest_class(self) -> int | None:
        """Rows in the least populated class, or None for regression."""
        if self.task == "regression":
            return None
        return int(np.unique(self.y, return_counts=True)[1].min())

    @property
    def minority_share(self) -> float | None:
        """The smallest class's share of the rows, or None for regression."""
        if self.task == "regression":
            return None
        return self.smallest_class / len(self.y)


_REGISTRY: dict[str, Dataset] = {}


def register(dataset: Dataset, *, replace: bool = False) -> Dataset:
    """Add a data set to the registry.

    Parameters
    ----------
    dataset : Dataset
    replace : bool, default=False
        Allow replacing an entry of the same name read from the same file (a
        manifest registered again); a name already taken otherwise is an error.

    Returns
    -------
    Dataset
    """
    if dataset.task not in TASKS:
        raise DatasetError(f"dataset {dataset.name!r}: task must be one of {TASKS}")
    old = _REGISTRY.get(dataset.name)
    if old is not None:
        if not (replace and old.file is not None and old.file == dataset.file):
            where = f" (from {old.file})" if old.file else ""
            raise DatasetError(
                f"dataset name {dataset.name!r} is taken already{where}; give it another name"
            )
        _load_cached.cache_clear()
    _REGISTRY[dataset.name] = dataset
    return dataset


def is_classification(task: str) -> bool:
    """Whether a task is a classification task (the vocabulary's ``family_of``)."""
    return family_of(task) == CLASSIFICATION


def list_datasets() -> list[Dataset]:
    """Every registered data set, sorted by name."""
    return [_REGISTRY[name] for name in sorted(_REGISTRY)]


def get_dataset(name: str) -> Dataset:
    """The registry entry of a name; :class:`DatasetError` naming it if unknown."""
    try:
        return _REGISTRY[name]
    except KeyError:
        raise DatasetError(
            f"unknown dataset {name!r}; 'prunebench datasets' lists the known ones"
        ) from None


def fingerprint(X: np.ndarray, y: np.ndarray) -> str:
    """Hex SHA-256 of a data set's shape, X (as float64) and y.

    Parameters
    ----------
    X : ndarray
    y : ndarray

    Returns
    -------
    str
    """
    X = np.ascontiguousarray(X, dtype=np.float64)
    h = hashlib.sha256()
    h.update(repr(X.shape).encode())
    h.update(X.tobytes())
    y = np.asarray(y)
    if y.dtype.kind in "fiub":
        h.update(np.ascontiguousarray(y, dtype=np.float64).tobytes())
    else:
        h.update("\x1f".join(map(str, y.tolist())).encode())
    return h.hexdigest()


def load_dataset(name: str, **params) -> LoadedDataset:
    """Load a registered data set by name.

    Parameters
    ----------
    name : str
    **params
        Loader parameters overriding the entry's defaults.

    Returns
    -------
    LoadedDataset
    """
    return _load_cached(name, tuple(sorted(params.items())))


@lru_cache(maxsize=32)
def _load_cached(name: str, items: tuple) -> LoadedDataset:
    info = get_dataset(name)
    unknown = set(dict(items)) - set(info.params)
    if unknown:
        raise DatasetError(
            f"dataset {name!r} takes no parameter {sorted(unknown)[0]!r}"
            + (f"; it takes {sorted(info.params)}" if info.params else "")
        )
    params = {**info.params, **dict(items)}
    if info.check is not None:
        info.check(name, params)
    X, y = info.loader(**params)
    if len(y) == 0:
        raise DatasetError(f"dataset {name!r} has no rows")
    X = np.ascontiguousarray(X, dtype=np.float64)
    y = np.asarray(y)
    if info.task == "regression":
        y = y.astype(np.float64)
    if info.expected:
        _check_expected(info, X, y)
    X.flags.writeable = False
    y.flags.writeable = False
    return LoadedDataset(
        name=name,
        task=info.task,
        X=X,
        y=y,
        params=params,
        fingerprint=fingerprint(X, y),
        info=info,
    )


def _check_expected(info: Dataset, X: np.ndarray, y: np.ndarray) -> None:
    # a damaged or replaced file must not pass as the published data
    where = info.file or info.name
    found = {"rows": int(X.shape[0]), "features": int(X.shape[1])}
    if info.task != "regression":
        labels, counts = np.unique(y, return_counts=True)
        found["classes"] = int(labels.size)
        found["class_counts"] = {
            str(k): int(c) for k, c in zip(labels.tolist(), counts, strict=True)
        }
    for key, value in info.expected.items():
        if key in found and found[key] != value:
            raise DatasetError(
                f"{where}: dataset {info.name!r} has {key} {found[key]} where its manifest "
                f"expects {value}; the file is not the one the manifest describes"
            )


def _sklearn_loader(function_name: str):
    def load():
        import sklearn.datasets

        return getattr(sklearn.datasets, function_name)(return_X_y=True)

    load.__name__ = f"load_{function_name}"
    return load


_UCI = "UCI Machine Learning Repository, as bundled with scikit-learn"
for _name, _task, _function, _citation in [
    (
        "iris",
        "multiclass",
        "load_iris",
        "Fisher, R. A. (1936). The use of multiple measurements "
        "in taxonomic problems. Annals of Eugenics 7(2), 179-188.",
    ),
    (
        "wine",
        "multiclass",
        "load_wine",
        "Forina, M. et al. (1988). PARVUS: an extendible package "
        "for data exploration, classification and correlation. Via the UCI repository.",
    ),
    (
        "breast_cancer",
        "binary",
        "load_breast_cancer",
        "Street, W. N., Wolberg, W. H., Mangasarian, "
        "O. L. (1993). Nuclear feature extraction for breast tumor diagnosis. SPIE 1905.",
    ),
    (
        "digits",
        "multiclass",
        "load_digits",
        "Alpaydin, E., Kaynak, C. (1998). Optical "
        "Recognition of Handwritten Digits. UCI repository.",
    ),
    (
        "diabetes",
        "regression",
        "load_diabetes",
        "Efron, B., Hastie, T., Johnstone, I., "
        "Tibshirani, R. (2004). Least angle regression. Annals of Statistics 32(2), 407-499.",
    ),
]:
    register(
        Dataset(
            name=_name,
            task=_task,
            loader=_sklearn_loader(_function),
            source=_UCI
            if _name != "diabetes"
            else "Efron et al. (2004), bundled with scikit-learn",
            licence="bundled with scikit-learn (BSD-3-Clause distribution); original terms of the "
            "source apply",
            citation=_citation,
            kind="bundled",
        )
    )
