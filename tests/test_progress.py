"""Tests of a study's progress read while conduct writes (prunebench.progress)."""

from __future__ import annotations

import shutil
import subprocess
import sys
import time

from click.testing import CliRunner

from prunebench import lockfile
from prunebench.cli import main
from prunebench.progress import progress_report

STUDY = """\
name = "watched"
seed = 2
datasets = ["digits"]
[outer]
repeats = 2
folds = 3
[factors]
criterion = ["gini", "entropy"]
max_depth = ["none", 3, 5, 7, 9, 11]
inner_folds = [3]
rule = ["min", "1se"]
"""


def test_progress_reads_while_conduct_writes(tmp_path):
    study = tmp_path / "watched.toml"
    study.write_text(STUDY)
    db = tmp_path / "watched.sqlite"
    proc = subprocess.Popen(
        [sys.executable, "-m", "prunebench.cli", "conduct", str(study)],
        stdout=subprocess.DEVNULL,
        stderr=subprocess.DEVNULL,
    )
    seen = []
    try:
        deadline = time.monotonic() + 120
        while time.monotonic() < deadline and proc.poll() is None:
            time.sleep(0.3)
            if not db.exists():
                continue
            result = CliRunner().invoke(main, ["progress", "--db", str(db)])
            if result.exit_code == 0:
                seen.append(progress_report(db))
    finally:
        proc.wait(timeout=300)
    assert proc.returncode == 0
    during = [r for r in seen if r["pending"] > 0]
    assert during, "progress never saw the sweep running"
    assert all(r["total"] == 24 for r in seen)
    final = progress_report(db)
    assert (final["done"], final["pending"]) == (24, 0) and final["rate_per_minute"] > 0
    text = CliRunner().invoke(main, ["progress", "--db", str(db)]).output
    assert "24 done, 0 failed, 0 pending of 24 trials" in text and "trials/min" in text


def test_watch_goes_on_while_a_conduct_holds_the_database(search_db, tmp_path, monkeypatch):
    # a search records its trials as it reaches them, so between two batches none is
    # pending: --watch ends only when no conduct writes to the database any more
    db = tmp_path / "search.sqlite"
    shutil.copy(search_db, db)
    handle, _ = lockfile.acquire(lockfile.lock_path(db))
    during = progress_report(db)
    assert during["pending"] == 0 and during["writing"] and during["search"]
    assert during["eta"] == "-"  # how many trials remain is the search's to decide
    ticks = []

    def sleep(seconds):
        ticks.append(seconds)
        if len(ticks) == 2:
            lockfile.release(handle, lockfile.lock_path(db))  # the conduct ends

    monkeypatch.setattr(time, "sleep", sleep)
    result = CliRunner().invoke(main, ["progress", str(db), "--watch", "2"])
    assert result.exit_code == 0, result.output
    assert ticks == [2, 2] and result.output.count("study 'search-fixture'") == 3
    assert result.output.count("a search: trials are recorded as") == 2
    after = progress_report(db)
    assert not after["writing"] and after["eta"] == "0m00s"


def test_pending_trials_with_no_conduct_running_have_no_eta(tmp_path):
    # as a killed conduct leaves them: registered, pending, and nobody holding the lock
    from prunebench.store import ResultStore
    from prunebench.study import parse_study

    db = tmp_path / "stopped.sqlite"
    with ResultStore(db) as store:
        store.register_study(parse_study(STUDY))
    stopped = progress_report(db)
    assert stopped["pending"] == 24 and not stopped["writing"] and stopped["eta"] == "-"
    text = CliRunner().invoke(main, ["progress", str(db)]).output
    assert "no conduct is running: run the same 'prunebench conduct' again" in text
    handle, _ = lockfile.acquire(lockfile.lock_path(db))  # a conduct holds it again
    try:
        assert progress_report(db)["writing"]
        text = CliRunner().invoke(main, ["progress", str(db)]).output
        assert "no conduct is running" not in text
    finally:
        lockfile.release(handle, lockfile.lock_path(db))
