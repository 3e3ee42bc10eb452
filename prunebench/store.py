"""The results database: one SQLite file, one writer, one transaction per trial group.

Tables (see the README for every column): ``studies``, ``datasets``, ``trials``,
``growths`` (one row per study, data set and growth setting), ``unpruned_folds``
(the grown tree once per growth setting and outer fold), ``pruned_folds`` (per
trial and outer fold), ``curves`` (per curve id, the trials' ``group_id``, and
outer fold), ``environments``; views ``folds`` (today's per-trial, per-arm rows),
``arm_summary`` and ``fold_differences``.  The schema version is SQLite's ``user_version``; older
files are upgraded step by step, newer ones are refused (the schema's SQL and the
upgrade steps are in :mod:`prunebench.schema`).  A conducting process
holds an exclusive lock file beside the database, so a second one is refused; the
lock file names its holder's process, and a lock whose holder no longer exists is
taken over.  A writer leaves the file in rollback-journal mode when it closes, so
a finished database is one self-contained file that readers open read-only
(``mode=ro``, or ``immutable=1`` on read-only media) without creating files.
"""

from __future__ import annotations

import contextlib
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
from .schema import SCHEMA_VERSION, schema_sql, upgrade_sql
from .vocabulary import growth_factors

__all__ = [
    "SCHEMA_VERSION",
    "ResultStore",
    "StoreError",
    "connect_readonly",
    "schema_sql",
    "utc_now",
]


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


#: the first 16 bytes of every SQLite database file
SQLITE_HEADER = b"SQLite format 3\x00"


def _refuse_other_files(path: Path) -> None:
    """Refuse, before anything is written beside it, a file that is not SQLite at all."""
    try:
        with open(path, "rb") as handle:
            head = handle.read(len(SQLITE_HEADER))
    except (FileNotFoundError, IsADirectoryError, PermissionError):
        return  # a new database, or a reason SQLite explains when it opens it
    if head and head != SQLITE_HEADER:
        raise StoreError(
            f"{path} is not a results database (not an SQLite file); prunebench will "
            "not write to it: give a new file name or an existing results database"
        )


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
        _refuse_other_files(self.path)
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
            lockfile.release(self._lock_handle, lockfile.lock_path(self.path))
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
            sql = upgrade_sql(conn, version)
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

    @contextlib.contextmanager
    def _transaction(self):
        """One write transaction, begun at once: committed whole or rolled back whole.

        sqlite-utils' inserts commit on their own unless a transaction is already
        open, so each write opens its own first (``BEGIN IMMEDIATE`` also takes the
        write lock before anything is read for it).
        """
        self._wal()
        with self.db.conn:
            self.db.conn.execute("BEGIN IMMEDIATE")
            yield

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
            with self._transaction():
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
            with self._transaction():
                self._insert_trials(study, trials)
        except sqlite3.Error as err:
            raise _explain(self.path, err) from None

    def remove_pending(self, study_id: str) -> int:
        """Remove a study's ``pending`` trials, and the growth settings left without trials.

        A search registers a configuration's trials only as they are about to run;
        the ones a kill left pending are not owed (see :mod:`prunebench.search`).  A
        pending trial has no stored rows, so nothing else refers to it.

        Parameters
        ----------
        study_id : str

        Returns
        -------
        int
            How many trials were removed.
        """
        try:
            with self._transaction():
                removed = self.db.conn.execute(
                    "DELETE FROM trials WHERE study_id = ? AND status = 'pending'", [study_id]
                ).rowcount
                self.db.conn.execute(
                    "DELETE FROM growths WHERE study_id = ? AND NOT EXISTS "
                    "(SELECT 1 FROM trials t WHERE t.growth_id = growths.growth_id) "
                    "AND NOT EXISTS "
                    "(SELECT 1 FROM unpruned_folds u WHERE u.growth_id = growths.growth_id)",
                    [study_id],
                )
        except sqlite3.Error as err:
            raise _explain(self.path, err) from None
        return removed

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
            with self._transaction():
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
            with self._transaction():
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
