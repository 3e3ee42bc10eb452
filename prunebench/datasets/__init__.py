"""The dataset registry: every data set a study can name.

Each entry has a name, a task (``binary``, ``multiclass`` or ``regression``), a
loader, its source, licence and citation.  :func:`load_dataset` returns the
arrays with a fingerprint (a hash of X and y) that is stored with every trial,
so results can always be traced to the exact data they came from.

Four kinds of entry: the sets bundled with scikit-learn; open data sets vendored
as compressed CSV under ``vendored/`` (see its ``manifest.toml``); simulation
benchmarks generated from their published definitions (:mod:`.simulated`); and a
team's own files, described by a manifest (:mod:`.tabular`) and registered with
:func:`register_manifest`.
"""

from collections.abc import Iterable
from pathlib import Path

from . import simulated
from ._registry import (
    TASKS,
    Dataset,
    DatasetError,
    LoadedDataset,
    fingerprint,
    get_dataset,
    is_classification,
    list_datasets,
    load_dataset,
    register,
)
from .tabular import read_manifest, read_table

VENDORED_MANIFEST = Path(__file__).with_name("vendored") / "manifest.toml"


def register_manifest(path: str | Path) -> list[Dataset]:
    """Register every data set a manifest describes; a manifest read again replaces its own.

    Parameters
    ----------
    path : str or Path

    Returns
    -------
    list of Dataset
    """
    return [register(d, replace=True) for d in read_manifest(path)]


def describe_datasets(
    manifests: Iterable[str | Path] = (), names: Iterable[str] | None = None
) -> list[dict]:
    """Describe data sets: task, size, class balance, source, licence and parameters.

    Every set is loaded (simulations at their default parameters), so the counts are
    those of the data a study gets.

    Parameters
    ----------
    manifests : iterable of str or Path, default=()
        Manifests whose data sets to register first (see :func:`register_manifest`).
    names : iterable of str, optional
        The data sets to describe; every registered one when None.

    Returns
    -------
    list of dict
        One per data set, sorted by name, with keys ``name``, ``kind``, ``task``,
        ``rows``, ``features``, ``classes`` (None for regression), ``minority_share``
        (the smallest class's share of the rows; None for regression), ``source``,
        ``licence``, ``citation``, ``params`` and ``fingerprint``.
    """
    for manifest in manifests:
        register_manifest(manifest)
    infos = list_datasets() if names is None else sorted(map(get_dataset, names), key=_name)
    rows = []
    for info in infos:
        data = load_dataset(info.name)
        rows.append(
            {
                "name": info.name,
                "kind": info.kind,
                "task": info.task,
                "rows": int(data.X.shape[0]),
                "features": int(data.X.shape[1]),
                "classes": data.n_classes,
                "minority_share": data.minority_share,
                "source": info.source,
                "licence": info.licence,
                "citation": info.citation,
                "params": data.params,
                "fingerprint": data.fingerprint,
            }
        )
    return rows


def _name(info: Dataset) -> str:
    return info.name


for _entry in read_manifest(VENDORED_MANIFEST, kind="vendored"):
    register(_entry)

__all__ = [
    "TASKS",
    "VENDORED_MANIFEST",
    "Dataset",
    "DatasetError",
    "LoadedDataset",
    "describe_datasets",
    "fingerprint",
    "get_dataset",
    "is_classification",
    "list_datasets",
    "load_dataset",
    "read_manifest",
    "read_table",
    "register",
    "register_manifest",
    "simulated",
]
