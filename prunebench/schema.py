"""The results database's schema: its tables and views from the vocabulary, and the upgrade steps.

:func:`schema_sql` is the SQL of a new database: one ``REAL`` column per metric of
the vocabulary in ``unpruned_folds`` and ``pruned_folds``, one column per growth
factor in ``growths``, and the views ``folds`` (the per-trial, per-arm rows),
``arm_summary`` and ``fold_differences``.  The schema version is SQLite's
``user_version`` (:data:`SCHEMA_VERSION`); :func:`upgrade_sql` gives the SQL that
brings a file of an older version one step forward.  :mod:`prunebench.store` runs
them; nothing here opens a database.
"""

from __future__ import annotations

import sqlite3
from collections.abc import Callable

from .exceptions import StoreError
from .vocabulary import FACTORS, growth_factors, metric_names

__all__ = ["SCHEMA_VERSION", "schema_sql", "upgrade_sql"]

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


def upgrade_sql(conn: sqlite3.Connection, version: int) -> str:
    """The SQL that brings a file of schema ``version`` to ``version + 1``.

    Parameters
    ----------
    conn : sqlite3.Connection
        The file to upgrade (a step may read its columns to write its SQL).
    version : int
        Its current schema version, below :data:`SCHEMA_VERSION`.

    Returns
    -------
    str
    """
    step = _UPGRADES[version]
    return step(conn) if callable(step) else step
