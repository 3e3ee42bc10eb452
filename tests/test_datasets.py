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
    # KEEL's imbalanced collection: instances and attributes as its table lists them
    # (from memory)
    "abalone19": (4174, 8, 2),  # UCI 4,177 rows; KEEL's abalone copy has 4,174
    "abalone17": (2338, 8, 2),
    "yeast4": (1484, 8, 2),
    "yeast6": (1484, 8, 2),
    "winequality_red4": (1599, 11, 2),
    "winequality_white39": (1482, 11, 2),
    "car_good": (1728, 6, 2),
    "shuttle_c0_c4": (1829, 9, 2),
    "krkopt_draw": (2901, 6, 2),
    "flare_f": (1066, 11, 2),
    "poker_89_5": (2075, 10, 2),
    # plotnine's docstrings in its wheel: diamonds "53940 rows and 10 variables" (less the
    # target), midwest "437 rows and 28 variables" (less the target and 6 dropped columns)
    "diamonds": (53940, 9, None),
    "midwest": (437, 21, None),
    # palmerpenguins: 344 rows, 8 variables (its documentation, from memory); the 2 rows
    # without measurements left out, the target taken away
    "penguins": (342, 7, None),
    # ISLR's documentation (from memory): Wage 3,000 x 11 (less wage and logwage), College
    # 777 x 18 (less Apps), Bikeshare 8,645 x 15 (less bikers, casual and registered)
    "wage": (3000, 9, None),
    "college": (777, 17, None),
    "bikeshare": (8645, 12, None),
}

# KEEL's imbalanced table gives each set's imbalance ratio (majority / minority rows,
# from memory); the class counts in the manifest must reproduce it
KEEL_IMBALANCE_RATIO = {
    "abalone19": 129.44,
    "abalone17": 39.31,
    "yeast4": 28.10,
    "yeast6": 41.40,
    "winequality_red4": 29.17,
    "winequality_white39": 58.28,
    "car_good": 24.04,
    "shuttle_c0_c4": 13.87,
    "krkopt_draw": 26.63,
    "flare_f": 23.79,
    "poker_89_5": 82.00,
}
# the positive class's rows in the UCI originals' descriptions (from memory): yeast's ME2
# and EXC sites, red wine of quality 4, white wine of quality 3 and 9, cars rated good,
# chess endings won in 0 or 1 move, abalones with 19 rings
UCI_POSITIVES = {
    "yeast4": 51,
    "yeast6": 35,
    "winequality_red4": 53,
    "winequality_white39": 20 + 5,
    "car_good": 69,
    "krkopt_draw": 27 + 78,
    "abalone19": 32,
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


@pytest.mark.parametrize("name", sorted(KEEL_IMBALANCE_RATIO))
def test_rare_outcome_sets_have_their_published_class_counts(name):
    data = load_dataset(name)
    labels, counts = np.unique(data.y, return_counts=True)
    counted = dict(zip(labels.tolist(), counts.tolist(), strict=True))
    assert counted == get_dataset(name).expected["class_counts"]
    assert round(counted["negative"] / counted["positive"], 2) == KEEL_IMBALANCE_RATIO[name]
    if name in UCI_POSITIVES:
        assert counted["positive"] == UCI_POSITIVES[name]
    assert data.minority_share == pytest.approx(counted["positive"] / len(data.y))
    assert data.minority_share <= 0.10


def test_at_least_six_rare_outcome_and_eight_regression_sets_are_vendored():
    vendored = [load_dataset(d.name) for d in list_datasets() if d.kind == "vendored"]
    rare = [d for d in vendored if d.task != "regression" and d.minority_share <= 0.10]
    assert len(rare) >= 6 and all(len(d.y) >= 1000 for d in rare)
    regression = [d for d in vendored if d.task == "regression" and len(d.y) >= 300]
    assert len(regression) >= 8


def test_regression_sources_are_encoded_as_the_build_says():
    # diamonds: grade codes, worst = 0 (plotnine's docstring: cut Fair..Ideal, colour J..D,
    # clarity I1..IF); the first row of ggplot2's diamonds is 0.23 carat, Ideal, E, SI2, $326
    diamonds = load_dataset("diamonds")
    assert list(diamonds.X[0, :4]) == [0.23, 4.0, 5.0, 1.0] and diamonds.y[0] == 326
    assert [int(diamonds.X[:, j].max()) for j in (1, 2, 3)] == [4, 6, 7]
    # plotnine's docstring: price from $326 to $18,823
    assert (diamonds.y.min(), diamonds.y.max()) == (326, 18823)
    # bikeshare: months 1-12 in calendar order; the first hour is 1 January, 16 riders
    bikes = load_dataset("bikeshare")
    assert set(np.unique(bikes.X[:, 1])) == set(range(1, 13)) and bikes.y[0] == 16
    # penguins: 9 of the 342 measured birds have no recorded sex (palmerpenguins data)
    assert int(np.isnan(load_dataset("penguins").X[:, 5]).sum()) == 9


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


# ---- descriptions --------------------------------------------------------------------


def test_describe_datasets_gives_counts_and_minority_share_of_the_loaded_data():
    from prunebench.datasets import describe_datasets

    rows = {r["name"]: r for r in describe_datasets(names=["iris", "yeast4", "diabetes"])}
    assert list(rows) == ["diabetes", "iris", "yeast4"]
    # iris: 3 classes of 50 rows (scikit-learn's description)
    assert rows["iris"]["minority_share"] == pytest.approx(1 / 3)
    # yeast4: 51 positives of 1,484 rows (KEEL's table, from memory)
    assert rows["yeast4"]["minority_share"] == pytest.approx(51 / 1484)
    assert (rows["yeast4"]["rows"], rows["yeast4"]["features"]) == (1484, 8)
    assert rows["diabetes"]["minority_share"] is None and rows["diabetes"]["classes"] is None
    assert rows["iris"]["fingerprint"] == load_dataset("iris").fingerprint
    everything = describe_datasets()
    assert [r["name"] for r in everything] == [d.name for d in list_datasets()]
    with pytest.raises(DatasetError, match="unknown dataset 'nope'"):
        describe_datasets(names=["nope"])


def test_datasets_command_lists_minority_share_in_table_and_json():
    import json

    from click.testing import CliRunner

    from prunebench.cli import main

    result = CliRunner().invoke(main, ["datasets", "--json"])
    assert result.exit_code == 0
    rows = {r["name"]: r for r in json.loads(result.output)}
    assert rows["abalone19"]["minority_share"] == pytest.approx(32 / 4174)
    assert rows["randhie"]["minority_share"] is None
    table = CliRunner().invoke(main, ["datasets"]).output.splitlines()
    assert "minor." in table[0].split()
    line = next(t for t in table if t.startswith("abalone19 "))
    assert line.split()[6] == "0.008"  # 32 / 4174 = 0.0077
    help_text = CliRunner().invoke(main, ["datasets", "--help"]).output
    assert "minority share" in help_text


def test_a_file_that_does_not_match_its_expected_counts_is_refused(tmp_path):
    from pathlib import Path

    from prunebench.datasets import register_manifest

    # a copy of pima with one positive too few expected (UCI: 500 negative, 268 positive)
    (tmp_path / "pima.csv.gz").write_bytes(Path(get_dataset("pima").file).read_bytes())
    manifest = tmp_path / "m.toml"
    manifest.write_text(
        '[[dataset]]\nname = "pima_copy"\nfile = "pima.csv.gz"\ntarget = "class"\n'
        'task = "binary"\nexpected = { rows = 768, features = 8, classes = 2, '
        "class_counts = { tested_negative = 500, tested_positive = 267 } }\n"
    )
    register_manifest(manifest)
    with pytest.raises(DatasetError) as err:
        load_dataset("pima_copy")
    assert "pima.csv.gz: dataset 'pima_copy' has class_counts" in str(err.value)
