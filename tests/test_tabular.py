"""Tests of data sets read from files through a manifest (prunebench.datasets.tabular)."""

from __future__ import annotations

import textwrap

import numpy as np
import pytest
from click.testing import CliRunner

from prunebench.cli import main
from prunebench.datasets import DatasetError, load_dataset, read_table, register_manifest

# invented demo data: a loan desk's extract
LOANS = """\
customer_id,region,income,product,defaulted
1,north,52000,card,no
2,south,,loan,no
3,east,61000,card,yes
4,north,38000,,no
5,south,45000,loan,yes
6,east,70000,card,no
7,north,29000,loan,yes
8,south,58000,card,no
9,east,33000,loan,yes
10,north,64000,card,no
11,south,41000,loan,yes
12,east,56000,card,no
"""


def _manifest(tmp_path, csv_text=LOANS, name="loans", extra="", file="loans.csv", raw=None):
    data = tmp_path / file
    if raw is not None:
        data.write_bytes(raw)
    elif csv_text is not None:
        data.write_text(csv_text)
    manifest = tmp_path / f"{name}.toml"
    manifest.write_text(
        textwrap.dedent(
            f"""\
            [[dataset]]
            name = "{name}"
            file = "{file}"
            target = "defaulted"
            task = "binary"
            drop = ["customer_id"]
            categorical = ["region", "product"]
            source = "invented demo data"
            """
        )
        + extra
    )
    return manifest


def test_team_file_is_read_encoded_and_registered(tmp_path):
    manifest = _manifest(tmp_path)
    (entry,) = register_manifest(manifest)
    data = load_dataset("loans")
    assert data.X.shape == (12, 3) and data.task == "binary"
    # categoricals: integer codes of the sorted labels; missing cells stay NaN
    region = data.X[:, 0]
    assert list(region[:3]) == [1.0, 2.0, 0.0]  # east=0, north=1, south=2
    assert np.isnan(data.X[1, 1]) and np.isnan(data.X[3, 2])
    assert set(data.y) == {"no", "yes"}
    assert entry.source == "invented demo data" and entry.file.endswith("loans.csv")


def test_parquet_files_read_like_csv(tmp_path):
    pd = pytest.importorskip("pandas")
    pytest.importorskip("pyarrow")
    import io

    frame = pd.read_csv(io.StringIO(LOANS))
    frame.to_parquet(tmp_path / "loans.parquet")
    X_csv, y_csv, _ = read_table(
        _manifest(tmp_path).parent / "loans.csv",
        "defaulted",
        "binary",
        drop=["customer_id"],
        categorical=["region", "product"],
    )
    X_pq, y_pq, _ = read_table(
        tmp_path / "loans.parquet",
        "defaulted",
        "binary",
        drop=["customer_id"],
        categorical=["region", "product"],
    )
    np.testing.assert_array_equal(X_csv, X_pq)
    np.testing.assert_array_equal(y_csv, y_pq)


BAD = [
    ("missing file", dict(csv_text=None), "no such data file", None),
    ("empty file", dict(csv_text=""), "empty", None),
    (
        "missing target",
        dict(csv_text=LOANS.replace("defaulted", "late")),
        "is not in the file",
        "defaulted",
    ),
    ("one class", dict(csv_text=LOANS.replace(",yes", ",no")), "one class only", "defaulted"),
    (
        "junk in a numeric column",
        dict(csv_text=LOANS.replace("61000", "61k")),
        "non-numeric value '61k' at line 4",
        "income",
    ),
    (
        "duplicate column",
        dict(csv_text=LOANS.replace("product", "income", 1)),
        "appears twice",
        "income",
    ),
    (
        "encoding",
        dict(raw=LOANS.replace("north", "n\xf6rth").encode("latin-1")),
        "not valid utf-8 text",
        None,
    ),
    (
        "empty target",
        dict(csv_text=LOANS.replace("card,no\n2", "card,\n2")),
        "empty at line 2",
        "defaulted",
    ),
]


@pytest.mark.parametrize("case", BAD, ids=[c[0] for c in BAD])
def test_bad_data_names_the_file_and_column(case, tmp_path):
    label, kwargs, phrase, column = case
    manifest = _manifest(tmp_path, name=f"bad_{abs(hash(label))}", **kwargs)
    register_manifest(manifest)
    with pytest.raises(DatasetError) as err:
        load_dataset(manifest.stem)
    message = str(err.value)
    assert str(tmp_path / "loans.csv") in message and phrase in message, message
    if column:
        assert f"'{column}'" in message
    assert "\n" not in message


def _study(tmp_path, manifest, folds=3):
    study = tmp_path / "study.toml"
    study.write_text(
        f'name = "loan-desk"\nseed = 1\ndatasets = [{{ manifest = "{manifest.name}" }}]\n'
        f"[outer]\nrepeats = 1\nfolds = {folds}\n[factors]\ninner_folds = [2]\n"
    )
    return study


@pytest.mark.parametrize("case", BAD, ids=[c[0] for c in BAD])
def test_a_study_naming_bad_data_fails_before_any_trial(case, tmp_path):
    label, kwargs, phrase, _ = case
    manifest = _manifest(tmp_path, name=f"study_bad_{abs(hash(label))}", **kwargs)
    study = _study(tmp_path, manifest)
    result = CliRunner().invoke(main, ["conduct", str(study)])
    assert result.exit_code == 2, result.output
    assert phrase in result.output and result.output.count("\n") == 1
    assert not (tmp_path / "study.sqlite").exists()


def test_a_class_smaller_than_the_outer_folds_is_refused_naming_file_and_column(tmp_path):
    manifest = _manifest(tmp_path, name="small_class")
    study = _study(tmp_path, manifest, folds=6)  # 'yes' has 5 rows
    result = CliRunner().invoke(main, ["check", str(study)])
    assert result.exit_code == 2
    assert "class 'yes'" in result.output and "column 'defaulted'" in result.output
    assert str(tmp_path / "loans.csv") in result.output


def test_a_study_runs_on_team_data(tmp_path):
    manifest = _manifest(tmp_path, name="loans_run")
    study = _study(tmp_path, manifest)
    result = CliRunner().invoke(main, ["conduct", str(study)])
    assert result.exit_code == 0, result.output
    assert "1 trials done" in result.output


def test_bad_manifests(tmp_path):
    bad = tmp_path / "m.toml"
    bad.write_text('[[dataset]]\nname = "x"\nfile = "a.csv"\ntarget = "y"\ntask = "ordinal"\n')
    with pytest.raises(DatasetError, match="key 'task' must be one of"):
        register_manifest(bad)
    bad.write_text(
        '[[dataset]]\nname = "x"\nfile = "a.csv"\ntarget = "y"\ntask = "binary"\ncolour = "red"\n'
    )
    with pytest.raises(DatasetError, match="key 'colour' is not a manifest key"):
        register_manifest(bad)
    with pytest.raises(DatasetError, match="no such dataset manifest"):
        register_manifest(tmp_path / "absent.toml")
