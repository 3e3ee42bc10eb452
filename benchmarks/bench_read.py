"""Benchmark: reading the folds of a sweep-sized results database into pandas.

Copies the database kept as a test fixture (written by prunebench 0.1.0) and
repeats its trials until it holds about as many fold rows as an overnight sweep
(129,600 by default), then reads them in one run two ways, side by side: the way
0.1.0 did (rows as a list of dicts, then a DataFrame) and
:func:`prunebench.results.load_folds` (one SQL read straight into pandas).
Prints the seconds and the peak memory Python allocated for each (tracemalloc)
and their ratios. Target: the one-read path needs less memory.

Run: python benchmarks/bench_read.py [--rows 129600]
"""

from __future__ import annotations

import argparse
import shutil
import sqlite3
import tempfile
import time
import tracemalloc
from pathlib import Path

import pandas as pd

from prunebench.results import _folds_sql, load_folds, resolve_study
from prunebench.store import ResultStore

ROOT = Path(__file__).resolve().parents[1]
FIXTURE = ROOT / "tests" / "fixtures" / "previous_release.sqlite"


def _grow(path: Path, rows: int) -> int:
    """Repeat the database's trials (new ids, same folds) until it has about ``rows`` folds."""
    conn = sqlite3.connect(path)
    have = conn.execute("SELECT COUNT(*) FROM folds").fetchone()[0]
    copies = max(1, rows // have)
    trial_columns = [r[1] for r in conn.execute("PRAGMA table_info(trials)")]
    fold_columns = [r[1] for r in conn.execute("PRAGMA table_info(folds)")]

    def select(columns):
        return ", ".join("trial_id || '-' || k" if c == "trial_id" else f'"{c}"' for c in columns)

    with conn:
        conn.execute(
            "CREATE TEMP TABLE k AS WITH RECURSIVE k(k) AS (SELECT 1 UNION ALL "
            f"SELECT k + 1 FROM k WHERE k < {copies - 1}) SELECT k FROM k"
        )
        quoted_t = ", ".join(f'"{c}"' for c in trial_columns)
        quoted_f = ", ".join(f'"{c}"' for c in fold_columns)
        conn.execute(
            f"INSERT INTO trials ({quoted_t}) SELECT {select(trial_columns)} "
            "FROM trials, temp.k WHERE instr(trial_id, '-') = 0"
        )
        conn.execute(
            f"INSERT INTO folds ({quoted_f}) SELECT {select(fold_columns)} "
            "FROM folds, temp.k WHERE instr(trial_id, '-') = 0"
        )
    n = conn.execute("SELECT COUNT(*) FROM folds").fetchone()[0]
    conn.close()
    return n


def _as_dicts(store: ResultStore) -> pd.DataFrame:
    """0.1.0's way: every row as a dict, then one DataFrame."""
    study_id = resolve_study(store)["study_id"]
    frame = pd.DataFrame(store.query(_folds_sql(), [study_id]))
    frame["max_depth"] = frame["max_depth"].astype("Int64")
    return frame


def _measure(read, path: Path) -> tuple[float, float, int]:
    with ResultStore(path, readonly=True) as store:
        tracemalloc.start()
        t0 = time.perf_counter()
        frame = read(store)
        seconds = time.perf_counter() - t0
        peak = tracemalloc.get_traced_memory()[1]
        tracemalloc.stop()
    return seconds, peak / 2**20, len(frame)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rows", type=int, default=129_600)
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "sweep.sqlite"
        shutil.copy(FIXTURE, path)
        n = _grow(path, args.rows)
        print(f"{n} fold rows")
        print(f"{'read':<24} {'seconds':>8} {'peak MiB':>9}")
        results = {}
        for name, read in (("list of dicts (0.1.0)", _as_dicts), ("load_folds", load_folds)):
            seconds, peak, rows = _measure(read, path)
            assert rows == n
            results[name] = (seconds, peak)
            print(f"{name:<24} {seconds:>8.2f} {peak:>9.1f}", flush=True)
        (s_old, m_old), (s_new, m_new) = results.values()
        print(
            f"load_folds / list of dicts: time {s_new / s_old:.2f}x, peak memory "
            f"{m_new / m_old:.2f}x"
        )


if __name__ == "__main__":
    main()
