"""Data sets from files: CSV or Parquet, described by a TOML manifest.

A manifest names one data set per ``[[dataset]]`` table::

    [[dataset]]
    name = "harbour_loans"               # how studies name it
    file = "harbour_loans.csv"           # relative to the manifest; .csv, .csv.gz or .parquet
    target = "defaulted"                 # the column to predict
    task = "binary"                      # binary, multiclass or regression
    drop = ["customer_id"]               # columns that are not features
    categorical = ["region", "product"]  # or "auto": every non-numeric column
    encoding = "utf-8"                   # CSV text encoding (default utf-8)
    separator = ","                      # CSV field separator (default ","; ";" or "\t")
    source = "loan desk extract, 2026-10"
    licence = "internal"
    citation = "Harbour Loans data team"

How columns become features: numeric columns are used as they are, with empty
cells (``""``, ``NA``, ``NaN``, ``?``) kept as NaN, which scikit-learn's trees
route at every split (their built-in missing-value support); categorical columns
are encoded as integer codes of their labels in sorted order (a tree can then
split on any cut of that order), a missing label staying NaN.  Every problem
with a file raises :class:`~prunebench.datasets.DatasetError` naming the file and
the column, and every mistake in a manifest (an unknown key or encoding, a column
named twice, the target also dropped, a bad separator) one naming the manifest and
the key.
"""

from __future__ import annotations

import codecs
import csv
import gzip
import io
import tomllib
from pathlib import Path

import numpy as np
import pandas as pd

from ..vocabulary import counted
from ._registry import TASKS, Dataset, DatasetError

__all__ = ["NA_MARKERS", "encoding_problem", "read_manifest", "read_table", "separator_problem"]

#: cell texts read as missing values
NA_MARKERS = ["", "NA", "NaN", "nan", "?"]
_MANIFEST_KEYS = {
    "name",
    "file",
    "target",
    "task",
    "drop",
    "categorical",
    "encoding",
    "separator",
    "source",
    "licence",
    "citation",
    "expected",
}


def _open_text(path: Path, encoding: str):
    raw = gzip.open(path, "rb") if path.suffix == ".gz" else open(path, "rb")
    return io.TextIOWrapper(raw, encoding=encoding, newline="")


_SEPARATOR_NAMES = {",": "commas", ";": "semicolons", "\t": "tabs", "|": "vertical bars"}
_SEPARATOR_TOML = {",": '","', ";": '";"', "\t": '"\\t"', "|": '"|"'}


def separator_problem(separator: object) -> str | None:
    """Why a CSV field separator cannot be used, or None when it can.

    Parameters
    ----------
    separator : object

    Returns
    -------
    str or None
    """
    if not isinstance(separator, str) or len(separator) != 1:
        return f'must be one character (such as ",", ";" or "\\t"); got {separator!r}'
    if separator.isalnum() or separator in '"\r\n ':
        return (
            f"cannot be {separator!r}: letters, digits, quotes, spaces and line breaks "
            "occur inside fields"
        )
    return None


def encoding_problem(encoding: object) -> str | None:
    """Why a text encoding cannot be used, or None when it can.

    Parameters
    ----------
    encoding : object

    Returns
    -------
    str or None
    """
    if not isinstance(encoding, str):
        return f"must be the name of a text encoding; got {encoding!r}"
    try:
        info = codecs.lookup(encoding)
    except LookupError:
        return f'names no known text encoding ({encoding!r}); use e.g. "utf-8" or "latin-1"'
    if not getattr(info, "_is_text_encoding", True):
        return f"names a codec that is not a text encoding ({encoding!r})"
    return None


def _check_header(path: Path, header: list[str], separator: str) -> None:
    # a file with another separator reads as one column whose name holds them all
    if len(header) != 1:
        return
    for other, words in _SEPARATOR_NAMES.items():
        if other != separator and other in header[0]:
            raise DatasetError(
                f"{path}: the header reads as one column {header[0][:60]!r}; the file seems to "
                f"use {words} as separator: set separator = {_SEPARATOR_TOML[other]} in the "
                "manifest"
            )


def _read_frame(path: Path, encoding: str, separator: str = ",") -> pd.DataFrame:
    if not path.exists():
        raise DatasetError(f"{path}: no such data file")
    if path.stat().st_size == 0:
        raise DatasetError(f"{path}: the data file is empty")
    if path.suffix == ".parquet":
        try:
            frame = pd.read_parquet(path)
        except ImportError:
            raise DatasetError(
                f"{path}: reading Parquet needs pyarrow (pip install pyarrow)"
            ) from None
        except Exception as err:  # noqa: BLE001 - any reader failure is a bad file
            raise DatasetError(f"{path}: cannot read the Parquet file: {err}") from None
        names = [str(c) for c in frame.columns]
        _check_names(path, names)
        return frame.astype(object).where(frame.notna(), None).astype("string")
    problem = encoding_problem(encoding)
    if problem:
        raise DatasetError(f"{path}: the encoding {problem}")
    problem = separator_problem(separator)
    if problem:
        raise DatasetError(f"{path}: the separator {problem}")
    try:
        with _open_text(path, encoding) as text:
            header = next(csv.reader(text, delimiter=separator), None)
            if header is None or not any(h.strip() for h in header):
                raise DatasetError(f"{path}: the data file is empty")
            _check_header(path, header, separator)
            _check_names(path, [h.strip() for h in header])
            text.seek(0)
            frame = pd.read_csv(
                text,
                sep=separator,
                dtype=str,
                na_values=NA_MARKERS,
                keep_default_na=False,
                skipinitialspace=True,
            )
    except UnicodeDecodeError as err:
        raise DatasetError(
            f"{path}: not valid {encoding} text ({err.reason} at byte {err.start}); set "
            "'encoding' in the manifest"
        ) from None
    except pd.errors.ParserError as err:
        raise DatasetError(f"{path}: cannot parse the CSV file: {err}") from None
    frame.columns = [c.strip() for c in frame.columns]
    if frame.empty:
        raise DatasetError(f"{path}: the data file has a header but no rows")
    return frame


def _check_names(path: Path, names: list[str]) -> None:
    seen = set()
    for name in names:
        if name in seen:
            raise DatasetError(f"{path}: column {name!r} appears twice in the header")
        seen.add(name)


def read_table(
    path: str | Path,
    target: str,
    task: str,
    *,
    drop: list[str] | tuple = (),
    categorical: list[str] | tuple | str = (),
    encoding: str = "utf-8",
    separator: str = ",",
) -> tuple[np.ndarray, np.ndarray, list[str]]:
    """Read a CSV or Parquet file into features and target.

    Parameters
    ----------
    path : str or Path
        ``.csv``, ``.csv.gz`` or ``.parquet``.
    target : str
        The column to predict.
    task : {"binary", "multiclass", "regression"}
    drop : sequence of str
        Columns that are not features.
    categorical : sequence of str, or "auto"
        Columns to encode as integer codes of their sorted labels; ``"auto"`` takes
        every column that is not all numeric.
    encoding : str, default="utf-8"
        The CSV file's text encoding.
    separator : str, default=","
        The CSV file's field separator, one character (``";"``, ``"\t"``, ...).

    Returns
    -------
    X : ndarray of shape (n_rows, n_features), float64 with NaN for missing cells
    y : ndarray of shape (n_rows,)
        Class labels as strings, or float targets for regression.
    features : list of str
        The feature columns, in order.
    """
    path = Path(path)
    if task not in TASKS:
        raise DatasetError(f"{path}: task {task!r} is not one of {', '.join(TASKS)}")
    problem = _columns_problem(target, drop, categorical)
    if problem:
        raise DatasetError(f"{path}: {problem}")
    frame = _read_frame(path, encoding, separator)
    columns = list(frame.columns)
    where = f"{path}: column"
    if target not in columns:
        raise DatasetError(
            f"{where} {target!r} (the target) is not in the file; it has "
            f"{', '.join(columns[:12])}{' …' if len(columns) > 12 else ''}"
        )
    for name in [*drop, *([] if categorical == "auto" else categorical)]:
        if name not in columns:
            raise DatasetError(f"{where} {name!r} named in the manifest is not in the file")
    features = [c for c in columns if c != target and c not in set(drop)]
    if not features:
        raise DatasetError(f"{path}: no feature columns are left besides the target")

    y_text = frame[target]
    empty = y_text.isna()
    if empty.any():
        line = int(np.flatnonzero(empty.to_numpy())[0]) + 2
        raise DatasetError(
            f"{where} {target!r} (the target) is empty at line {line}; "
            f"{counted(int(empty.sum()), 'row')} {'has' if empty.sum() == 1 else 'have'} "
            "no target"
        )
    if task == "regression":
        y = _numeric(path, target, y_text)
    else:
        y = y_text.astype(str).to_numpy()
        classes = np.unique(y)
        if classes.size < 2:
            raise DatasetError(
                f"{where} {target!r} (the target) has one class only "
                f"({classes[0]!r}); a classifier needs two or more"
            )
        if task == "binary" and classes.size != 2:
            raise DatasetError(
                f"{where} {target!r} (the target) has {classes.size} classes; "
                "task 'binary' needs exactly 2 (use 'multiclass')"
            )
        if task == "multiclass" and classes.size == 2:
            raise DatasetError(f"{where} {target!r} (the target) has 2 classes; use task 'binary'")

    if categorical == "auto":
        cats = {
            c
            for c in features
            if pd.to_numeric(frame[c], errors="coerce").isna().sum() > frame[c].isna().sum()
        }
    else:
        cats = set(categorical)
    X = np.empty((len(frame), len(features)))
    for j, name in enumerate(features):
        column = frame[name]
        if name in cats:
            labels = sorted(column.dropna().unique())
            codes = column.map({label: float(i) for i, label in enumerate(labels)})
            X[:, j] = codes.astype(float).to_numpy()
        else:
            X[:, j] = _numeric(path, name, column)
    return X, y, features


def _columns_problem(target: str, drop: object, categorical: object) -> str | None:
    # the column lists a manifest gives: each a list of names, none twice, the target not dropped
    for key, names in (("drop", drop), ("categorical", categorical)):
        if key == "categorical" and names == "auto":
            continue
        if not isinstance(names, list | tuple) or not all(isinstance(n, str) for n in names):
            what = ' or "auto"' if key == "categorical" else ""
            return f"key {key!r} must be a list of column names{what}; got {names!r}"
        seen = set()
        for name in names:
            if name in seen:
                return f"key {key!r} names column {name!r} twice"
            seen.add(name)
        if key == "drop" and target in seen:
            return f"key 'drop' lists {target!r}, the target column"
    if categorical != "auto":
        both = sorted(set(drop) & set(categorical))
        if both:
            return f"column {both[0]!r} is listed under both 'drop' and 'categorical'"
    return None


def _numeric(path: Path, name: str, column: pd.Series) -> np.ndarray:
    values = pd.to_numeric(column, errors="coerce")
    junk = values.isna() & column.notna()
    if junk.any():
        row = int(np.flatnonzero(junk.to_numpy())[0])
        raise DatasetError(
            f"{path}: column {name!r} has a non-numeric value {column.iloc[row]!r} at line "
            f"{row + 2}; list the column under 'categorical' or 'drop' in the manifest"
        )
    out = values.astype(float).to_numpy()
    if not np.all(np.isfinite(out[~np.isnan(out)])):
        raise DatasetError(f"{path}: column {name!r} has an infinite value")
    return out


def read_manifest(path: str | Path, kind: str = "file") -> list[Dataset]:
    """The data sets a manifest file describes, ready to register.

    Parameters
    ----------
    path : str or Path
        A TOML file with one ``[[dataset]]`` table per data set.
    kind : str, default="file"
        Recorded on each entry (``"vendored"`` for the files shipped with prunebench).

    Returns
    -------
    list of Dataset
        Each with a loader that reads its file (see :func:`read_table`).
    """
    path = Path(path)
    try:
        doc = tomllib.loads(path.read_text(encoding="utf-8"))
    except FileNotFoundError:
        raise DatasetError(f"{path}: no such dataset manifest") from None
    except (tomllib.TOMLDecodeError, UnicodeDecodeError) as err:
        raise DatasetError(f"{path}: not a valid TOML manifest: {err}") from None
    entries = doc.get("dataset")
    if not isinstance(entries, list) or not entries:
        raise DatasetError(f"{path}: a manifest needs one or more [[dataset]] tables")
    out = []
    for i, entry in enumerate(entries):
        label = f"{path}: [[dataset]] {entry.get('name', i + 1)!r}"
        unknown = set(entry) - _MANIFEST_KEYS
        if unknown:
            raise DatasetError(
                f"{label}: key {sorted(unknown)[0]!r} is not a manifest key; the "
                f"keys are {', '.join(sorted(_MANIFEST_KEYS))}"
            )
        for key in ("name", "file", "target", "task"):
            if not isinstance(entry.get(key), str):
                raise DatasetError(f"{label}: key {key!r} is missing or not a string")
        if entry["task"] not in TASKS:
            raise DatasetError(f"{label}: key 'task' must be one of {', '.join(TASKS)}")
        for key in ("source", "licence", "citation"):
            if key in entry and not isinstance(entry[key], str):
                raise DatasetError(f"{label}: key {key!r} must be a string")
        problem = _columns_problem(
            entry["target"], entry.get("drop", []), entry.get("categorical", [])
        )
        if problem:
            raise DatasetError(f"{label}: {problem}")
        problem = encoding_problem(entry.get("encoding", "utf-8"))
        if problem:
            raise DatasetError(f"{label}: key 'encoding' {problem}")
        problem = separator_problem(entry.get("separator", ","))
        if problem:
            raise DatasetError(f"{label}: key 'separator' {problem}")
        problem = _expected_problem(entry.get("expected", {}))
        if problem:
            raise DatasetError(f"{label}: key 'expected' {problem}")
        file = (path.parent / entry["file"]).resolve()
        out.append(
            Dataset(
                name=entry["name"],
                task=entry["task"],
                loader=_file_loader(file, entry),
                source=entry.get("source", str(file)),
                licence=entry.get("licence", "not stated"),
                citation=entry.get("citation", "not stated"),
                file=str(file),
                target=entry["target"],
                expected=entry.get("expected", {}),
                kind=kind,
            )
        )
    return out


def _expected_problem(expected: object) -> str | None:
    counts = ("rows", "features", "classes")
    if not isinstance(expected, dict):
        return "must be a table such as { rows = 768, features = 8, classes = 2 }"
    for key, value in expected.items():
        if key in counts:
            if isinstance(value, bool) or not isinstance(value, int) or value < 1:
                return f"has {key} = {value!r}; counts are positive integers"
        elif key == "class_counts":
            if not isinstance(value, dict) or not all(
                isinstance(v, int) and not isinstance(v, bool) and v >= 1 for v in value.values()
            ):
                return "has class_counts that is not a table of class = positive count"
        else:
            return f"has {key!r}; it takes {', '.join(counts)} and class_counts"
    return None


def _file_loader(file: Path, entry: dict):
    def load():
        X, y, _ = read_table(
            file,
            entry["target"],
            entry["task"],
            drop=entry.get("drop", ()),
            categorical=entry.get("categorical", ()),
            encoding=entry.get("encoding", "utf-8"),
            separator=entry.get("separator", ","),
        )
        return X, y

    load.__name__ = f"load_{entry['name']}"
    return load
