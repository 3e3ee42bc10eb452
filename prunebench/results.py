"""The one reader of a results database: DataFrames out, one policy for which study.

Every read of a results database goes through this module: :func:`resolve_study`
says which study a question is about (the database's only study, or the one
named; several without a name is an error listing them, for every command alike),
:func:`load_folds` reads the finished folds with one SQL query straight into
pandas, and the small readers below serve the conduct summary, the figures, the
report and the search.  :func:`open_results` is the notebook entry point;
:func:`run_query` backs ``prunebench sql`` and refuses anything that writes;
:func:`export_tables` backs ``prunebench export``; :func:`progress_report` backs
``prunebench progress``.  Statistics, figures and the report receive the frames
and never open the database themselves.
"""

from __future__ import annotations

import datetime as _dt
import re
import sqlite3
from pathlib import Path

import pandas as pd

from .exceptions import QueryError, parameter_error
from .store import ResultStore, connect_readonly
from .vocabulary import (
    CLASSIFICATION,
    DEFAULT_METRIC,
    REGRESSION,
    default_metric,
    factor_names,
    metric_names,
)

__all__ = [
    "QueryError",
    "Results",
    "arm_means",
    "conduct_table",
    "duration_text",
    "export_tables",
    "load_folds",
    "open_results",
    "progress_report",
    "pruned_losses",
    "resolve_study",
    "run_query",
    "study_overview",
    "trial_curves",
]

TABLES = ("studies", "datasets", "trials", "folds", "curves", "environments")
VIEWS = ("arm_summary", "fold_differences")


# ---- which study -----------------------------------------------------------------------


def resolve_study(store: ResultStore, study: str | None = None) -> dict:
    """The ``studies`` row a question is about.

    Parameters
    ----------
    store : ResultStore
    study : str, optional
        A study name; may be left out when the database holds one study.

    Returns
    -------
    dict
        The study's row of the ``studies`` table.

    Raises
    ------
    QueryError
        No study yet; several and none named (the message lists them); or no study of
        that name (the message lists the names there are).
    """
    rows = store.query("SELECT * FROM studies ORDER BY created")
    if not rows:
        raise QueryError(f"{store.path} holds no study yet")
    names = ", ".join(r["name"] for r in rows)
    if study is None:
        if len(rows) > 1:
            raise QueryError(
                f"{store.path} holds several studies ({names}); pick one with study=..."
            )
        return rows[0]
    for row in rows:
        if row["name"] == study:
            return row
    raise QueryError(f"{store.path} has no study named {study!r}; it holds {names}")


# ---- the folds every statistic starts from -----------------------------------------------


def _folds_sql() -> str:
    factors = ", ".join(f"t.{f}" for f in factor_names())
    metrics = ", ".join(f"f.{m}" for m in metric_names())
    return (
        f"SELECT d.name AS dataset, d.task, t.trial_id, {factors}, "
        f'f."repeat", f.fold, f.arm, f.n_train, f.n_test, {metrics}, '
        "f.n_leaves, f.depth, f.alpha "
        "FROM folds f JOIN trials t USING (trial_id) JOIN datasets d USING (dataset_id) "
        "WHERE t.study_id = ? AND t.status = 'done'"
    )


def load_folds(store: ResultStore, study: str | None = None) -> pd.DataFrame:
    """Every fold row of a study's finished trials, with dataset, task and factor columns.

    One SQL read straight into pandas.

    Parameters
    ----------
    store : ResultStore
    study : str, optional
        Study name; required when the database holds more than one (see
        :func:`resolve_study`).

    Returns
    -------
    DataFrame
        One row per trial, outer fold and arm; ``max_depth`` is a nullable integer
        (missing = unlimited).
    """
    study_id = resolve_study(store, study)["study_id"]
    frame = pd.read_sql_query(_folds_sql(), store.db.conn, params=[study_id])
    if frame.empty:
        raise QueryError(f"{store.path}: the study has no finished trials yet")
    frame["max_depth"] = frame["max_depth"].astype("Int64")
    return frame


def arm_means(store: ResultStore, study_id: str) -> pd.DataFrame:
    """Mean default-metric value and leaves per data set, rule and arm.

    Parameters
    ----------
    store : ResultStore
    study_id : str

    Returns
    -------
    DataFrame
        Columns ``dataset``, ``task``, ``rule``, ``arm``, ``metric`` (the family's default
        metric: ``error`` for classification, ``mse`` for regression), ``value`` (its mean
        over trials and outer folds), ``n_leaves`` (mean leaves) and ``n_trials``.
    """
    default = (
        f"CASE WHEN d.task = '{REGRESSION}' THEN f.{DEFAULT_METRIC[REGRESSION]} "
        f"ELSE f.{DEFAULT_METRIC[CLASSIFICATION]} END"
    )
    frame = pd.read_sql_query(
        f"""
        SELECT d.name AS dataset, d.task, t.rule, f.arm, AVG({default}) AS value,
               AVG(f.n_leaves) AS n_leaves, COUNT(DISTINCT t.trial_id) AS n_trials
        FROM folds f JOIN trials t USING (trial_id) JOIN datasets d USING (dataset_id)
        WHERE t.study_id = ? AND t.status = 'done'
        GROUP BY d.name, d.task, t.rule, f.arm
        ORDER BY d.name, t.rule, f.arm DESC
        """,
        store.db.conn,
        params=[study_id],
    )
    frame.insert(4, "metric", frame["task"].map(default_metric).astype(object))
    return frame


def conduct_table(path: str | Path, study_id: str) -> pd.DataFrame:
    """The short table a conduct ends with: one row per data set, rule and metric.

    Returns
    -------
    DataFrame
        Index ``dataset``, ``rule``, ``metric``; columns ``unpruned``, ``pruned`` (mean
        metric), ``leaves_unpruned`` and ``leaves_pruned``; empty when nothing finished.
    """
    with ResultStore(path, readonly=True) as store:
        table = arm_means(store, study_id)
    if table.empty:
        return pd.DataFrame(columns=["unpruned", "pruned", "leaves_unpruned", "leaves_pruned"])
    wide = table.pivot_table(
        index=["dataset", "rule", "metric"], columns="arm", values=["value", "n_leaves"]
    )
    return pd.DataFrame(
        {
            "unpruned": wide[("value", "unpruned")],
            "pruned": wide[("value", "pruned")],
            "leaves_unpruned": wide[("n_leaves", "unpruned")],
            "leaves_pruned": wide[("n_leaves", "pruned")],
        }
    )


# ---- small readers for the figures, the report and the search ---------------------------


def trial_curves(store: ResultStore, trial_id: str) -> pd.DataFrame:
    """The inner-CV curves of a trial's group, every outer fold, in candidate order."""
    return pd.read_sql_query(
        'SELECT c."repeat", c.fold, c.alpha, c.n_leaves, c.mean, c.se FROM curves c '
        "JOIN trials t ON t.group_id = c.group_id WHERE t.trial_id = ? "
        'ORDER BY c."repeat", c.fold, c.candidate',
        store.db.conn,
        params=[trial_id],
    )


def pruned_losses(store: ResultStore, trial_id: str) -> tuple[str, pd.DataFrame]:
    """A finished trial's data set and its pruned arm's default loss per outer fold.

    Returns
    -------
    (str, DataFrame)
        The data set's study key, and columns ``loss``, ``n_train``, ``n_test``.
    """
    row = store.query(
        "SELECT d.name AS dataset, d.task FROM trials t JOIN datasets d USING (dataset_id) "
        "WHERE t.trial_id = ?",
        [trial_id],
    )[0]
    folds = pd.read_sql_query(
        f"SELECT {default_metric(row['task'])} AS loss, n_train, n_test FROM folds "
        "WHERE trial_id = ? AND arm = 'pruned'",
        store.db.conn,
        params=[trial_id],
    )
    return row["dataset"], folds


def study_overview(store: ResultStore, study: str | None = None) -> dict:
    """What a report says about a study besides its statistics.

    Returns
    -------
    dict
        ``info`` (the ``studies`` row), ``counts`` (status -> trials), ``datasets``,
        ``environments`` (the latest five, DataFrames) and ``failed`` (rows as dicts).
    """
    info = resolve_study(store, study)
    sid = [info["study_id"]]
    conn = store.db.conn
    counts = dict(
        conn.execute(
            "SELECT status, COUNT(*) FROM trials WHERE study_id = ? GROUP BY status", sid
        ).fetchall()
    )
    datasets = pd.read_sql_query(
        "SELECT DISTINCT d.name, d.task, d.rows, d.features, d.classes, d.source, d.licence "
        "FROM datasets d JOIN trials t USING (dataset_id) WHERE t.study_id = ? ORDER BY d.name",
        conn,
        params=sid,
    )
    environments = pd.read_sql_query(
        "SELECT recorded, python, numpy, scikit_learn, pandas, prunebench, platform "
        "FROM environments WHERE study_id = ? ORDER BY recorded DESC LIMIT 5",
        conn,
        params=sid,
    )
    failed = store.query(
        "SELECT t.trial_id, d.name AS dataset, t.criterion, t.max_depth, t.rule, t.error "
        "FROM trials t JOIN datasets d USING (dataset_id) WHERE t.study_id = ? AND "
        "t.status = 'failed'",
        sid,
    )
    return {
        "info": info,
        "counts": counts,
        "datasets": datasets,
        "environments": environments,
        "failed": failed,
    }


# ---- pandas for notebooks ----------------------------------------------------------------


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
            return load_folds(store, self.study)

    def comparison(self, metric: str | None = None) -> pd.DataFrame:
        """Pruned against unpruned per data set and configuration (see ``stats.comparison``)."""
        from .stats import comparison

        return comparison(self.fold_rows(), metric)

    def ranking(self, metric: str | None = None) -> list[dict]:
        """Configurations ranked across data sets (see ``ranks.ranking``)."""
        from .ranks import ranking

        return ranking(self.fold_rows(), metric)

    def recommendation(self) -> list[dict]:
        """The recommended default per task family (see ``ranks.recommendation``)."""
        from .ranks import recommendation

        return recommendation(self.fold_rows())


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
    conn = connect_readonly(path)
    try:
        conn.set_authorizer(_authorize)
        try:
            cursor = conn.execute(statement)
        except sqlite3.DatabaseError as err:
            message = str(err)
            # "cannot modify folds because it is a view": folds is a view since schema 2
            if "not authorized" in message or "readonly" in message or "cannot modify" in message:
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
        raise parameter_error("fmt", "export_tables", "'csv' or 'parquet'", fmt)
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


def duration_text(seconds: float) -> str:
    """A duration as ``1h05m`` or ``4m07s``."""
    seconds = int(round(seconds))
    h, rest = divmod(seconds, 3600)
    m, s = divmod(rest, 60)
    return f"{h}h{m:02d}m" if h else f"{m}m{s:02d}s"


def progress_report(path: str | Path, study: str | None = None, last_errors: int = 3) -> dict:
    """Counts, rate and ETA of a study, readable while a ``conduct`` writes to it.

    Returns
    -------
    dict
        ``study``, ``done``, ``failed``, ``pending``, ``total``, ``rate_per_minute``
        (trials finished per minute over the run so far), ``eta_seconds``,
        ``eta`` (as text), ``last_finished`` and ``errors`` (the last lines of the latest
        tracebacks).
    """
    with ResultStore(path, readonly=True) as store:
        chosen = resolve_study(store, study)
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
        "eta": "-" if eta is None else duration_text(eta),
        "last_finished": times["last"],
        "errors": [e["error"].strip().splitlines()[-1] for e in errors if e["error"]],
    }
