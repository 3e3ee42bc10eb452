"""Benchmark: rank, recommend and report on a sweep database, 0.1.0 against this version.

Takes a finished results database written by this version (the overnight study's,
say), keeps its classification trials by default (2,304 for the overnight study:
16 data sets x 144 configurations), and writes the same rows in 0.1.0's schema (one
fold row per trial and arm).  0.1.0's code is taken from git (the release commit,
``git archive``) into a temporary folder.  Each command then runs in a fresh
process per version, alternating, ``--runs`` times; the process reports its own
peak resident memory (``ru_maxrss``) as it ends.  Prints the median wall time and
the largest peak memory per command and version, and their ratios.  Target: peak
memory of this version <= 0.6 x 0.1.0's.

Run: python benchmarks/bench_commands.py --db results/overnight.sqlite [--runs 3]
     [--all-families]
"""

from __future__ import annotations

import argparse
import os
import shutil
import sqlite3
import statistics
import subprocess
import sys
import tarfile
import tempfile
import time
from io import BytesIO
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
FIXTURE = ROOT / "tests" / "fixtures" / "previous_release.sqlite"
RELEASE = "4d83987"  # 0.1.0's package code (the commit that kept its database as a fixture)

# Runs one prunebench command in this process and prints its peak memory as it ends,
# so every figure is one process's own and nothing of the parent is counted.
RUNNER = """\
import resource, sys
from prunebench.cli import main
try:
    main(sys.argv[1:], prog_name="prunebench", standalone_mode=False)
finally:
    print("peak_kib", resource.getrusage(resource.RUSAGE_SELF).ru_maxrss, file=sys.stderr)
"""


def release_code(into: Path) -> Path:
    """0.1.0's ``prunebench`` package, unpacked from git into ``into``."""
    archive = subprocess.run(
        ["git", "-C", str(ROOT), "archive", RELEASE, "prunebench"],
        check=True,
        capture_output=True,
    ).stdout
    with tarfile.open(fileobj=BytesIO(archive)) as tar:
        tar.extractall(into, filter="data")
    return into


def _columns(conn: sqlite3.Connection, schema: str, table: str) -> list[str]:
    return [r[1] for r in conn.execute(f"PRAGMA {schema}.table_info({table})")]


def keep_classification(db: Path) -> None:
    """Delete the regression trials and everything stored for them."""
    conn = sqlite3.connect(db)
    with conn:
        conn.execute(
            "CREATE TEMP TABLE gone AS SELECT trial_id, group_id, growth_id FROM trials "
            "JOIN datasets USING (dataset_id) WHERE task = 'regression'"
        )
        conn.execute("DELETE FROM pruned_folds WHERE trial_id IN (SELECT trial_id FROM gone)")
        conn.execute("DELETE FROM curves WHERE group_id IN (SELECT group_id FROM gone)")
        conn.execute("DELETE FROM trials WHERE trial_id IN (SELECT trial_id FROM gone)")
        for table in ("unpruned_folds", "growths"):
            conn.execute(f"DELETE FROM {table} WHERE growth_id IN (SELECT growth_id FROM gone)")
    conn.execute("VACUUM")
    conn.close()


def as_release_schema(new: Path, old: Path) -> None:
    """Write the rows of ``new`` into a database in 0.1.0's schema at ``old``."""
    conn = sqlite3.connect(old)
    schema = [
        r[0]
        for r in sqlite3.connect(f"file:{FIXTURE}?mode=ro", uri=True).execute(
            "SELECT sql FROM sqlite_master WHERE sql IS NOT NULL ORDER BY rowid"
        )
    ]
    conn.executescript(";\n".join(schema) + ";\nPRAGMA user_version = 1;")
    conn.execute("ATTACH DATABASE ? AS new", [f"file:{new}?mode=ro"])
    with conn:
        for table in ("studies", "datasets", "trials", "folds", "curves", "environments"):
            names = ", ".join(f'"{c}"' for c in _columns(conn, "main", table))
            order = ' ORDER BY trial_id, "repeat", fold, arm' if table == "folds" else ""
            conn.execute(f"INSERT INTO main.{table} SELECT {names} FROM new.{table}{order}")
    conn.execute("DETACH DATABASE new")
    conn.close()


def _environment(code: Path | None) -> dict:
    """This version's package (the checkout) or 0.1.0's first on the path."""
    return {**os.environ, "PYTHONPATH": str(ROOT if code is None else code)}


def _python(code: Path | None, *args: str) -> subprocess.CompletedProcess:
    """Run ``python *args`` with one version's package first on the path.

    The process starts in the system's temporary folder, so that neither
    checkout's folder (``python -c`` puts the working folder first) decides.
    """
    return subprocess.run(
        [sys.executable, *args],
        capture_output=True,
        text=True,
        env=_environment(code),
        cwd=tempfile.gettempdir(),
    )


def _version(code: Path | None) -> str:
    """``prunebench.__version__`` and the file it came from, as one version's process sees them."""
    done = _python(code, "-c", "import prunebench as p; print(p.__version__, p.__file__)")
    return done.stdout.strip()


def run_command(args: list[str], code: Path | None) -> tuple[float, int]:
    """(seconds, peak KiB) of one command in a fresh process."""
    t0 = time.perf_counter()
    done = _python(code, "-c", RUNNER, *args)
    seconds = time.perf_counter() - t0
    if done.returncode != 0:
        raise SystemExit(f"{' '.join(args)} failed ({done.returncode}): {done.stderr[-400:]}")
    peak = int(done.stderr.rsplit("peak_kib", 1)[1].split()[0])
    return seconds, peak


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--db", type=Path, required=True, help="A finished results database.")
    parser.add_argument("--runs", type=int, default=3)
    parser.add_argument(
        "--all-families", action="store_true", help="Keep the regression trials too."
    )
    args = parser.parse_args()
    if not args.db.is_file():
        raise SystemExit(f"{args.db}: no such database")
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        new_db, old_db = tmp / "now.sqlite", tmp / "release.sqlite"
        shutil.copy(args.db, new_db)
        if not args.all_families:
            keep_classification(new_db)
        as_release_schema(new_db, old_db)
        code = release_code(tmp / "release")
        versions = [_version(where) for where in (code, None)]
        conn = sqlite3.connect(new_db)
        trials = conn.execute("SELECT COUNT(*) FROM trials WHERE status = 'done'").fetchone()[0]
        conn.close()
        print(
            f"{trials} done trials; database {new_db.stat().st_size / 2**20:.0f} MB now, "
            f"{old_db.stat().st_size / 2**20:.0f} MB in 0.1.0's schema; {args.runs} runs each"
        )
        print(f"versions: {versions[0]} (release) against {versions[1]} (now)")
        commands = {
            "rank": ["rank", "--db", "{db}"],
            "recommend": ["recommend", "--db", "{db}"],
            "report": ["report", "--db", "{db}", "--out", str(tmp / "report.html")],
        }
        print(
            f"{'command':<10} {'0.1.0 s':>8} {'now s':>7} {'time':>6} "
            f"{'0.1.0 MiB':>10} {'now MiB':>8} {'memory':>7}"
        )
        for name, template in commands.items():
            seen: dict[str, list[tuple[float, int]]] = {"old": [], "new": []}
            for _ in range(args.runs):
                for version, db, where in (("old", old_db, code), ("new", new_db, None)):
                    argv = [a.replace("{db}", str(db)) for a in template]
                    seen[version].append(run_command(argv, where))
            s_old = statistics.median(s for s, _ in seen["old"])
            s_new = statistics.median(s for s, _ in seen["new"])
            m_old = max(m for _, m in seen["old"]) / 1024
            m_new = max(m for _, m in seen["new"]) / 1024
            print(
                f"{name:<10} {s_old:>8.1f} {s_new:>7.1f} {s_new / s_old:>5.2f}x "
                f"{m_old:>10.0f} {m_new:>8.0f} {m_new / m_old:>6.2f}x",
                flush=True,
            )
        print("ratios are now / 0.1.0; target: peak memory <= 0.6x")


if __name__ == "__main__":
    main()
