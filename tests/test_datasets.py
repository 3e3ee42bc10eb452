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


# ---- vendored open data ---------------------------------------------------------------

# Published counts (rows, features, classes) from the data sets' UCI / ELENA / statsmodels
# descriptions, as we remember them; where KEEL's copy differs, its count and why.
PUBLISHED = {
    "pima": (768, 8, 2),
    "german": (1000, 20, 2),
    "australian": (690, 14, 2),
    "spambase": (4597, 57, 2),  # UCI 4,601; KEEL's copy has 4,597
    "magic": (19020, 10, 2),
    "phoneme": (5404, 5, 2),
    "satimage": (6435, 36, 6),
    "segment": (2310, 19, 7),
    "vehicle": (846, 18, 4),
    "sonar": (208, 60, 2),
    "ionosphere": (351, 33, 2),  # UCI 34 features; KEEL drops the constant second one
    "mushroom": (5644, 22, 2),  # UCI 8,124 rows; KEEL drops those with a missing value
    "letter": (20000, 16, 26),
    "randhie": (20190, 9, None),
    "auto_mpg": (398, 7, None),
}


@pytest.mark.parametrize("name", sorted(PUBLISHED))
def test_vendored_files_match_manifest_and_published_counts(name):
    info = get_dataset(name)
    assert info.kind == "vendored" and info.source and info.licence and info.citation
    data = load_dataset(name)
    rows, features, classes = PUBLISHED[name]
    assert (data.X.shape, data.n_classes) == ((rows, features), classes)
    expected = info.expected
    assert (expected["rows"], expected["features"], expected.get("classes")) == (
        rows,
        features,
        classes,
    )


def test_vendored_sets_cover_sizes_kinds_and_class_counts():
    names = [d.name for d in list_datasets() if d.kind == "vendored"]
    sets = [load_dataset(n) for n in names]
    classification = [d for d in sets if d.task != "regression"]
    assert len(classification) >= 10 and len(sets) - len(classification) >= 2
    assert min(d.X.shape[0] for d in classification) < 300
    assert max(d.X.shape[0] for d in classification) >= 19000
    assert any(d.task == "multiclass" and d.n_classes > 10 for d in classification)
    assert get_dataset("mushroom").file.endswith(".csv.gz")


def test_categorical_columns_are_ordinal_codes_and_missing_stays_nan():
    data = load_dataset("mushroom")
    assert np.all(data.X == np.round(data.X)) and data.X.min() == 0
    auto = load_dataset("auto_mpg")
    horsepower = auto.X[:, 2]
    assert np.isnan(horsepower).sum() == 6  # UCI: six unknown horsepower values
    assert set(np.unique(auto.X[:, 6])) == {0.0, 1.0, 2.0}  # origin: Europe, Japan, USA


def test_fingerprints_are_stable_across_processes():
    import subprocess
    import sys

    code = (
        "from prunebench.datasets import load_dataset;"
        "print(load_dataset('german').fingerprint, load_dataset('led', seed=3).fingerprint)"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.split() == [
        load_dataset("german").fingerprint,
        load_dataset("led", seed=3).fingerprint,
    ]
