"""Tests of the dataset registry (prunebench.datasets)."""

from __future__ import annotations

import numpy as np
import pytest

from prunebench.datasets import DatasetError, fingerprint, get_dataset, list_datasets, load_dataset

# row, feature and class counts of the sets bundled with scikit-learn, as its
# documentation describes them
BUNDLED = {
    "iris": ("multiclass", 150, 4, 3),
    "wine": ("multiclass", 178, 13, 3),
    "breast_cancer": ("binary", 569, 30, 2),
    "digits": ("multiclass", 1797, 64, 10),
    "diabetes": ("regression", 442, 10, None),
}


@pytest.mark.parametrize("name", sorted(BUNDLED))
def test_bundled_sets_have_their_published_shapes(name):
    task, rows, features, classes = BUNDLED[name]
    data = load_dataset(name)
    assert (data.task, data.X.shape, data.n_classes) == (task, (rows, features), classes)
    info = get_dataset(name)
    assert info.source and info.licence and info.citation


def test_registry_lists_every_bundled_set():
    assert set(BUNDLED) <= {d.name for d in list_datasets()}


def test_fingerprints_are_stable_and_change_with_any_value():
    a = load_dataset("wine")
    assert a.fingerprint == fingerprint(np.array(a.X), np.array(a.y))
    X = np.array(a.X)
    X[7, 3] += 1e-9
    assert fingerprint(X, a.y) != a.fingerprint
    y = np.array(a.y)
    y[0] = (y[0] + 1) % 3
    assert fingerprint(a.X, y) != a.fingerprint
    assert fingerprint(a.X[:, :-1], a.y) != a.fingerprint


def test_loaded_arrays_are_read_only():
    data = load_dataset("iris")
    with pytest.raises(ValueError):
        data.X[0, 0] = 1.0


def test_unknown_dataset_and_parameter():
    with pytest.raises(DatasetError, match="unknown dataset 'nope'"):
        load_dataset("nope")
    with pytest.raises(DatasetError, match="takes no parameter 'n'"):
        load_dataset("iris", n=5)
