"""Helpers shared by the tests: sweeps run in subprocesses, databases compared, a small study.

Not a test module: pytest puts this folder on ``sys.path``, so tests import it as
``helpers``.
"""

from __future__ import annotations

import os
import sqlite3
import subprocess
import time
from pathlib import Path

import numpy as np


def stored_rows(path) -> dict:
    """Every stored result without timings, sorted: what two runs of a study must share."""
    conn = sqlite3.connect(path)
    folds = conn.execute(
        'SELECT trial_id, "repeat", fold, arm, n_train, n_test, test_fingerprint, error, '
        "accuracy, balanced_accuracy, log_loss, brier, mse, mae, r2, n_leaves, depth, alpha "
        "FROM folds "
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


def start_and_wait(
    cmd, db, at_least: int, timeout: float = 120, stderr=subprocess.DEVNULL
) -> subprocess.Popen:
    """Start a command and return it, still running, once ``db`` has ``at_least`` done trials."""
    proc = subprocess.Popen(cmd, stdout=subprocess.DEVNULL, stderr=stderr)
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline and proc.poll() is None:
        if done_trials(db) >= at_least:
            break
        time.sleep(0.1)
    assert proc.poll() is None, "the sweep finished before it could be killed"
    return proc


def _stat(pid: int) -> list[str] | None:
    """Fields of /proc/PID/stat after the command name, or None if there is no such process."""
    try:
        text = Path(f"/proc/{pid}/stat").read_text()
    except OSError:
        return None
    return text.rsplit(")", 1)[1].split()


def descendants(pid: int) -> set[int]:
    """Every living process started by ``pid``, its children's children included."""
    parents = {}
    for entry in os.listdir("/proc"):
        if entry.isdigit():
            fields = _stat(int(entry))
            if fields and fields[0] != "Z":
                parents[int(entry)] = int(fields[1])
    found, frontier = set(), {pid}
    while frontier:
        frontier = {child for child, parent in parents.items() if parent in frontier} - found
        found |= frontier
    return found


def alive(pid: int) -> bool:
    """Whether ``pid`` runs (a zombie has ended; only its parent has not collected it)."""
    fields = _stat(pid)
    return fields is not None and fields[0] != "Z"


def still_running(pids, within: float) -> set[int]:
    """Poll until none of ``pids`` runs or ``within`` seconds pass; return those left."""
    deadline = time.monotonic() + within
    left = {p for p in pids if alive(p)}
    while left and time.monotonic() < deadline:
        time.sleep(0.1)
        left = {p for p in left if alive(p)}
    return left


def statsmodels_fit(y, v):
    """statsmodels' DerSimonian-Laird fit: (row of the Hartung-Knapp interval, tau^2, I^2).

    statsmodels leaves tau^2 (and I^2) negative when Q < k - 1; truncated at 0, as in
    DESIGN.md, the random-effects fit is the fixed-effect one, so the row is then the
    "fixed effect wls" row (fixed-effect weights, Hartung-Knapp scale).
    """
    from statsmodels.stats import meta_analysis as sm_meta

    fit = sm_meta.combine_effects(np.asarray(y), np.asarray(v), method_re="dl", use_t=True)
    frame = fit.summary_frame()
    if fit.tau2 > 0:
        return frame.loc["random effect wls"], frame.loc["random effect"], fit, 3
    return frame.loc["fixed effect wls"], frame.loc["fixed effect"], fit, 2


#: a small valid study file (iris and wine, 24 trials in 8 groups) that the study tests
#: change one line of
GOOD = """\
name = "unit"
description = "a small study"
seed = 5
datasets = ["iris", "wine"]

[outer]
repeats = 2
folds = 3

[factors]
criterion = ["gini", "entropy"]
max_depth = ["none", 3]
inner_folds = [3]
rule = ["min", "1se", "0.5se"]
"""


#: a pruned cost-risk configuration chosen by AUC (the snippet and decision-box tests)
COST_CONFIG = {
    "criterion": "gini",
    "max_depth": None,
    "min_samples_leaf": 1,
    "inner_folds": 5,
    "rule": "1se",
    "prune_risk": "cost",
    "select_by": "auc",
    "class_weight": "none",
}
