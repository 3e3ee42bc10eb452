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


for _entry in read_manifest(VENDORED_MANIFEST, kind="vendored"):
    register(_entry)

__all__ = [
    "TASKS",
    "VENDORED_MANIFEST",
    "Dataset",
    "DatasetError",
    "LoadedDataset",
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
