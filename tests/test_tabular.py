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
    assert "1 trial" in result.output and "done" in result.output


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


# ---- manifest mistakes (issue 12): one line naming the manifest and the key -------------

MANIFEST_MISTAKES = [
    # before: a LookupError traceback from the codec machinery
    ("unknown encoding", 'encoding = "utf-9"\n', "key 'encoding' names no known text encoding"),
    ("encoding not text", 'encoding = "rot13"\n', None),  # rot13 is a str-to-str codec
    ("encoding not a string", "encoding = 8\n", "key 'encoding' must be the name"),
    # before: accepted silently
    ("categorical twice", None, "key 'categorical' names column 'region' twice"),
    ("target dropped", None, "key 'drop' lists 'defaulted', the target column"),
    ("drop twice", None, "key 'drop' names column 'customer_id' twice"),
    ("drop and categorical", None, "'region' is listed under both 'drop' and 'categorical'"),
    ("drop not a list", None, "key 'drop' must be a list of column names"),
    ("separator two characters", 'separator = ";;"\n', "key 'separator' must be one character"),
    ("separator empty", 'separator = ""\n', "key 'separator' must be one character"),
    ("separator a letter", 'separator = "x"\n', "key 'separator' cannot be 'x'"),
    ("separator a number", "separator = 1\n", "key 'separator' must be one character"),
    ("expected not counts", "expected = { rows = -1 }\n", "key 'expected' has rows = -1"),
]


def _mistaken_manifest(tmp_path, label, extra):
    manifest = _manifest(tmp_path, name="mistake", extra=extra or "")
    text = manifest.read_text()
    if label == "categorical twice":
        text = text.replace('["region", "product"]', '["region", "product", "region"]')
    elif label == "target dropped":
        text = text.replace('drop = ["customer_id"]', 'drop = ["customer_id", "defaulted"]')
    elif label == "drop twice":
        text = text.replace('drop = ["customer_id"]', 'drop = ["customer_id", "customer_id"]')
    elif label == "drop and categorical":
        text = text.replace('drop = ["customer_id"]', 'drop = ["customer_id", "region"]')
    elif label == "drop not a list":
        text = text.replace('drop = ["customer_id"]', 'drop = "customer_id"')
    manifest.write_text(text)
    return manifest


@pytest.mark.parametrize("case", MANIFEST_MISTAKES, ids=[c[0] for c in MANIFEST_MISTAKES])
def test_manifest_mistakes_are_one_line_naming_manifest_and_key(case, tmp_path):
    label, extra, phrase = case
    manifest = _mistaken_manifest(tmp_path, label, extra)
    with pytest.raises(DatasetError) as err:
        register_manifest(manifest)
    message = str(err.value)
    assert message.startswith(f"{manifest}: [[dataset]] 'mistake': ") and "\n" not in message
    if phrase:
        assert phrase in message, message
    else:
        assert "key 'encoding'" in message and "not a text encoding" in message


@pytest.mark.parametrize("label", ["unknown encoding", "categorical twice", "target dropped"])
def test_manifest_mistakes_exit_2_from_every_command_with_nothing_written(label, tmp_path):
    extra = 'encoding = "utf-9"\n' if label == "unknown encoding" else None
    manifest = _mistaken_manifest(tmp_path, label, extra)
    study = _study(tmp_path, manifest)
    before = sorted(p.name for p in tmp_path.iterdir())
    for command in (
        ["check", str(study)],
        ["conduct", str(study)],
        ["datasets", "--manifest", str(manifest)],
    ):
        result = CliRunner().invoke(main, command)
        assert result.exit_code == 2, (command, result.output)
        assert result.output.count("\n") == 1 and str(manifest) in result.output
        assert result.exception is None or isinstance(result.exception, SystemExit)
    assert sorted(p.name for p in tmp_path.iterdir()) == before


def test_read_table_refuses_an_unknown_encoding_naming_the_file(tmp_path):
    (tmp_path / "loans.csv").write_text(LOANS)
    with pytest.raises(DatasetError, match=r"loans\.csv: the encoding names no known text"):
        read_table(tmp_path / "loans.csv", "defaulted", "binary", encoding="bogus-8")
    with pytest.raises(DatasetError, match="key 'categorical' names column 'region' twice"):
        read_table(tmp_path / "loans.csv", "defaulted", "binary", categorical=["region"] * 2)


@pytest.mark.parametrize(
    "separator, toml, words",
    [(";", '";"', "semicolons"), ("\t", '"\\t"', "tabs"), ("|", '"|"', "vertical bars")],
)
def test_another_separator_is_named_and_the_separator_key_reads_it(
    separator, toml, words, tmp_path
):
    other = LOANS.replace(",", separator)
    name = "sep_" + words.replace(" ", "_")
    manifest = _manifest(tmp_path, csv_text=other, name=name)
    register_manifest(manifest)
    with pytest.raises(DatasetError) as err:
        load_dataset(name)
    message = str(err.value)
    # before: "column 'defaulted' (the target) is not in the file; it has customer_id;region;…"
    assert message.startswith(f"{tmp_path / 'loans.csv'}: the header reads as one column")
    assert f"seems to use {words} as separator: set separator = {toml} in the manifest" in message
    assert "\n" not in message
    # the key the message names reads the file exactly as the comma-separated one
    manifest.write_text(manifest.read_text() + f"separator = {toml}\n")
    register_manifest(manifest)
    (tmp_path / "comma.csv").write_text(LOANS)
    X, y, _ = read_table(
        tmp_path / "comma.csv",
        "defaulted",
        "binary",
        drop=["customer_id"],
        categorical=["region", "product"],
    )
    data = load_dataset(name)
    np.testing.assert_array_equal(data.X, X)
    np.testing.assert_array_equal(data.y, y)


def test_a_quoted_field_holding_a_semicolon_is_not_mistaken_for_a_separator(tmp_path):
    text = LOANS.replace("north", '"north;west"')
    (tmp_path / "loans.csv").write_text(text)
    X, _, _ = read_table(
        tmp_path / "loans.csv", "defaulted", "binary", drop=["customer_id"], categorical="auto"
    )
    assert X.shape == (12, 3)
