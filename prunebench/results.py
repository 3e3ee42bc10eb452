"""The one reader of a results database: DataFrames out, one policy for which study.

Every read of a results database starts here: :func:`resolve_study` says which
study a question is about (the database's only study, or the one named; several
without a name is an error listing them, for every command alike),
:func:`load_folds` reads the finished folds with one SQL query straight into
pandas, and the small readers below serve the conduct summary, the figures, the
report and the search.  The notebook entry point :func:`prunebench.tables.open_results`,
``prunebench sql`` and ``prunebench export`` (:mod:`prunebench.tables`) and
``prunebench progress`` (:mod:`prunebench.progress`) build on them.  Statistics,
figures and the report receive the frames and never open the database themselves.
"""

from __future__ import annotations

from collections.abc import Iterable
from pathlib import Path

import pandas as pd

from .exceptions import QueryError, parameter_error
from .query import results_path
from .store import ResultStore
from .vocabulary import (
    CLASSIFICATION,
    DEFAULT_METRIC,
    FAMILIES,
    REGRESSION,
    default_margin,
    default_metric,
    factor_names,
    family_of,
    metric_names,
)
from .vocabulary import FACTORS as _FACTOR_SPECS

__all__ = [
    "QueryError",
    "arm_means",
    "conduct_table",
    "decision_settings",
    "load_folds",
    "pruned_losses",
    "resolve_study",
    "results_path",
    "seen_levels",
    "study_levels",
    "study_overview",
    "trial_counts",
    "trial_curves",
]



# ---- which file, which study -------------------------------------------------------------

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


#: fold rows read at a time by :func:`load_folds`
_READ_CHUNK = 20_000

#: tree-shape columns of ``folds`` since schema 2 (read when the file has them)
_SHAPE_COLUMNS = ("root_feature", "features_used")


def _default_level(factor: str) -> str:
    """SQL for a factor's default level by the data set's task (a file from before it)."""
    default = _FACTOR_SPECS[factor].default

    def quoted(value) -> str:
        return "NULL" if value is None else "'" + str(value).replace("'", "''") + "'"

    return (
        f"CASE WHEN d.task = 'regression' THEN {quoted(default[REGRESSION])} "
        f"ELSE {quoted(default[CLASSIFICATION])} END"
    )


def _folds_sql(
    shape: tuple[str, ...] = (),
    trial_columns: set | None = None,
    fold_columns: set | None = None,
    metrics: Iterable[str] | None = None,
) -> str:
    # a read-only file of schema 1 lacks the factors and metrics added since: their
    # default levels and NULL stand in
    factors = ", ".join(
        f"t.{f}" if trial_columns is None or f in trial_columns else f"{_default_level(f)} AS {f}"
        for f in factor_names()
    )
    metrics = ", ".join(
        f"f.{m}" if fold_columns is None or m in fold_columns else f"NULL AS {m}"
        for m in (metric_names() if metrics is None else metrics)
    )
    extra = "".join(f", f.{c}" for c in shape)
    return (
        f"SELECT d.name AS dataset, d.task, t.trial_id, {factors}, "
        f'f."repeat", f.fold, f.arm, f.n_train, f.n_test, {metrics}, '
        f"f.n_leaves, f.depth, f.alpha{extra} "
        "FROM folds f JOIN trials t USING (trial_id) JOIN datasets d USING (dataset_id) "
        "WHERE t.study_id = ? AND t.status = 'done'"
    )


def load_folds(
    store: ResultStore, study: str | None = None, metrics: Iterable[str] | None = None
) -> pd.DataFrame:
    """Every fold row of a study's finished trials, with dataset, task and factor columns.

    One SQL read straight into pandas.

    Parameters
    ----------
    store : ResultStore
    study : str, optional
        Study name; required when the database holds more than one (see
        :func:`resolve_study`).
    metrics : iterable of str, optional
        Read only these metric columns (default: every metric).  A command that needs
        one metric per family reads a frame about a third smaller.

    Returns
    -------
    DataFrame
        One row per trial, outer fold and arm; ``max_depth`` is a nullable integer
        (missing = unlimited).  Files of schema 2 on also give ``root_feature`` (the
        root split's feature index, nullable integer, missing for a single leaf) and
        ``features_used`` (comma-separated feature indices).
    """
    study_id = resolve_study(store, study)["study_id"]
    present = {r["name"] for r in store.query("PRAGMA table_info(folds)")}
    trial_columns = {r["name"] for r in store.query("PRAGMA table_info(trials)")}
    shape = tuple(c for c in _SHAPE_COLUMNS if c in present)
    if metrics is not None:
        asked = set(metrics)
        if asked - set(metric_names()):
            unknown = sorted(asked - set(metric_names()))
            raise parameter_error("metrics", "load_folds", "metrics of the vocabulary", unknown)
        metrics = [m for m in metric_names() if m in asked]  # in the vocabulary's order
    sql = _folds_sql(shape, trial_columns, present, metrics)
    # pandas holds the rows it reads as Python tuples before it builds the columns: read
    # in chunks so only one chunk's tuples are alive at a time (about a third of the peak
    # memory of one read on an overnight sweep).  A chunk whose column is all NULL gives
    # that column object dtype; infer_objects gives it the dtype one read would have.
    chunks = pd.read_sql_query(sql, store.db.conn, params=[study_id], chunksize=_READ_CHUNK)
    frame = pd.concat(list(chunks), ignore_index=True).infer_objects()
    if frame.empty:
        raise QueryError(f"{store.path}: the study has no finished trials yet")
    frame["max_depth"] = frame["max_depth"].astype("Int64")
    if "root_feature" in frame:
        frame["root_feature"] = frame["root_feature"].astype("Int64")
    return frame


# ---- the decision settings and trial counts of a study ------------------------------------


def _families_of(store: ResultStore, study_id: str) -> list[str]:
    tasks = store.query(
        "SELECT DISTINCT d.task FROM trials t JOIN datasets d USING (dataset_id) "
        "WHERE t.study_id = ?",
        [study_id],
    )
    families = {family_of(r["task"]) for r in tasks}
    return [f for f in FAMILIES if f in families]


def decision_settings(
    store: ResultStore,
    study: str | None = None,
    metric: str | None = None,
    margin: float | None = None,
    alpha: float | None = None,
) -> dict:
    """The study's ``[decision]`` settings (from its stored study file), flags applied.

    The settings are derived from ``studies.study_text`` (no column of their own), so
    a database of any schema has them.  A ``metric`` given here replaces the stored one
    for the families that have it (the others are left out); its margin is then the
    stored margin when the metric is the stored one, else the vocabulary's default.  A
    ``margin`` or ``alpha`` given here replaces the stored one for every family.

    Parameters
    ----------
    store : ResultStore
    study : str, optional
    metric : str, optional
    margin : float, optional
    alpha : float, optional

    Returns
    -------
    dict
        ``alpha`` (float), ``metric`` (family -> metric) and ``margin`` (family ->
        margin), for the study's families.
    """
    from .study_decision import decision_of_text

    row = resolve_study(store, study)
    families = _families_of(store, row["study_id"])
    stored = decision_of_text(
        row["study_text"], families, source=f"the stored study file of {row['name']!r}"
    )
    out = {"alpha": stored["alpha"] if alpha is None else alpha, "metric": {}, "margin": {}}
    if metric is not None:
        fitting = [f for f in families if metric in metric_names(f)]
        if not fitting:
            names = [m for f in families for m in metric_names(f)]
            raise QueryError(
                f"no dataset of this study has the metric {metric!r}; use one of {', '.join(names)}"
            )
        families = fitting
    for family in families:
        m = stored["metric"][family] if metric is None else metric
        if margin is not None:
            x = margin
        elif m == stored["metric"][family]:
            x = stored["margin"][family]
        else:
            x = default_margin(m)
        out["metric"][family], out["margin"][family] = m, x
    return out


def trial_counts(store: ResultStore, study: str | None = None) -> dict:
    """Trials done, failed and pending per task family of a study.

    Returns
    -------
    dict
        Family -> ``{"done": int, "failed": int, "pending": int}``.
    """
    study_id = resolve_study(store, study)["study_id"]
    rows = store.query(
        "SELECT d.task, t.status, COUNT(*) AS n FROM trials t JOIN datasets d "
        "USING (dataset_id) WHERE t.study_id = ? GROUP BY d.task, t.status",
        [study_id],
    )
    out: dict = {}
    for r in rows:
        counts = out.setdefault(family_of(r["task"]), {"done": 0, "failed": 0, "pending": 0})
        counts[r["status"]] += r["n"]
    return {f: out[f] for f in FAMILIES if f in out}


def study_levels(store: ResultStore, study: str | None = None) -> dict:
    """Family -> factor -> levels in the stored study file's order (reference first)."""
    from .study_decision import levels_of_text

    row = resolve_study(store, study)
    return {f: levels_of_text(row["study_text"], f) for f in _families_of(store, row["study_id"])}


def seen_levels(values: pd.Series) -> list:
    """The levels a factor's column holds, smallest first and ``None`` (no cap) last.

    The reference levels of a factor the study file does not list, as in a search,
    whose configurations come from ranges: the effects table, the figures and the
    report take the same ones.

    Parameters
    ----------
    values : Series
        One factor's column of :func:`load_folds`, for one task family.

    Returns
    -------
    list
    """
    levels = sorted(values.dropna().unique().tolist())
    return levels + [None] if values.isna().any() else levels


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
        metric), ``leaves_unpruned``, ``leaves_pruned`` and ``p_value`` (corrected resampled
        t of the paired per-fold difference, averaged over the rule's configurations);
        empty when nothing finished.
    """
    with ResultStore(path, readonly=True) as store:
        table = arm_means(store, study_id)
    if table.empty:
        return pd.DataFrame(
            columns=["unpruned", "pruned", "leaves_unpruned", "leaves_pruned", "p_value"]
        )
    wide = table.pivot_table(
        index=["dataset", "rule", "metric"], columns="arm", values=["value", "n_leaves"]
    )
    out = pd.DataFrame(
        {
            "unpruned": wide[("value", "unpruned")],
            "pruned": wide[("value", "pruned")],
            "leaves_unpruned": wide[("n_leaves", "unpruned")],
            "leaves_pruned": wide[("n_leaves", "pruned")],
        }
    )
    p = _conduct_p_values(path, study_id)
    out["p_value"] = [p.get((d, r), float("nan")) for d, r, _ in out.index]
    return out


def _conduct_p_values(path: str | Path, study_id: str) -> dict:
    """Corrected-t p of the mean pruned - unpruned difference per data set and rule.

    Per outer fold the difference is averaged over the rule's configurations, so the folds
    stay paired (every configuration sees the same outer test rows).
    """
    from .stats import corrected_ttest

    with ResultStore(path, readonly=True) as store:
        rows = pd.read_sql_query(
            'SELECT fd.dataset, fd.rule, fd."repeat", fd.fold, AVG(fd.n_train) AS n_train, '
            "AVG(fd.n_test) AS n_test, AVG(COALESCE(fd.error, fd.mse)) AS diff "
            "FROM fold_differences fd JOIN trials t USING (trial_id) "
            "WHERE t.study_id = ? AND t.status = 'done' "
            'GROUP BY fd.dataset, fd.rule, fd."repeat", fd.fold',
            store.db.conn,
            params=[study_id],
        )
    return {
        key: corrected_ttest(g["diff"], g["n_train"], g["n_test"]).p_value
        for key, g in rows.groupby(["dataset", "rule"])
        if len(g) > 1
    }


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
