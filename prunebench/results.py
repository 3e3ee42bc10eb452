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
from collections.abc import Iterable
from pathlib import Path

import pandas as pd

from .exceptions import QueryError, parameter_error
from .query import fetch, results_path
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
    "Results",
    "arm_means",
    "conduct_table",
    "decision_settings",
    "duration_text",
    "export_tables",
    "load_folds",
    "open_results",
    "progress_report",
    "pruned_losses",
    "resolve_study",
    "results_path",
    "run_query",
    "study_levels",
    "study_overview",
    "trial_counts",
    "trial_curves",
]

TABLES = ("studies", "datasets", "trials", "folds", "curves", "environments")
VIEWS = ("arm_summary", "fold_differences")


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
    from .study import decision_of_text

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
    from .study import levels_of_text

    row = resolve_study(store, study)
    return {f: levels_of_text(row["study_text"], f) for f in _families_of(store, row["study_id"])}


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

    def decision(
        self, metric: str | None = None, margin: float | None = None, alpha: float | None = None
    ) -> dict:
        """The study's ``[decision]`` settings with any given value in place of the stored one.

        See :func:`decision_settings`.
        """
        with self._store() as store:
            return decision_settings(store, self.study, metric, margin, alpha)

    def effects(
        self,
        metric: str | None = None,
        margin: float | None = None,
        alpha: float | None = None,
        interactions: bool = False,
    ) -> pd.DataFrame:
        """Each factor level's effect on the primary metric and on tree size, across data sets.

        The metric, margin and alpha default to the study's ``[decision]`` settings and
        the reference levels are the stored study file's first levels.

        Parameters
        ----------
        metric : str, optional
        margin : float, optional
        alpha : float, optional
        interactions : bool, default=False
            Return :func:`prunebench.effects.interaction_effects`' table instead.

        Returns
        -------
        DataFrame
            :data:`prunebench.effects.EFFECT_COLUMNS` (or ``INTERACTION_COLUMNS``), one row
            per family, factor, non-reference level and metric (the primary one and
            ``n_leaves``).
        """
        from .effects import factor_effects, interaction_effects

        with self._store() as store:
            settings = decision_settings(store, self.study, metric, margin, alpha)
            levels = study_levels(store, self.study)
            folds = load_folds(store, self.study)
        for family, own in levels.items():
            if not own:  # a search names no levels: the reference is the smallest level seen
                mine = folds[folds["task"].map(family_of) == family]
                levels[family] = {
                    f: sorted(mine[f].dropna().unique().tolist()) + ([None] * mine[f].isna().any())
                    for f in factor_names()
                }
        compute = interaction_effects if interactions else factor_effects
        return compute(folds, levels, settings["metric"], settings["margin"], settings["alpha"])

    def recommendation(
        self, metric: str | None = None, margin: float | None = None, alpha: float | None = None
    ) -> list[dict]:
        """The recommended configuration per task family (:func:`prunebench.recommend.recommend`).

        The metric, margin and alpha default to the study's ``[decision]`` settings; the
        trial counts (done, failed, pending) of every family are included, and a family
        with trials but no finished fold is reported as undecided.

        Returns
        -------
        list of dict
            One per family of the study, as :func:`prunebench.recommend.recommend`
            (``decided`` False with a ``reason`` where nothing could be chosen).
        """
        from .recommend import recommend, undecided

        with self._store() as store:
            settings = decision_settings(store, self.study, metric, margin, alpha)
            counts = trial_counts(store, self.study)
            try:
                # the primary metrics alone: the frame is copied as it is reshaped
                folds = load_folds(store, self.study, settings["metric"].values())
            except QueryError:
                folds = None
        recs = []
        if folds is not None:
            fits = folds["task"].map(family_of).isin(settings["metric"])
            fitting = folds if fits.all() else folds[fits]
            if not fitting.empty:
                recs = recommend(
                    fitting, settings["metric"], settings["margin"], settings["alpha"], counts
                )
        decided = {r["family"] for r in recs}
        for family in settings["metric"]:
            if family not in decided:
                recs.append(
                    undecided(
                        family,
                        settings["metric"][family],
                        settings["margin"][family],
                        settings["alpha"],
                        counts.get(family),
                        "no finished trial",
                    )
                )
        order = {f: i for i, f in enumerate(FAMILIES)}
        return sorted(recs, key=lambda r: order[r["family"]])


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


def run_query(path: str | Path, sql: str) -> pd.DataFrame:
    """Run one read-only SQL statement against a results database.

    The file is opened read-only and every statement that would write (INSERT, UPDATE,
    DELETE, DROP, CREATE, ALTER, ATTACH, a PRAGMA that sets a value, transactions, …) is
    refused with a message before it runs (see :func:`prunebench.query.fetch`, which
    does the reading; this adds the typed frame).

    Parameters
    ----------
    path : str or Path
    sql : str

    Returns
    -------
    DataFrame
    """
    columns, rows = fetch(path, sql)
    return _typed_frame(rows, columns)


def _typed_frame(rows: list[tuple], columns: list[str]) -> pd.DataFrame:
    """Rows as a frame whose integer columns stay integers when some values are NULL."""
    frame = pd.DataFrame(rows, columns=columns, dtype=object)
    for i in range(len(columns)):
        values = [v for v in frame.iloc[:, i] if v is not None]
        if not values or any(isinstance(v, bool) for v in values):
            continue
        if all(isinstance(v, int) for v in values):
            frame.isetitem(i, pd.array(list(frame.iloc[:, i]), dtype="Int64"))
        elif all(isinstance(v, (int, float)) for v in values):
            frame.isetitem(i, pd.to_numeric(frame.iloc[:, i]).astype(float))
    return frame


def export_tables(
    path: str | Path, out: str | Path, fmt: str = "csv", *, overwrite: bool = False
) -> list[Path]:
    """Write every table and view of a results database as CSV or Parquet files.

    Each file is written under a temporary name and renamed when whole, so a file is
    either complete or absent.  Existing files are not replaced unless asked.

    Parameters
    ----------
    path : str or Path
        The results database.
    out : str or Path
        Folder for the files (created if missing).
    fmt : {"csv", "parquet"}
    overwrite : bool, default=False
        Replace files of the same names already in ``out``; without it they are refused
        before anything is written.

    Returns
    -------
    list of Path
    """
    if fmt not in ("csv", "parquet"):
        raise parameter_error("fmt", "export_tables", "'csv' or 'parquet'", fmt)
    results = open_results(path)
    out = Path(out)
    targets = [out / f"{name}.{fmt}" for name in TABLES + VIEWS]
    present = [t.name for t in targets if t.exists()]
    if present and not overwrite:
        raise QueryError(
            f"out={out} already holds {', '.join(present)}; give overwrite=True to replace "
            f"{'it' if len(present) == 1 else 'them'}, or another folder"
        )
    try:
        out.mkdir(parents=True, exist_ok=True)
    except OSError as err:
        raise QueryError(f"out={out}: cannot create the folder ({err.strerror})") from None
    written = []
    for name, target in zip(TABLES + VIEWS, targets, strict=True):
        frame = results.table(name)
        partial = target.with_name(target.name + ".partial")
        try:
            if fmt == "csv":
                frame.to_csv(partial, index=False)
            else:
                frame.to_parquet(partial, index=False)
            partial.replace(target)
        except ImportError:
            partial.unlink(missing_ok=True)
            raise QueryError("Parquet export needs pyarrow: pip install pyarrow") from None
        except OSError as err:
            partial.unlink(missing_ok=True)
            raise QueryError(f"out={out}: cannot write {target.name} ({err.strerror})") from None
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
