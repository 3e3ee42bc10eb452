"""Read-only SQL on a results database, without pandas: what ``prunebench sql`` runs.

:func:`fetch` refuses every statement that would write (a pattern check before it
runs, an SQLite authorizer while it runs, and a read-only connection from
:func:`prunebench.store.connect_readonly` beneath both) and returns plain column
names and rows; :func:`prunebench.tables.run_query` builds the typed DataFrame
from them.  :func:`results_path` says which database a path means.  The
:func:`json_text`, :func:`csv_text` and :func:`table_text` printers are the
``--json``, ``--csv`` and plain outputs of ``prunebench sql``.  Nothing here
imports pandas, NumPy or SciPy, so the command starts quickly.
"""

from __future__ import annotations

import csv
import io
import json
import math
import re
import sqlite3
from pathlib import Path

from .exceptions import QueryError, StoreError
from .store import SQLITE_HEADER, connect_readonly

__all__ = ["csv_text", "fetch", "json_text", "results_path", "table_text"]

# ---- which file --------------------------------------------------------------------------


def results_path(path: str | Path) -> Path:
    """The results database to read for ``path``: the database itself, or a study file's.

    A study file names its database (its ``database`` key, else ``<stem>.sqlite`` beside
    it), so a reader may be given either.  Any other file that is not SQLite is refused
    here as not a results database, rather than reported as damaged by SQLite.

    Parameters
    ----------
    path : str or Path
        A results database or a study file; a missing path is returned as it is (the
        store says it is missing).

    Returns
    -------
    Path

    Raises
    ------
    StoreError
        The file is neither SQLite nor a study file, or is a study file whose database
        does not exist yet (the message names it).
    """
    path = Path(path)
    try:
        with open(path, "rb") as f:
            head = f.read(len(SQLITE_HEADER))
    except OSError:
        return path
    if not head or head == SQLITE_HEADER:
        return path
    from .study import study_database

    database = study_database(path)
    if database is None:
        raise StoreError(
            f"database={path}: not a results database (neither an SQLite file nor a study file)"
        )
    if not database.exists():
        raise StoreError(
            f"database={path} is a study file, not a results database; the database it "
            f"names, {database}, does not exist (conduct the study first, or give the "
            "database it was conducted into)"
        )
    return database


# ---- read-only SQL ----------------------------------------------------------------------

_WRITES = re.compile(
    r"^\s*(insert|update|delete|replace|drop|create|alter|attach|detach|vacuum|reindex|analyze|"
    r"begin|commit|rollback|savepoint|release)\b",
    re.IGNORECASE,
)
# pragmas that only read; those in the first set take a table or index name as argument
_READ_PRAGMAS_WITH_ARGUMENT = {
    "table_info",
    "table_xinfo",
    "index_list",
    "index_info",
    "index_xinfo",
    "foreign_key_list",
}
_READ_PRAGMAS = _READ_PRAGMAS_WITH_ARGUMENT | {
    "user_version",
    "schema_version",
    "integrity_check",
    "quick_check",
    "journal_mode",
    "page_count",
    "page_size",
    "database_list",
    "compile_options",
    "table_list",
}


def _authorize(action, arg1, arg2, dbname, source):
    # second line of defence behind the read-only connection: refuse every write action
    denied = {
        sqlite3.SQLITE_INSERT,
        sqlite3.SQLITE_UPDATE,
        sqlite3.SQLITE_DELETE,
        sqlite3.SQLITE_ATTACH,
        sqlite3.SQLITE_DETACH,
        sqlite3.SQLITE_ALTER_TABLE,
        sqlite3.SQLITE_CREATE_TABLE,
        sqlite3.SQLITE_CREATE_INDEX,
        sqlite3.SQLITE_CREATE_VIEW,
        sqlite3.SQLITE_CREATE_TRIGGER,
        sqlite3.SQLITE_DROP_TABLE,
        sqlite3.SQLITE_DROP_INDEX,
        sqlite3.SQLITE_DROP_VIEW,
        sqlite3.SQLITE_DROP_TRIGGER,
        sqlite3.SQLITE_CREATE_TEMP_TABLE,
        sqlite3.SQLITE_CREATE_TEMP_VIEW,
        sqlite3.SQLITE_TRANSACTION,
    }
    if action == sqlite3.SQLITE_UPDATE and arg1 == "sqlite_master" and source is None:
        # SQLite reports its own schema columns as "updated" when it sets up a table-valued
        # pragma function (pragma_table_info(...)); the connection is read-only regardless
        return sqlite3.SQLITE_OK
    if action in denied:
        return sqlite3.SQLITE_DENY
    if action == sqlite3.SQLITE_PRAGMA:
        name = (arg1 or "").lower()
        if name not in _READ_PRAGMAS or (
            arg2 is not None and name not in _READ_PRAGMAS_WITH_ARGUMENT
        ):
            return sqlite3.SQLITE_DENY
    return sqlite3.SQLITE_OK


def fetch(path: str | Path, sql: str) -> tuple[list[str], list[tuple]]:
    """Run one read-only SQL statement against a results database.

    The file is opened read-only and every statement that would write (INSERT, UPDATE,
    DELETE, DROP, CREATE, ALTER, ATTACH, a PRAGMA that sets a value, transactions, …) is
    refused with a message before it runs.

    Parameters
    ----------
    path : str or Path
    sql : str

    Returns
    -------
    columns : list of str
        The result's column names, in order.
    rows : list of tuple
        The rows as SQLite gives them (NULL is None).

    Raises
    ------
    QueryError
        The statement is empty, would write, is more than one statement, or fails.
    StoreError
        The file is missing or cannot be read.
    """
    statement = sql.strip().rstrip(";").strip()
    if not statement:
        raise QueryError("the query is empty")
    match = _WRITES.match(statement)
    if match:
        raise QueryError(
            f"refused: {match.group(1).upper()} would change the results; "
            "'prunebench sql' runs read-only queries"
        )
    pragma = re.match(r"^\s*pragma\s+(?:\w+\.)?(\w+)\s*(=|\()?", statement, re.IGNORECASE)
    if pragma and (
        pragma.group(1).lower() not in _READ_PRAGMAS
        or pragma.group(2) == "="
        or (pragma.group(2) == "(" and pragma.group(1).lower() not in _READ_PRAGMAS_WITH_ARGUMENT)
    ):
        raise QueryError(
            f"refused: PRAGMA {pragma.group(1)} may change the database; "
            "'prunebench sql' runs read-only queries"
        )
    conn = connect_readonly(path)
    try:
        conn.set_authorizer(_authorize)
        try:
            # SQLite itself refuses a second statement (a trailing comment is not one)
            cursor = conn.execute(statement)
        except sqlite3.ProgrammingError as err:
            if "one statement" in str(err):
                raise QueryError("give one statement at a time") from None
            raise QueryError(f"the query failed: {err}") from None
        except sqlite3.DatabaseError as err:
            message = str(err)
            # "cannot modify folds because it is a view": folds is a view since schema 2
            refusals = ("not authorized", "readonly", "may not be modified", "cannot modify")
            if any(w in message for w in refusals):
                raise QueryError(
                    "refused: the statement would change the results; "
                    "'prunebench sql' runs read-only queries"
                ) from None
            raise QueryError(f"the query failed: {message}") from None
        columns = [c[0] for c in cursor.description or []]
        return columns, cursor.fetchall()
    finally:
        conn.close()


# ---- printing the rows -------------------------------------------------------------------

_WIDEST = 40  # a plain-table cell longer than this is cut to 37 characters and "..."


def _plain(value) -> object:
    # JSON has no NaN or infinity; SQLite never returns NaN, but a REAL can be infinite
    if isinstance(value, float) and not math.isfinite(value):
        return None
    if isinstance(value, bytes):
        return value.hex()
    return value


def json_text(columns: list[str], rows: list[tuple]) -> str:
    """The rows as a JSON list of objects: NULL is null, integers stay integers.

    Parameters
    ----------
    columns : list of str
    rows : list of tuple

    Returns
    -------
    str
    """
    records = [{c: _plain(v) for c, v in zip(columns, row, strict=True)} for row in rows]
    return json.dumps(records, indent=2)


def csv_text(columns: list[str], rows: list[tuple]) -> str:
    """The rows as CSV with a header line: NULL is an empty field.

    Parameters
    ----------
    columns : list of str
    rows : list of tuple

    Returns
    -------
    str
    """
    out = io.StringIO()
    writer = csv.writer(out, lineterminator="\n")
    writer.writerow(columns)
    for row in rows:
        writer.writerow(["" if v is None else _plain(v) for v in row])
    return out.getvalue()


def _cell(value) -> str:
    text = "" if value is None else str(_plain(value))
    text = text.replace("\n", " ")
    return text if len(text) <= _WIDEST else text[: _WIDEST - 3] + "..."


def table_text(columns: list[str], rows: list[tuple]) -> str:
    """The rows as a plain table: right-aligned columns, NULL a blank cell.

    Parameters
    ----------
    columns : list of str
    rows : list of tuple

    Returns
    -------
    str
        ``(no rows)`` when there are none.
    """
    if not rows:
        return "(no rows)"
    cells = [[_cell(v) for v in row] for row in rows]
    widths = [max([len(str(c))] + [len(r[i]) for r in cells]) for i, c in enumerate(columns)]
    lines = [" ".join(str(c).rjust(w) for c, w in zip(columns, widths, strict=True))]
    lines += [" ".join(v.rjust(w) for v, w in zip(r, widths, strict=True)) for r in cells]
    return "\n".join(line.rstrip() for line in lines)
