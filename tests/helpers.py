"""Helpers shared by the tests that run sweeps in subprocesses and compare databases.

Not a test module: pytest puts this folder on ``sys.path``, so tests import it as
``helpers``.
"""

from __future__ import annotations

import sqlite3
import subprocess
import time


def stored_rows(path) -> dict:
    """Every stored result without timings, sorted: what two runs of a study must share."""
    conn = sqlite3.connect(path)
    folds = conn.execute(
        'SELECT trial_id, "repeat", fold, arm, n_train, n_test, test_fingerprint, error, '
        "accuracy, balanced_accuracy, log_loss, brier, n_leaves, depth, alpha FROM folds "
        'ORDER BY trial_id, "repeat", fold, arm'
    ).fetchall()
    curves = conn.execute('SELECT * FROM curves ORDER BY group_id, "repeat", fold, candidate')
    trials = conn.execute(
        "SELECT trial_id, group_id, criterion, max_depth, min_samples_leaf, inner_folds, rule, "
        "prune_risk, status FROM trials ORDER BY trial_id"
    )
    out = {"folds": folds, "curves": curves.fetchall(), "trials": trials.fetchall()}
    conn.close()
    return out


def done_trials(path) -> int:
    """Trials stored as done, read without writing; -1 while the file has no schema yet."""
    if not path.exists():
        return -1
    try:
        conn = sqlite3.connect(f"file:{path}?mode=ro", uri=True)
        n = conn.execute("SELECT COUNT(*) FROM trials WHERE status = 'done'").fetchone()[0]
        conn.close()
        return n
    except sqlite3.DatabaseError:
        return -1


def start_and_wait(cmd, db, at_least: int, timeout: float = 120) -> subprocess.Popen:
    """Start a command and return it, still running, once ``db`` has ``at_least`` done trials."""
    proc = subprocess.Popen(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline and proc.poll() is None:
        if done_trials(db) >= at_least:
            break
        time.sleep(0.1)
    assert proc.poll() is None, "the sweep finished before it could be killed"
    return proc
