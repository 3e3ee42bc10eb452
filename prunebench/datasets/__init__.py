"""The dataset registry: every data set a study can name.

Each entry has a name, a task (``binary``, ``multiclass`` or ``regression``), a
loader, its source, licence and citation.  :func:`load_dataset` returns the
arrays with a fingerprint (a hash of X and y) that is stored with every trial,
so results can always be traced to the exact data they came from.
"""

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

__all__ = [
    "TASKS",
    "Dataset",
    "DatasetError",
    "LoadedDataset",
    "fingerprint",
    "get_dataset",
    "is_classification",
    "list_datasets",
    "load_dataset",
    "register",
]
