"""Reading results: pandas for notebooks, read-only SQL, tidy exports, progress.

:func:`open_results` is the notebook entry point; :func:`run_query` backs
``prunebench sql`` and refuses anything that writes; :func:`export_tables` backs
``prunebench export``; :func:`progress_report` backs ``prunebench progress``.
"""

from __future__ import annotations

import datetime as _dt
import re
import sqlite3
from pathlib import Path

import pandas as pd

from . import stats
from .exceptions import QueryError
from .store import ResultStore, StoreError

__all__ = ["QueryError", "Results", "export_tables", "open_results", "progress_report", "run_query"]

TABLES = ("studies", "datasets", "trials", "folds", "curves", "environments")
VIEWS = ("arm_summary", "fold_differences")



class Results:
    """A results database seen as pandas DataFrames (opened read-only).

    Parameters
    ----------
    path : str or Path
    study : str, optional
        Study name for the statistics, when the database holds several.

    Examples
    --------
    >>> results = open_results("results/quickstart.sqlite")  # doctest: +SKIP
    >>> results.comparison().query("verdict == 'pruned better'")  # doctest: +SKIP
    """

    def __init__(self, path: str | Path, study: str | None = None) -> None:
        self.path = Path(path)
        self.study = study
        ResultStore(self.path, readonly=True).close()  # fail early on a bad file

    def _store(self) -> ResultStore:
        return ResultStore(self.path, readonly=True)

    def table(self, name: str) -> pd.DataFrame:
        """Any table or view of the database, as stored.

        Parameters
        ----------
        name : str
            One of the tables (studies, datasets, trials, folds, curves, environments) or
            views (arm_summary, fold_differences).
        """
        if name not in TABLES + VIEWS:
            raise QueryError(f"no table or view {name!r}; use one of {', '.join(TABLES + VIEWS)}")
        with self._store() as store:
            frame = pd.read_sql_query(f'SELECT * FROM "{name}"', store.db.conn)
            declared = {r["name"]: r["type"] for r in store.query(f'PRAGMA table_info("{name}")')}
        # integer columns with NULLs (max_depth = unlimited) stay integers, not floats
        for column, kind in declared.items():
            if kind.upper() == "INTEGER" and frame[column].dtype.kind == "f":
                frame[column] = frame[column].astype("Int64")
        return frame

    def studies(self) -> pd.DataFrame:
        """The ``studies`` table."""
        return self.table("studies")

    def datasets(self) -> pd.DataFrame:
        """The ``datasets`` table."""
        return self.table("datasets")

    def trials(self) -> pd.DataFrame:
        """The ``trials`` table."""
        return self.table("trials")

    def folds(self) -> pd.DataFrame:
        """The ``folds`` table."""
        return self.table("folds")

    def curves(self) -> pd.DataFrame:
        """The ``curves`` table (inner-CV curves; join trials on ``group_id``)."""
        return self.table("curves")

    def fold_rows(self) -> pd.DataFrame:
        """Finished trials' folds joined with their data set and factors (for statistics)."""
        with self._store() as store:
            return stats.load_folds(store, self.study)

    def comparison(self, metric: str | None = None) -> pd.DataFrame:
        """Pruned against unpruned per data set and configuration (see ``stats.comparison``)."""
        return stats.comparison(self.fold_rows(), metric)

    def ranking(self, metric: str | None = None) -> list[dict]:
        """Configurations ranked across data sets (see ``stats.ranking``)."""
        return stats.ranking(self.fold_rows(), metric)

    def recommendation(self) -> list[dict]:
        """The recommended default per task family (see ``stats.recommendation``)."""
        return stats.recommendation(self.fold_rows())


def open_results(path: str | Path, study: str | None = None) -> Results:
    """Open a results database for reading into pandas.

    Parameters
    ----------
    path : str or Path
    study : str, optional

    Returns
    -------
    Results
    """
    return Results(path, study)


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
    if action in denied:
        return sqlite3.SQLITE_DENY
    if action == sqlite3.SQLITE_PRAGMA:
        name = (arg1 or "").lower()
        if name not in _READ_PRAGMAS or (
            arg2 is not None and name not in _READ_PRAGMAS_WITH_ARGUMENT
        ):
            return sqlite3.SQLITE_DENY
    return sqlite3.SQLITE_OK


def run_query(path: str | Path, sql: str) -> pd.DataFrame:
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
    DataFrame
    """
    statement = sql.strip().rstrip(";").strip()
    if not statement:
        raise QueryError("the query is empty")
    if ";" in statement and sqlite3.complete_statement(statement.split(";", 1)[0] + ";"):
        raise QueryError("give one statement at a time")
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
    path = Path(path)
    if not path.exists():
        raise StoreError(f"{path}: no such results database")
    conn = sqlite3.connect(f"file:{path}?mode=ro", uri=True)
    try:
        conn.set_authorizer(_authorize)
        try:
            cursor = conn.execute(statement)
        except sqlite3.DatabaseError as err:
            message = str(err)
            if "not authorized" in message or "readonly" in message:
                raise QueryError(
                    "refused: the statement would change the results; "
                    "'prunebench sql' runs read-only queries"
                ) from None
            raise QueryError(f"the query failed: {message}") from None
        columns = [c[0] for c in cursor.description or []]
        return pd.DataFrame(cursor.fetchall(), columns=columns)
    finally:
        conn.close()


def export_tables(path: str | Path, out: str | Path, fmt: str = "csv") -> list[Path]:
    """Write every table and view of a results database as CSV or Parquet files.

    Parameters
    ----------
    path : str or Path
        The results database.
    out : str or Path
        Folder for the files (created if missing).
    fmt : {"csv", "parquet"}

    Returns
    -------
    list of Path
    """
    if fmt not in ("csv", "parquet"):
        raise QueryError(f"--format must be csv or parquet; got {fmt!r}")
    results = open_results(path)
    out = Path(out)
    out.mkdir(parents=True, exist_ok=True)
    written = []
    for name in TABLES + VIEWS:
        frame = results.table(name)
        target = out / f"{name}.{fmt}"
        partial = target.with_name(target.name + ".partial")
        if fmt == "csv":
            frame.to_csv(partial, index=False)
        else:
            try:
                frame.to_parquet(partial, index=False)
            except ImportError:
                raise QueryError("Parquet export needs pyarrow: pip install pyarrow") from None
        partial.replace(target)
        written.append(target)
    return written


def progress_report(path: str | Path, study: str | None = None, last_errors: int = 3) -> dict:
    """Counts, rate and ETA of a study, readable while a ``conduct`` writes to it.

    Returns
    -------
    dict
        ``study``, ``done``, ``failed``, ``pending``, ``total``, ``rate_per_minute``
        (trials finished per minute over the run so far), ``eta_seconds``,
        ``last_finished`` and ``errors`` (the last lines of the latest tracebacks).
    """
    with ResultStore(path, readonly=True) as store:
        studies = store.query("SELECT study_id, name FROM studies ORDER BY created")
        if not studies:
            raise StoreError(f"{path} holds no study yet")
        if study is None:
            chosen = studies[-1]
        else:
            named = [s for s in studies if s["name"] == study]
            if not named:
                raise StoreError(f"{path} has no study named {study!r}")
            chosen = named[0]
        sid = chosen["study_id"]
        counts = {
            r["status"]: r["n"]
            for r in store.query(
                "SELECT status, COUNT(*) AS n FROM trials WHERE study_id = ? GROUP BY status", [sid]
            )
        }
        times = store.query(
            "SELECT MIN(started) AS first, MAX(finished) AS last FROM trials WHERE study_id = ? "
            "AND status != 'pending'",
            [sid],
        )[0]
        errors = store.query(
            "SELECT error FROM trials WHERE study_id = ? AND status = 'failed' "
            "ORDER BY finished DESC LIMIT ?",
            [sid, last_errors],
        )
    done, failed, pending = (counts.get(k, 0) for k in ("done", "failed", "pending"))
    rate = eta = None
    if times["first"] and times["last"] and done + failed:
        span = (
            _dt.datetime.fromisoformat(times["last"]) - _dt.datetime.fromisoformat(times["first"])
        ).total_seconds()
        if span > 0:
            rate = (done + failed) / span * 60
            eta = pending / (rate / 60) if pending else 0.0
    return {
        "study": chosen["name"],
        "done": done,
        "failed": failed,
        "pending": pending,
        "total": done + failed + pending,
        "rate_per_minute": rate,
        "eta_seconds": eta,
        "last_finished": times["last"],
        "errors": [e["error"].strip().splitlines()[-1] for e in errors if e["error"]],
    }
