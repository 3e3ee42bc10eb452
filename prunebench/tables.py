"""The results database's tables and views as pandas frames: notebooks, SQL and exports.

:func:`open_results` (the notebook entry point) gives a :class:`Results`, whose
methods read tables and views as stored and the statistics built on
:func:`prunebench.results.load_folds`; :func:`run_query` gives one read-only SQL
statement's rows as a typed frame (the reading and its refusals are
:func:`prunebench.query.fetch`'s, as for ``prunebench sql``); :func:`export_tables` backs
``prunebench export``.  Every read goes through :mod:`prunebench.results`'s policy
for which study.
"""

from __future__ import annotations

from collections.abc import Iterable
from pathlib import Path

import pandas as pd

from .exceptions import QueryError, parameter_error
from .query import fetch
from .results import (
    decision_settings,
    load_folds,
    resolve_study,
    seen_levels,
    study_levels,
    trial_counts,
)
from .store import ResultStore
from .vocabulary import FAMILIES, factor_names, family_of

__all__ = [
    "TABLES",
    "VIEWS",
    "Results",
    "export_tables",
    "open_results",
    "run_query",
]

#: the stored tables; ``folds`` (a view) gives the fold tables in the per-trial, per-arm shape
TABLES = (
    "studies",
    "datasets",
    "trials",
    "growths",
    "unpruned_folds",
    "pruned_folds",
    "curves",
    "environments",
)
VIEWS = ("folds", "arm_summary", "fold_differences")


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
            One of the tables (studies, datasets, trials, growths, unpruned_folds,
            pruned_folds, curves, environments) or views (folds, arm_summary,
            fold_differences).
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

    def fold_rows(self, metrics: Iterable[str] | None = None) -> pd.DataFrame:
        """Finished trials' folds joined with their data set and factors (for statistics).

        ``metrics`` limits the metric columns read (see :func:`prunebench.results.load_folds`).
        """
        with self._store() as store:
            return load_folds(store, self.study, metrics)

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

        See :func:`prunebench.results.decision_settings`.
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
                levels[family] = {f: seen_levels(mine[f]) for f in factor_names()}
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
            (``decided`` False with a ``reason`` where nothing could be chosen), with
            the stored study's ``costs``, ``smoothing`` and ``own_data`` added
            (:func:`prunebench.snippets.with_study`), as ``prunebench recommend`` shows.
        """
        from .recommend import recommend, undecided
        from .snippets import with_study

        with self._store() as store:
            study_text = resolve_study(store, self.study)["study_text"]
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
        # the stored study's costs and smoothing (for the estimator) and whose data it is
        return with_study(sorted(recs, key=lambda r: order[r["family"]]), study_text)


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
