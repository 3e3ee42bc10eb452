"""Tests of the pandas-free read-only SQL behind ``prunebench sql`` (prunebench/query.py)."""

from __future__ import annotations

import csv
import hashlib
import io
import json
import sqlite3
import subprocess
import sys

import pytest

from prunebench.exceptions import QueryError, StoreError
from prunebench.query import csv_text, fetch, json_text, results_path, table_text

HEAVY = ("pandas", "numpy", "scipy", "sklearn", "matplotlib")


@pytest.fixture
def db(tmp_path):
    """A small SQLite file written with the standard library (the reference reader too)."""
    path = tmp_path / "r.sqlite"
    conn = sqlite3.connect(path)
    conn.execute("CREATE TABLE trials (trial_id TEXT, max_depth INTEGER, loss REAL)")
    conn.executemany(
        "INSERT INTO trials VALUES (?, ?, ?)",
        [("t1", None, 0.25), ("t2", 3, None), ("t3", 12, 0.125)],
    )
    conn.commit()
    conn.close()
    return path


def _digest(path):
    return hashlib.sha256(path.read_bytes()).hexdigest()


def test_fetch_gives_the_columns_and_rows_sqlite_itself_gives(db):
    query = "SELECT trial_id, max_depth, loss FROM trials ORDER BY trial_id"
    columns, rows = fetch(db, query + ";")
    # the reference: the same query through the standard library's sqlite3
    conn = sqlite3.connect(db)
    cursor = conn.execute(query)
    assert columns == [c[0] for c in cursor.description]
    assert rows == cursor.fetchall()
    conn.close()
    assert rows[0] == ("t1", None, 0.25) and isinstance(rows[1][1], int)


@pytest.mark.parametrize(
    ("statement", "said"),
    [
        ("DELETE FROM trials", "refused: DELETE"),
        ("  update trials set loss = 0;", "refused: UPDATE"),
        ("PRAGMA user_version = 7", "refused: PRAGMA user_version"),
        ("WITH x AS (SELECT 1) DELETE FROM trials", "refused"),
        ("SELECT 1; DELETE FROM trials", "one statement"),
        ("   ;  ", "the query is empty"),
    ],
)
def test_fetch_refuses_writes_and_leaves_the_file_alone(db, statement, said):
    before = _digest(db)
    with pytest.raises(QueryError, match=said):
        fetch(db, statement)
    assert _digest(db) == before


def test_fetch_reads_pragmas_and_names_a_failing_query_or_a_missing_file(db, tmp_path):
    columns, rows = fetch(db, "PRAGMA table_info(trials)")
    assert columns[1] == "name" and [r[1] for r in rows] == ["trial_id", "max_depth", "loss"]
    with pytest.raises(QueryError, match="no such column: nope"):
        fetch(db, "SELECT nope FROM trials")
    with pytest.raises(StoreError, match="no such results database"):
        fetch(tmp_path / "missing.sqlite", "SELECT 1")


def test_results_path_keeps_a_database_and_refuses_a_file_that_is_neither(db, tmp_path):
    assert results_path(db) == db
    notes = tmp_path / "notes.txt"
    notes.write_text("not a study\n")
    with pytest.raises(StoreError, match="not a results database"):
        results_path(notes)


def test_json_and_csv_keep_integers_and_show_null_as_null_and_empty():
    columns, rows = ["trial_id", "max_depth", "loss"], [("t1", None, 0.25), ("t,2", 3, None)]
    assert json.loads(json_text(columns, rows)) == [
        {"trial_id": "t1", "max_depth": None, "loss": 0.25},
        {"trial_id": "t,2", "max_depth": 3, "loss": None},
    ]
    text = csv_text(columns, rows)
    assert text.splitlines() == ["trial_id,max_depth,loss", "t1,,0.25", '"t,2",3,']
    # the reference: the standard library's csv reader reads the fields back
    assert list(csv.reader(io.StringIO(text)))[2] == ["t,2", "3", ""]
    assert json.loads(json_text(columns, [])) == [] and csv_text(columns, []) == (
        "trial_id,max_depth,loss\n"
    )


def test_the_table_right_aligns_leaves_null_blank_and_cuts_long_cells():
    rows = [(None, 3, "ab"), (12345, 4, "x" * 50)]
    lines = table_text(["max_depth", "n", "name"], rows).splitlines()
    width = 40  # a cell of 50 characters shows as 37 and "..."
    assert lines[0] == "max_depth n " + "name".rjust(width)
    assert lines[1] == " " * 9 + " 3 " + "ab".rjust(width)
    assert lines[2] == "    12345 4 " + "x" * 37 + "..."
    assert "None" not in lines[1] and ".0" not in lines[2]
    assert table_text(["n"], []) == "(no rows)"


def test_the_sql_command_runs_without_pandas(db):
    # a fresh interpreter: import the command line and query module, then run sql in-process
    code = (
        "import sys\n"
        "import prunebench.cli, prunebench.query\n"
        f"before = [m for m in {HEAVY!r} if m in sys.modules]\n"
        "try:\n"
        "    prunebench.cli.main(args=sys.argv[1:], prog_name='prunebench')\n"
        "except SystemExit as exit:\n"
        "    assert not exit.code, exit.code\n"
        f"after = [m for m in {HEAVY!r} if m in sys.modules]\n"
        "print('loaded:', before, after)\n"
    )
    query = "SELECT trial_id, max_depth FROM trials ORDER BY trial_id"
    for flag in ([], ["--json"], ["--csv"]):
        out = subprocess.run(
            [sys.executable, "-c", code, "sql", "--db", str(db), query, *flag],
            capture_output=True,
            text=True,
            check=True,
        )
        assert out.stdout.splitlines()[-1] == "loaded: [] []"
        assert "t3" in out.stdout and "12" in out.stdout
