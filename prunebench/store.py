"""The results database: one SQLite file, one writer, one transaction per trial group.

Tables (see the README for every column): ``studies``, ``datasets``, ``trials``,
``growths`` (one row per study, data set and growth setting), ``unpruned_folds``
(the grown tree once per growth setting and outer fold), ``pruned_folds`` (per
trial and outer fold), ``curves`` (per curve id, the trials' ``group_id``, and
outer fold), ``environments``; views ``folds`` (today's per-trial, per-arm rows),
``arm_summary`` and ``fold_differences``.  The schema version is SQLite's ``user_version``; older
files are upgraded step by step, newer ones are refused.  A conducting process
holds an exclusive lock file beside the database, so a second one is refused; the
lock file names its holder's process, and a lock whose holder no longer exists is
taken over.  A writer leaves the file in rollback-journal mode when it closes, so
a finished database is one self-contained file that readers open read-only
(``mode=ro``, or ``immutable=1`` on read-only media) without creating files.
"""

from __future__ import annotations

import datetime as _dt
import hashlib
import json
import platform
import sqlite3
import sys
from collections.abc import Callable
from pathlib import Path

from . import lockfile
from ._version import __version__
from .exceptions import StoreError
from .vocabulary import FACTORS, growth_factors, metric_names

__all__ = [
    "SCHEMA_VERSION",
    "ResultStore",
    "StoreError",
    "connect_readonly",
    "schema_sql",
    "utc_now",
]

SCHEMA_VERSION = 2

_SCHEMA_TEMPLATE = """
CREATE TABLE studies (
    study_id TEXT PRIMARY KEY,
    name TEXT NOT NULL UNIQUE,
    description TEXT NOT NULL,
    study_text TEXT NOT NULL,
    study_hash TEXT NOT NULL,
    seed INTEGER NOT NULL,
    outer_repeats INTEGER NOT NULL,
    outer_folds INTEGER NOT NULL,
    created TEXT NOT NULL,
    updated TEXT NOT NULL,
    prunebench_version TEXT NOT NULL
);
CREATE TABLE datasets (
    dataset_id TEXT PRIMARY KEY,
    name TEXT NOT NULL,
    params TEXT NOT NULL,
    task TEXT NOT NULL CHECK (task IN ('binary', 'multiclass', 'regression')),
    rows INTEGER NOT NULL,
    features INTEGER NOT NULL,
    classes INTEGER,
    source TEXT NOT NULL,
    licence TEXT NOT NULL,
    citation TEXT NOT NULL,
    fingerprint TEXT NOT NULL
);
CREATE TABLE trials (
    trial_id TEXT PRIMARY KEY,
    study_id TEXT NOT NULL REFERENCES studies(study_id),
    dataset_id TEXT NOT NULL REFERENCES datasets(dataset_id),
    group_id TEXT NOT NULL,
    criterion TEXT NOT NULL,
    max_depth INTEGER,
    min_samples_leaf INTEGER NOT NULL,
    inner_folds INTEGER NOT NULL,
    rule TEXT NOT NULL,
    prune_risk TEXT NOT NULL,
    status TEXT NOT NULL DEFAULT 'pending' CHECK (status IN ('pending', 'done', 'failed')),
    error TEXT,
    started TEXT,
    finished TEXT,
    seconds REAL,
{trial_columns}
    growth_id INTEGER REFERENCES growths(growth_id)
);
CREATE INDEX trials_study_status ON trials(study_id, status);
CREATE INDEX trials_growth ON trials(growth_id);
CREATE INDEX trials_dataset ON trials(dataset_id);
CREATE INDEX trials_group ON trials(group_id);
CREATE TABLE growths (
    growth_id INTEGER PRIMARY KEY,
    study_id TEXT NOT NULL REFERENCES studies(study_id),
    dataset_id TEXT NOT NULL REFERENCES datasets(dataset_id),
{growth_columns}
);
CREATE TABLE unpruned_folds (
    growth_id INTEGER NOT NULL REFERENCES growths(growth_id),
    "repeat" INTEGER NOT NULL,
    fold INTEGER NOT NULL,
    n_train INTEGER NOT NULL,
    n_test INTEGER NOT NULL,
    test_fingerprint TEXT NOT NULL,
{metric_columns}
    n_leaves INTEGER NOT NULL,
    depth INTEGER NOT NULL,
    fit_seconds REAL NOT NULL,
    root_feature INTEGER,
    features_used TEXT,
    PRIMARY KEY (growth_id, "repeat", fold)
) WITHOUT ROWID;
CREATE TABLE pruned_folds (
    trial_id TEXT NOT NULL REFERENCES trials(trial_id),
    "repeat" INTEGER NOT NULL,
    fold INTEGER NOT NULL,
{metric_columns}
    n_leaves INTEGER NOT NULL,
    depth INTEGER NOT NULL,
    alpha REAL NOT NULL,
    fit_seconds REAL NOT NULL,
    root_feature INTEGER,
    features_used TEXT,
    PRIMARY KEY (trial_id, "repeat", fold)
) WITHOUT ROWID;
CREATE TABLE curves (
    group_id TEXT NOT NULL,
    "repeat" INTEGER NOT NULL,
    fold INTEGER NOT NULL,
    candidate INTEGER NOT NULL,
    alpha REAL NOT NULL,
    n_leaves INTEGER NOT NULL,
    mean REAL NOT NULL,
    se REAL NOT NULL,
    PRIMARY KEY (group_id, "repeat", fold, candidate)
) WITHOUT ROWID;
CREATE TABLE environments (
    environment_id INTEGER PRIMARY KEY,
    study_id TEXT NOT NULL REFERENCES studies(study_id),
    recorded TEXT NOT NULL,
    python TEXT NOT NULL,
    numpy TEXT NOT NULL,
    scikit_learn TEXT NOT NULL,
    pandas TEXT NOT NULL,
    prunebench TEXT NOT NULL,
    platform TEXT NOT NULL
);
{views}
"""



_VIEWS_TEMPLATE = """
CREATE VIEW folds AS
SELECT p.trial_id, p."repeat", p.fold, 'unpruned' AS arm, u.n_train, u.n_test,
       u.test_fingerprint,
       {unpruned_metrics},
       u.n_leaves, u.depth, 0.0 AS alpha, u.fit_seconds, u.root_feature, u.features_used
FROM pruned_folds p JOIN trials t ON t.trial_id = p.trial_id
JOIN unpruned_folds u ON u.growth_id = t.growth_id AND u."repeat" = p."repeat" AND u.fold = p.fold
UNION ALL
SELECT p.trial_id, p."repeat", p.fold, 'pruned' AS arm, u.n_train, u.n_test,
       u.test_fingerprint,
       {pruned_metrics},
       p.n_leaves, p.depth, p.alpha, p.fit_seconds, p.root_feature, p.features_used
FROM pruned_folds p JOIN trials t ON t.trial_id = p.trial_id
JOIN unpruned_folds u ON u.growth_id = t.growth_id AND u."repeat" = p."repeat" AND u.fold = p.fold;
CREATE VIEW arm_summary AS
SELECT t.study_id, t.trial_id, d.name AS dataset, t.criterion, t.max_depth, t.min_samples_leaf,
       t.inner_folds, t.rule, t.prune_risk, t.select_by, t.class_weight, f.arm,
       COUNT(*) AS n_folds,
       {metric_means},
       AVG(f.n_leaves) AS n_leaves, AVG(f.depth) AS depth, AVG(f.alpha) AS alpha
FROM folds f JOIN trials t USING (trial_id) JOIN datasets d USING (dataset_id)
GROUP BY t.trial_id, f.arm;
CREATE VIEW fold_differences AS
SELECT t.study_id, t.trial_id, d.name AS dataset, t.criterion, t.max_depth, t.min_samples_leaf,
       t.inner_folds, t.rule, t.prune_risk, t.select_by, t.class_weight, p."repeat", p.fold,
       u.n_train, u.n_test,
       {metric_differences},
       p.n_leaves - u.n_leaves AS n_leaves, p.alpha AS alpha
FROM pruned_folds p JOIN trials t ON t.trial_id = p.trial_id
JOIN unpruned_folds u ON u.growth_id = t.growth_id AND u."repeat" = p."repeat" AND u.fold = p.fold
JOIN datasets d ON d.dataset_id = t.dataset_id;
"""

#: SQLite column type of a growth factor's level, by the factor's kind
_KIND_TYPES = {"choice": "TEXT NOT NULL", "int": "INTEGER NOT NULL", "depth": "INTEGER"}


def _growth_columns() -> str:
    return ",\n".join(
        f"    {name} {_KIND_TYPES[FACTORS[name].kind]}" for name in growth_factors()
    )


def _views_sql() -> str:
    names = metric_names()
    return _VIEWS_TEMPLATE.format(
        unpruned_metrics=", ".join(f"u.{m}" for m in names),
        pruned_metrics=", ".join(f"p.{m}" for m in names),
        metric_means=",\n       ".join(f"AVG(f.{m}) AS {m}" for m in names),
        metric_differences=",\n       ".join(f"p.{m} - u.{m} AS {m}" for m in names),
    )


def schema_sql() -> str:
    """The schema of a new results database, its metric columns and views from the vocabulary.

    One ``REAL`` column per metric of :data:`prunebench.vocabulary.METRICS` in
    ``unpruned_folds`` and ``pruned_folds`` (and so in the ``folds`` view), its mean
    in ``arm_summary`` and its pruned - unpruned difference in ``fold_differences``,
    in the vocabulary's order; one column per factor that changes the tree
    (:func:`prunebench.vocabulary.growth_factors`) in ``growths``.
    """
    names = metric_names()
    return _SCHEMA_TEMPLATE.format(
        metric_columns="\n".join(f"    {m} REAL," for m in names),
        trial_columns="\n".join(f"    {c}," for c in _TRIAL_COLUMNS_V2),
        growth_columns=_growth_columns(),
        views=_views_sql(),
    )


# the metric columns of schema 1 (prunebench 0.1.0)
_METRICS_V1 = ("error", "accuracy", "balanced_accuracy", "log_loss", "brier", "mse", "mae", "r2")
# the factors schema 2 added to ``trials``, with the level every schema-1 trial had
_TRIAL_COLUMNS_V2 = (
    "select_by TEXT NOT NULL DEFAULT 'error'",
    "class_weight TEXT NOT NULL DEFAULT 'none'",
)


def _upgrade_1(conn: sqlite3.Connection) -> str:
    """Version 1 -> 2: each result stored once; the factors and metrics added since 0.1.0.

    ``trials`` gains ``select_by`` and ``class_weight`` (every schema-1 trial chose
    alpha by ``error``, ``mse`` for regression, and grew unweighted trees) before its
    ``growth_id``; the metrics and tree-shape columns added since are NULL for the
    old rows.

    The unpruned rows of the trials that share a grown tree (identical but for
    their timings) become one row per growth setting and outer fold; the pruned
    rows move to ``pruned_folds``; ``curves`` becomes a ``WITHOUT ROWID`` table;
    ``folds`` becomes a view with the old columns.  A growth factor the file's
    trials do not have yet takes its default level (the same in every family).
    """
    have = {r[1] for r in conn.execute("PRAGMA table_info(trials)")}
    growth = growth_factors()
    levels = []
    for name in growth:
        if name in have:
            levels.append(f"t.{name}")
            continue
        defaults = set(map(str, FACTORS[name].default.values()))
        if len(defaults) != 1:
            raise StoreError(f"cannot upgrade: no single default level of {name}")
        levels.append("'" + defaults.pop().replace("'", "''") + "'")
    match = " AND ".join(f"g.{n} IS {v}" for n, v in zip(growth, levels, strict=True))
    names = metric_names()
    old = {r[1] for r in conn.execute("PRAGMA table_info(folds)")}

    def kept(columns: list[str]) -> str:
        # a column the old folds table lacks (a metric or tree shape added since) is NULL
        return ", ".join(f"f.{c}" if c in old else f"NULL AS {c}" for c in columns)

    shape = ["root_feature", "features_used"]
    trial_columns = "".join(
        f"ALTER TABLE trials ADD COLUMN {c};\n"
        for c in _TRIAL_COLUMNS_V2
        if c.split()[0] not in have
    )
    return f"""
{trial_columns}UPDATE trials SET select_by = 'mse' WHERE dataset_id IN
    (SELECT dataset_id FROM datasets WHERE task = 'regression');
CREATE TABLE growths (
    growth_id INTEGER PRIMARY KEY,
    study_id TEXT NOT NULL REFERENCES studies(study_id),
    dataset_id TEXT NOT NULL REFERENCES datasets(dataset_id),
{_growth_columns()}
);
INSERT INTO growths (study_id, dataset_id, {", ".join(growth)})
SELECT DISTINCT t.study_id, t.dataset_id, {", ".join(levels)} FROM trials t
ORDER BY t.study_id, t.dataset_id, {", ".join(levels)};
ALTER TABLE trials ADD COLUMN growth_id INTEGER REFERENCES growths(growth_id);
UPDATE trials AS t SET growth_id = (
    SELECT g.growth_id FROM growths g
    WHERE g.study_id = t.study_id AND g.dataset_id = t.dataset_id AND {match}
);
CREATE INDEX trials_growth ON trials(growth_id);
CREATE TABLE unpruned_folds (
    growth_id INTEGER NOT NULL REFERENCES growths(growth_id),
    "repeat" INTEGER NOT NULL,
    fold INTEGER NOT NULL,
    n_train INTEGER NOT NULL,
    n_test INTEGER NOT NULL,
    test_fingerprint TEXT NOT NULL,
{"".join(f"    {m} REAL," + chr(10) for m in names)}    n_leaves INTEGER NOT NULL,
    depth INTEGER NOT NULL,
    fit_seconds REAL NOT NULL,
    root_feature INTEGER,
    features_used TEXT,
    PRIMARY KEY (growth_id, "repeat", fold)
) WITHOUT ROWID;
INSERT OR IGNORE INTO unpruned_folds
SELECT t.growth_id, f."repeat", f.fold, f.n_train, f.n_test, f.test_fingerprint,
       {kept(names)},
       f.n_leaves, f.depth, f.fit_seconds, {kept(shape)}
FROM folds f JOIN trials t USING (trial_id) WHERE f.arm = 'unpruned'
ORDER BY t.growth_id, f."repeat", f.fold, f.rowid;
CREATE TABLE pruned_folds (
    trial_id TEXT NOT NULL REFERENCES trials(trial_id),
    "repeat" INTEGER NOT NULL,
    fold INTEGER NOT NULL,
{"".join(f"    {m} REAL," + chr(10) for m in names)}    n_leaves INTEGER NOT NULL,
    depth INTEGER NOT NULL,
    alpha REAL NOT NULL,
    fit_seconds REAL NOT NULL,
    root_feature INTEGER,
    features_used TEXT,
    PRIMARY KEY (trial_id, "repeat", fold)
) WITHOUT ROWID;
INSERT INTO pruned_folds
SELECT f.trial_id, f."repeat", f.fold, {kept(names)}, f.n_leaves, f.depth, f.alpha,
       f.fit_seconds, {kept(shape)}
FROM folds f WHERE f.arm = 'pruned';
CREATE TABLE curves_once (
    group_id TEXT NOT NULL,
    "repeat" INTEGER NOT NULL,
    fold INTEGER NOT NULL,
    candidate INTEGER NOT NULL,
    alpha REAL NOT NULL,
    n_leaves INTEGER NOT NULL,
    mean REAL NOT NULL,
    se REAL NOT NULL,
    PRIMARY KEY (group_id, "repeat", fold, candidate)
) WITHOUT ROWID;
INSERT INTO curves_once SELECT * FROM curves;
DROP VIEW arm_summary;
DROP VIEW fold_differences;
DROP TABLE folds;
DROP TABLE curves;
ALTER TABLE curves_once RENAME TO curves;
{_views_sql()}
"""


# schema version n -> SQL (or a function of the connection giving the SQL) that brings a
# version-n file to n + 1
_UPGRADES: dict[int, str | Callable[[sqlite3.Connection], str]] = {1: _upgrade_1}


def _explain(path: Path, err: sqlite3.Error, reading: bool = False) -> StoreError:
    """One clear line for what SQLite said, with what happened to the stored results."""
    text = str(err)
    kept = "the results stored before are intact"
    if "full" in text:
        return StoreError(
            f"{path}: the disk or the database's size limit is full ({text}); "
            f"{kept}: free space and run the same command again"
        )
    if "locked" in text or "busy" in text:
        return StoreError(
            f"{path} is locked by another program writing to it ({text}); "
            f"{kept}: close that program and run the same command again"
        )
    if reading and "unable to open" in text:
        return StoreError(f"{path} cannot be read (no permission, or not a file: {text})")
    if "readonly" in text or "read-only" in text or "unable to open" in text:
        return StoreError(
            f"{path} cannot be written (read-only file or folder, or no permission: {text}); {kept}"
        )
    if "malformed" in text or "not a database" in text or "corrupt" in text:
        return StoreError(
            f"{path} is damaged ({text}); prunebench will not write to it: "
            "restore a copy, or start a new database"
        )
    return StoreError(f"{path}: cannot use this results database: {text}")


def connect_readonly(path: str | Path) -> sqlite3.Connection:
    """Open a results database for reading only, without creating any file beside it.

    A finished database (rollback-journal mode) opens with ``mode=ro``.  A database
    left in WAL mode on read-only media, whose ``-wal`` and ``-shm`` files cannot be
    created, opens with ``immutable=1`` when no conducting process holds its lock
    (then nothing can change it while it is read).

    Parameters
    ----------
    path : str or Path

    Returns
    -------
    sqlite3.Connection

    Raises
    ------
    StoreError
        If the file is missing or cannot be read.
    """
    path = Path(path)
    if not path.exists():
        raise StoreError(f"{path}: no such results database")
    uri = f"file:{path.absolute().as_posix()}?mode=ro"
    conn = sqlite3.connect(uri, uri=True)
    try:
        conn.execute("PRAGMA schema_version").fetchone()
        return conn
    except sqlite3.OperationalError as err:
        conn.close()
        if "unable to open" not in str(err) or lockfile.writer_active(path):
            raise _explain(path, err, reading=True) from None
    conn = sqlite3.connect(uri + "&immutable=1", uri=True)
    try:
        conn.execute("PRAGMA schema_version").fetchone()
    except sqlite3.Error as err:
        conn.close()
        raise _explain(path, err, reading=True) from None
    return conn


def utc_now() -> str:
    """The current time as ISO 8601 UTC, to the millisecond."""
    return _dt.datetime.now(_dt.UTC).isoformat(timespec="milliseconds")


class ResultStore:
    """The results database, behind one class with a single writer.

    Parameters
    ----------
    path : str or Path
        The SQLite file; created (with its schema) if missing, unless ``readonly``.
    readonly : bool, default=False
        Open without writing (see :func:`connect_readonly`); the file must exist.
    lock : bool, default=False
        Take the conducting lock: refuse if another living process holds it.
    write_hook : callable, optional
        Called with no arguments inside each group's transaction, just before it
        commits; the reliability tests use it to kill a process in the middle of a
        write.  Default: the class attribute :attr:`write_hook` (``None``).
    """

    #: seconds a write waits for another program's lock before giving up
    busy_timeout = 30.0
    #: the hook stores use when none is given (set only by fault-injection tests)
    write_hook: Callable[[], None] | None = None

    def __init__(
        self,
        path: str | Path,
        *,
        readonly: bool = False,
        lock: bool = False,
        write_hook: Callable[[], None] | None = None,
    ) -> None:
        self.path = Path(path)
        self.readonly = readonly
        if write_hook is not None:
            self.write_hook = write_hook
        self._lock_handle = None
        self._in_wal = False
        if readonly and not self.path.exists():
            raise StoreError(f"{self.path}: no such results database")
        if lock:
            self._take_lock()
        try:
            if readonly:
                conn = connect_readonly(self.path)
            else:
                self.path.parent.mkdir(parents=True, exist_ok=True)
                conn = sqlite3.connect(self.path, timeout=self.busy_timeout)
            import sqlite_utils  # imported here: it imports pandas when pandas is installed

            self.db = sqlite_utils.Database(conn)
            self._prepare()
        except sqlite3.Error as err:
            self._release_lock()
            raise _explain(self.path, err, reading=readonly) from None
        except StoreError:
            self._release_lock()
            raise

    # -- opening --------------------------------------------------------------------------

    @property
    def lock_fd(self) -> int | None:
        """File descriptor of the held conducting lock (worker processes close their copy)."""
        return None if self._lock_handle is None else self._lock_handle.fileno()

    def _take_lock(self) -> None:
        lock_path = lockfile.lock_path(self.path)
        try:
            handle, holder = lockfile.acquire(lock_path)
        except OSError as err:
            raise StoreError(
                f"{self.path} cannot be written: its lock file {lock_path.name} cannot be "
                f"created ({err.strerror}); is the folder read-only?"
            ) from None
        if handle is None:
            raise StoreError(
                f"{self.path} is being written by another 'prunebench conduct' "
                f"({holder}); wait for it to finish or stop it first"
            )
        self._lock_handle = handle

    def _release_lock(self) -> None:
        if self._lock_handle is not None:
            lockfile.release(self._lock_handle)
            self._lock_handle = None

    def _prepare(self) -> None:
        conn = self.db.conn
        version = conn.execute("PRAGMA user_version").fetchone()[0]
        tables = {r[0] for r in conn.execute("SELECT name FROM sqlite_master WHERE type='table'")}
        if version > SCHEMA_VERSION:
            raise StoreError(
                f"{self.path} was written by a newer prunebench (schema {version}; this one "
                f"knows {SCHEMA_VERSION}); upgrade prunebench to read it"
            )
        if version == 0 and tables:
            raise StoreError(f"{self.path} is an SQLite file but not a prunebench results database")
        if self.readonly:
            if version == 0:
                raise StoreError(f"{self.path} is not a prunebench results database")
            return
        conn.execute("PRAGMA foreign_keys=ON")
        if version == 0:
            self._wal()
            with conn:
                conn.executescript(
                    f"BEGIN; {schema_sql()} PRAGMA user_version = {SCHEMA_VERSION}; COMMIT;"
                )
            version = SCHEMA_VERSION
        while version < SCHEMA_VERSION:
            self._wal()
            step = _UPGRADES[version]
            sql = step(conn) if callable(step) else step
            with conn:
                conn.executescript(
                    f"BEGIN; {sql} PRAGMA user_version = {version + 1}; COMMIT;"
                )
            version += 1

    def _wal(self) -> None:
        """Switch to write-ahead logging before the first write (readers go on reading).

        Not at opening: a writer refused before it writes leaves the file untouched.
        """
        if not self._in_wal:
            self.db.conn.execute("PRAGMA journal_mode=WAL")
            self._in_wal = True

    def close(self) -> None:
        """Close the database and release the conducting lock.

        A writer first folds its write-ahead log back into the file and returns it to
        rollback-journal mode, so the closed database is one self-contained file that
        read-only media and read-only openers can use.  If another connection still
        reads it, the switch waits for the next writer's close.
        """
        if self._in_wal:
            try:
                self.db.conn.execute("PRAGMA journal_mode=DELETE")
            except sqlite3.Error:
                pass  # another connection has it open; WAL is still consistent
        self.db.conn.close()
        self._release_lock()

    def __enter__(self) -> ResultStore:
        return self

    def __exit__(self, *exc) -> None:
        self.close()

    # -- writing ----------------------------------------------------------------------------

    def register_study(self, study) -> None:
        """Record a study, its data sets and its trials (new trials as ``pending``).

        Refuses, with the reason, a study whose seed or outer scheme differ from the
        results already stored under its name: those results depend on them.

        Parameters
        ----------
        study : Study
        """
        now = utc_now()
        try:
            existing = self.db.conn.execute(
                "SELECT seed, outer_repeats, outer_folds FROM studies WHERE study_id = ?",
                [study.study_id],
            ).fetchone()
        except sqlite3.Error as err:
            raise _explain(self.path, err) from None
        if existing:
            seed, repeats, folds = existing
            changed = []
            if seed != study.seed:
                changed.append(f"seed {seed} -> {study.seed}")
            if (repeats, folds) != (study.repeats, study.folds):
                changed.append(f"outer {repeats}x{folds} -> {study.outer_scheme}")
            if changed:
                raise StoreError(
                    f"study {study.name!r} in {self.path} already has results that depend on "
                    f"{' and '.join(changed)}; keep them as they were, or give the study a new "
                    "name or a new database"
                )
        try:
            self._wal()
            with self.db.conn:
                if existing:
                    self.db.conn.execute(
                        "UPDATE studies SET description = ?, study_text = ?, study_hash = ?, "
                        "updated = ?, prunebench_version = ? WHERE study_id = ?",
                        [
                            study.description,
                            study.text,
                            study.text_hash,
                            now,
                            __version__,
                            study.study_id,
                        ],
                    )
                else:
                    self.db["studies"].insert(
                        {
                            "study_id": study.study_id,
                            "name": study.name,
                            "description": study.description,
                            "study_text": study.text,
                            "study_hash": study.text_hash,
                            "seed": study.seed,
                            "outer_repeats": study.repeats,
                            "outer_folds": study.folds,
                            "created": now,
                            "updated": now,
                            "prunebench_version": __version__,
                        }
                    )
                for key, data in study.datasets.items():
                    self.db["datasets"].insert(
                        {
                            "dataset_id": self.dataset_id(key, data.fingerprint),
                            "name": key,
                            "params": json.dumps(data.params, sort_keys=True),
                            "task": data.task,
                            "rows": int(data.X.shape[0]),
                            "features": int(data.X.shape[1]),
                            "classes": data.n_classes,
                            "source": data.info.source,
                            "licence": data.info.licence,
                            "citation": data.info.citation,
                            "fingerprint": data.fingerprint,
                        },
                        ignore=True,
                    )
                self._insert_trials(study, study.trials())
                self._record_environment(study.study_id, now)
        except sqlite3.Error as err:
            raise _explain(self.path, err) from None

    def add_trials(self, study, trials) -> None:
        """Record more trials of a registered study as ``pending`` (existing ones are kept)."""
        try:
            self._wal()
            with self.db.conn:
                self._insert_trials(study, trials)
        except sqlite3.Error as err:
            raise _explain(self.path, err) from None

    def _insert_trials(self, study, trials) -> None:
        trials = list(trials)
        growth = self._growth_ids(study, trials)
        self.db["trials"].insert_all(
            (
                {
                    "trial_id": t.trial_id,
                    "study_id": study.study_id,
                    "dataset_id": self.dataset_id(t.dataset, study.datasets[t.dataset].fingerprint),
                    "group_id": t.group_id,
                    **t.levels(),
                    "status": "pending",
                    "growth_id": growth[t.trial_id],
                }
                for t in trials
            ),
            ignore=True,
        )

    def _growth_ids(self, study, trials) -> dict[str, int]:
        """trial_id -> the ``growths`` row of its study, data set and growth levels (added)."""
        names = growth_factors()
        match = " AND ".join(f"{n} IS ?" for n in names)
        found: dict[tuple, int] = {}
        out = {}
        for t in trials:
            dataset_id = self.dataset_id(t.dataset, study.datasets[t.dataset].fingerprint)
            levels = dict(t.growth())
            key = (dataset_id, *(levels.get(n) for n in names))
            if key not in found:
                row = self.db.conn.execute(
                    f"SELECT growth_id FROM growths WHERE study_id = ? AND dataset_id = ? "
                    f"AND {match}",
                    [study.study_id, *key],
                ).fetchone()
                if row is None:
                    cursor = self.db.conn.execute(
                        f"INSERT INTO growths (study_id, dataset_id, {', '.join(names)}) "
                        f"VALUES ({', '.join('?' * (len(names) + 2))})",
                        [study.study_id, *key],
                    )
                    row = (cursor.lastrowid,)
                found[key] = row[0]
            out[t.trial_id] = found[key]
        return out

    @staticmethod
    def dataset_id(key: str, fingerprint: str) -> str:
        """Id of a data set: its study key and its fingerprint."""
        return hashlib.sha256(f"{key}:{fingerprint}".encode()).hexdigest()[:16]

    def _record_environment(self, study_id: str, now: str) -> None:
        import numpy
        import pandas
        import sklearn

        self.db["environments"].insert(
            {
                "study_id": study_id,
                "recorded": now,
                "python": sys.version.split()[0],
                "numpy": numpy.__version__,
                "scikit_learn": sklearn.__version__,
                "pandas": pandas.__version__,
                "prunebench": __version__,
                "platform": platform.platform(),
            }
        )

    def statuses(self, study_id: str) -> dict[str, str]:
        """trial_id -> status for a study."""
        try:
            rows = self.db.conn.execute(
                "SELECT trial_id, status FROM trials WHERE study_id = ?", [study_id]
            )
            return dict(rows.fetchall())
        except sqlite3.Error as err:
            raise _explain(self.path, err) from None

    def save_group(self, result, trials, started: str, finished: str) -> None:
        """Store a finished group: its rows and its trials' ``done``, in one transaction.

        The unpruned rows are stored once for the group's growth setting (replacing
        any earlier copy), the pruned rows per trial and the curves per curve id;
        earlier rows of the same trials (from a failed attempt) are replaced.
        """
        ids = [t.trial_id for t in trials]
        marks = ",".join("?" * len(ids))
        curve_ids = list(dict.fromkeys(t.group_id for t in trials))
        curve_marks = ",".join("?" * len(curve_ids))
        try:
            self._wal()
            with self.db.conn:
                growth = self.db.conn.execute(
                    f"SELECT DISTINCT growth_id FROM trials WHERE trial_id IN ({marks})", ids
                ).fetchall()
                if len(growth) != 1:
                    raise StoreError(
                        f"{self.path}: the trials of group {result.group_id} do not share "
                        "one registered growth setting"
                    )
                growth_id = growth[0][0]
                self.db.conn.execute(f"DELETE FROM pruned_folds WHERE trial_id IN ({marks})", ids)
                self.db.conn.execute(
                    f"DELETE FROM curves WHERE group_id IN ({curve_marks})", curve_ids
                )
                self.db["unpruned_folds"].insert_all(
                    ({"growth_id": growth_id, **row} for row in result.unpruned),
                    batch_size=500,
                    replace=True,
                )
                self.db["pruned_folds"].insert_all(result.pruned, batch_size=500)
                self.db["curves"].insert_all(result.curves, batch_size=500)
                self.db.conn.execute(
                    f"UPDATE trials SET status = 'done', error = NULL, started = ?, "
                    f"finished = ?, seconds = ? WHERE trial_id IN ({marks})",
                    [started, finished, result.seconds, *ids],
                )
                if self.write_hook is not None:
                    self.write_hook()
        except sqlite3.Error as err:
            raise _explain(self.path, err) from None

    def save_failure(self, trials, error: str, started: str, finished: str, seconds: float) -> None:
        """Mark trials ``failed`` with the error text (a traceback), in one transaction."""
        ids = [t.trial_id for t in trials]
        marks = ",".join("?" * len(ids))
        try:
            self._wal()
            with self.db.conn:
                self.db.conn.execute(
                    f"UPDATE trials SET status = 'failed', error = ?, started = ?, finished = ?, "
                    f"seconds = ? WHERE trial_id IN ({marks})",
                    [error, started, finished, seconds, *ids],
                )
        except sqlite3.Error as err:
            raise _explain(self.path, err) from None

    # -- reading ----------------------------------------------------------------------------

    def query(self, sql: str, params: list | tuple = ()) -> list[dict]:
        """Rows of a query as dicts."""
        cursor = self.db.conn.execute(sql, params)
        names = [c[0] for c in cursor.description]
        return [dict(zip(names, row, strict=True)) for row in cursor.fetchall()]

    def integrity(self) -> str:
        """``PRAGMA integrity_check``'s answer (``"ok"`` when sound)."""
        return self.db.conn.execute("PRAGMA integrity_check").fetchone()[0]
