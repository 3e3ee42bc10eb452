"""Benchmark: the previous grouping (by every factor but the rule) against the new one.

The overnight study's classification factors (criterion x2, depth x3, leaf x2,
inner folds 5 and 10, rule x3, pruning risk x2) on pima, spambase and waveform
(1,000 rows), 2 x 5 outer folds, run side by side in one process:

(a) the previous grouping, kept here only as a plan: one group per data set and
    every level but the rule (so T_max is grown again for every inner fold count
    and risk, and every risk's fold trees again), stored in the previous release's
    schema (one fold row per trial and arm, curves with a row id);
(b) the new grouping through ``conduct``: one group per data set and growth
    setting, each result stored once.

Both use this version's per-fit code (float32 once, numpy metrics), so the time
ratio is the grouping's alone.  Prints fits, seconds and whether the rows are
equal, and database bytes per trial.  Targets: fits(b) = 12 x 10 x 16 per data
set, time (a)/(b) >= 1.5, identical rows, bytes per trial (b) <= 0.6 x (a).

Run: python benchmarks/bench_sweep.py [--datasets pima spambase waveform]
"""

from __future__ import annotations

import argparse
import io
import sqlite3
import tempfile
import time
from pathlib import Path

from prunebench.evaluate import EvaluationSettings, evaluate_group
from prunebench.execute import Progress, conduct
from prunebench.study import parse_study
from prunebench.trials import TrialGroup

ROOT = Path(__file__).resolve().parents[1]
FIXTURE = ROOT / "tests" / "fixtures" / "previous_release.sqlite"

STUDY = """\
name = "bench-sweep"
seed = 20261202
datasets = [{datasets}]
[outer]
repeats = 2
folds = 5
[factors]
criterion = ["gini", "entropy"]
max_depth = ["none", 4, 8]
min_samples_leaf = [1, 10]
inner_folds = [5, 10]
rule = ["min", "0.5se", "1se"]
prune_risk = ["error", "impurity"]
"""

SPELLING = {"waveform": '{ name = "waveform", n_samples = 1000, seed = 1 }'}

FOLD_COLUMNS = (
    'trial_id, "repeat", fold, arm, n_train, n_test, test_fingerprint, error, accuracy, '
    "balanced_accuracy, log_loss, brier, mse, mae, r2, n_leaves, depth, alpha"
)


def previous_groups(study) -> list[TrialGroup]:
    """The previous release's grouping: trials that differ only in the rule."""
    groups: dict[str, list] = {}
    for trial in study.trials():
        groups.setdefault(trial.group_id, []).append(trial)
    return [TrialGroup.of(trials, gid) for gid, trials in groups.items()]


def previous_schema() -> str:
    """The previous release's schema, read from the database it wrote (the test fixture)."""
    conn = sqlite3.connect(f"file:{FIXTURE}?mode=ro", uri=True)
    rows = conn.execute(
        "SELECT sql FROM sqlite_master WHERE sql IS NOT NULL ORDER BY rowid"
    ).fetchall()
    conn.close()
    return ";\n".join(r[0] for r in rows) + ";"


def _insert(conn, table: str, rows: list[dict]) -> None:
    # the previous release's tables lack the columns added since (new metrics, tree shape)
    have = {r[1] for r in conn.execute(f"PRAGMA table_info({table})")}
    names = [n for n in rows[0] if n in have]
    quoted = ", ".join('"' + n + '"' for n in names)
    marks = ", ".join("?" * len(names))
    conn.executemany(
        f"INSERT INTO {table} ({quoted}) VALUES ({marks})",
        [tuple(r[n] for n in names) for r in rows],
    )


def run_previous(study, db: Path) -> tuple[int, float]:
    """Evaluate and store every previous-style group; (fits, seconds)."""
    settings = EvaluationSettings.of(study)
    conn = sqlite3.connect(db)
    conn.executescript(previous_schema())
    fits, t0 = 0, time.perf_counter()
    for group in previous_groups(study):
        result = evaluate_group(group, study.datasets[group.dataset], settings)
        fits += result.n_fits
        with conn:
            _insert(conn, "folds", result.folds)
            _insert(conn, "curves", result.curves)
    seconds = time.perf_counter() - t0
    conn.close()
    return fits, seconds


def fold_rows(db: Path) -> list:
    conn = sqlite3.connect(db)
    rows = conn.execute(
        f'SELECT {FOLD_COLUMNS} FROM folds ORDER BY trial_id, "repeat", fold, arm'
    ).fetchall()
    curves = conn.execute(
        'SELECT * FROM curves ORDER BY group_id, "repeat", fold, candidate'
    ).fetchall()
    conn.close()
    return rows, curves


def result_bytes(db: Path) -> int:
    """Bytes of the results tables and their indexes (the fold rows and curves)."""
    conn = sqlite3.connect(db)
    conn.execute("VACUUM")
    names = {
        r[0]
        for r in conn.execute("SELECT name FROM sqlite_master WHERE type IN ('table', 'index')")
    }
    keep = {"folds", "curves", "unpruned_folds", "pruned_folds", "growths"}
    wanted = [
        n
        for n in names
        if n in keep or any(n.startswith(f"sqlite_autoindex_{k}") for k in keep) or n == "folds_arm"
    ]
    total = 0
    for name in wanted:
        total += (
            conn.execute("SELECT SUM(pgsize) FROM dbstat WHERE name = ?", [name]).fetchone()[0] or 0
        )
    conn.close()
    return total


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--datasets", nargs="+", default=["pima", "spambase", "waveform"])
    args = parser.parse_args()
    spelled = ", ".join(SPELLING.get(d, f'"{d}"') for d in args.datasets)
    study = parse_study(STUDY.format(datasets=spelled))
    n_trials = len(study.trials())
    print(
        f"{n_trials} trials on {len(args.datasets)} data sets: "
        f"(a) {len(previous_groups(study))} groups, (b) {len(study.groups())} groups",
        flush=True,
    )
    with tempfile.TemporaryDirectory() as tmp:
        old_db, new_db = Path(tmp) / "a.sqlite", Path(tmp) / "b.sqlite"
        t0 = time.perf_counter()
        summary = conduct(study, new_db, progress=Progress(0, io.StringIO()))
        new_seconds = time.perf_counter() - t0
        old_fits, old_seconds = run_previous(study, old_db)
        equal = fold_rows(old_db) == fold_rows(new_db)
        old_bytes, new_bytes = result_bytes(old_db), result_bytes(new_db)
        file_old, file_new = old_db.stat().st_size, new_db.stat().st_size
    minimum = 12 * 10 * 16 * len(args.datasets)
    print(f"{'':<14} {'fits':>7} {'seconds':>8} {'bytes/trial':>11} {'file bytes':>11}")
    print(
        f"{'(a) previous':<14} {old_fits:>7} {old_seconds:>8.1f} "
        f"{old_bytes / n_trials:>11.0f} {file_old:>11}"
    )
    print(
        f"{'(b) new':<14} {summary.n_fits:>7} {new_seconds:>8.1f} "
        f"{new_bytes / n_trials:>11.0f} {file_new:>11}"
    )
    print(f"fits(b) = {summary.n_fits} (minimum 12 x 10 x 16 x {len(args.datasets)} = {minimum})")
    print(f"time (a)/(b) = {old_seconds / new_seconds:.2f}x (target >= 1.5)")
    print(f"fits (a)/(b) = {old_fits / summary.n_fits:.2f}x")
    print(f"rows equal (folds and curves): {equal}")
    print(
        f"result bytes per trial (b)/(a) = {new_bytes / old_bytes:.2f} (target <= 0.6); "
        f"whole file (b)/(a) = {file_new / file_old:.2f}"
    )


if __name__ == "__main__":
    main()
