"""Tests of conducting a study: resume after kill -9, workers, failures, progress."""

from __future__ import annotations

import io
import signal
import sqlite3
import subprocess
import sys

import pytest
from click.testing import CliRunner
from helpers import start_and_wait, stored_rows

import prunebench.runners as runners
from prunebench.cli import main
from prunebench.execute import Progress, conduct
from prunebench.store import ResultStore, StoreError
from prunebench.study import load_study

SWEEP = """\
name = "resume-unit"
seed = 8
datasets = ["digits", "wine"]
[outer]
repeats = 2
folds = 3
[factors]
criterion = ["gini", "entropy"]
max_depth = ["none", 3, 6, 10]
min_samples_leaf = [1, 3]
inner_folds = [3]
rule = ["min", "1se"]
"""


@pytest.fixture(scope="module")
def sweep_file(tmp_path_factory):
    path = tmp_path_factory.mktemp("sweep") / "sweep.toml"
    path.write_text(SWEEP)
    return path


@pytest.fixture(scope="module")
def reference(sweep_file, tmp_path_factory):
    db = tmp_path_factory.mktemp("ref") / "ref.sqlite"
    summary = conduct(load_study(sweep_file), db, progress=Progress(0, io.StringIO()))
    assert summary.failed == 0 and summary.done == 64
    return stored_rows(db)


def test_resume_after_kill_9_gives_the_uninterrupted_rows(sweep_file, reference, tmp_path):
    db = tmp_path / "killed.sqlite"
    cmd = [sys.executable, "-m", "prunebench.cli", "conduct", str(sweep_file), "--db", str(db)]
    proc = start_and_wait(cmd, db, at_least=6)
    proc.send_signal(signal.SIGKILL)
    proc.wait()
    partial = stored_rows(db)
    assert 0 < len({r[0] for r in partial["folds"]}) < 64
    # only whole groups: every trial with rows is done, and has all its rows
    done_ids = {r[0] for r in partial["trials"] if r[-1] == "done"}
    assert {r[0] for r in partial["folds"]} == done_ids
    assert len(partial["folds"]) == len(done_ids) * 2 * 3 * 2

    result = subprocess.run(cmd, capture_output=True, text=True, timeout=300)
    assert result.returncode == 0, result.stderr
    assert "already finished" in result.stdout
    assert stored_rows(db) == reference
    conn = sqlite3.connect(db)
    assert conn.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
    assert (
        conn.execute(
            'SELECT COUNT(*) FROM (SELECT trial_id, "repeat", fold, arm, COUNT(*) c FROM folds '
            "GROUP BY 1, 2, 3, 4 HAVING c > 1)"
        ).fetchone()[0]
        == 0
    )


def test_two_workers_give_identical_rows(sweep_file, reference, tmp_path):
    db = tmp_path / "two.sqlite"
    summary = conduct(load_study(sweep_file), db, workers=2, progress=Progress(0, io.StringIO()))
    assert summary.done == 64
    assert stored_rows(db) == reference


def test_a_failing_trial_is_stored_and_the_rest_complete(sweep_file, tmp_path, monkeypatch):
    study = load_study(sweep_file)
    real = runners.evaluate_group

    def sometimes_broken(group, *args, **kwargs):
        if group.max_depth == 3 and group.dataset == "wine":
            raise FloatingPointError("injected failure for depth 3")
        return real(group, *args, **kwargs)

    monkeypatch.setattr(runners, "evaluate_group", sometimes_broken)
    db = tmp_path / "fail.sqlite"
    summary = conduct(study, db, progress=Progress(0, io.StringIO()))
    assert summary.failed == 8 and summary.done == 56
    conn = sqlite3.connect(db)
    failed = conn.execute("SELECT max_depth, error FROM trials WHERE status='failed'").fetchall()
    assert len(failed) == 8 and {d for d, _ in failed} == {3}
    assert all("Traceback" in e and "injected failure for depth 3" in e for _, e in failed)
    assert (
        conn.execute(
            "SELECT COUNT(*) FROM folds JOIN trials USING (trial_id) WHERE status='failed'"
        ).fetchone()[0]
        == 0
    )
    conn.close()

    # a plain rerun leaves failures alone; --retry-failed runs them again
    monkeypatch.setattr(runners, "evaluate_group", real)
    again = conduct(study, db, progress=Progress(0, io.StringIO()))
    assert again.done == 0 and again.skipped == 56 and again.failed_before == 8
    retried = conduct(study, db, retry_failed=True, progress=Progress(0, io.StringIO()))
    assert retried.done == 8
    conn = sqlite3.connect(db)
    assert conn.execute("SELECT COUNT(*) FROM trials WHERE status='done'").fetchone()[0] == 64


def test_adding_levels_adds_trials_and_changing_the_seed_is_refused(tmp_path):
    small = SWEEP.replace('["digits", "wine"]', '["wine"]').replace("[1, 3]", "[1]")
    study_file = tmp_path / "s.toml"
    study_file.write_text(small)
    db = tmp_path / "s.sqlite"
    first = conduct(load_study(study_file), db, progress=Progress(0, io.StringIO()))
    assert first.done == 16
    study_file.write_text(small.replace("[1]", "[1, 7]"))
    second = conduct(load_study(study_file), db, progress=Progress(0, io.StringIO()))
    assert (second.done, second.skipped, second.total) == (16, 16, 32)
    before = db.read_bytes()
    study_file.write_text(small.replace("seed = 8", "seed = 9"))
    result = CliRunner().invoke(main, ["conduct", str(study_file), "--db", str(db)])
    assert result.exit_code != 0
    assert "seed 8 -> 9" in result.output and result.output.count("\n") == 1
    assert db.read_bytes() == before


def test_a_second_conduct_is_refused_while_one_runs(tmp_path):
    study_file = tmp_path / "s.toml"
    study_file.write_text(SWEEP.replace('["digits", "wine"]', '["wine"]'))
    db = tmp_path / "held.sqlite"
    with ResultStore(db, lock=True):
        result = CliRunner().invoke(main, ["conduct", str(study_file), "--db", str(db)])
        assert result.exit_code == 1
        assert "being written by another 'prunebench conduct'" in result.output
        with pytest.raises(StoreError):
            conduct(load_study(study_file), db)


def test_progress_shows_counts_rate_and_eta():
    stream = io.StringIO()
    progress = Progress(10, stream, every=0)
    progress.update(done=4)
    progress.update(failed=1)
    text = stream.getvalue()
    assert "trials 4/10" in text and "trials 5/10, 1 failed" in text
    assert "trials/min" in text and "ETA" in text


def test_conduct_cli_prints_a_result_table(tmp_path):
    study_file = tmp_path / "s.toml"
    study_file.write_text(
        SWEEP.replace('["digits", "wine"]', '["iris"]').replace('["none", 3, 6, 10]', '["none"]')
    )
    result = CliRunner().invoke(main, ["conduct", str(study_file)])
    assert result.exit_code == 0, result.output
    assert (tmp_path / "s.sqlite").exists()  # the default database sits beside the study
    assert "8 trials done, 0 failed" in result.output
    table = [line for line in result.output.splitlines() if line.startswith("iris")]
    assert len(table) == 2 and {line.split()[1] for line in table} == {"min", "1se"}


def test_plan_counts_the_fits_a_conduct_makes(tmp_path):
    from prunebench.execute import plan

    study_file = tmp_path / "s.toml"
    study_file.write_text(SWEEP.replace('["digits", "wine"]', '["wine"]').replace("[1, 3]", "[1]"))
    study = load_study(study_file)
    rows = plan(study)
    assert [r["dataset"] for r in rows] == ["wine"] and rows[0]["trials"] == 16
    summary = conduct(study, tmp_path / "s.sqlite", progress=Progress(0, io.StringIO()))
    assert rows[0]["fits"] == summary.n_fits == 8 * 2 * 3 * (1 + 3)
    assert rows[0]["seconds"] > 0


def test_rows_equal_those_written_by_the_previous_release(tmp_path):
    # tests/fixtures/previous_release.sqlite was conducted by prunebench 0.1.0 from the study
    # file beside it; every later version must store the same numbers for the same study
    import shutil
    from pathlib import Path

    fixtures = Path(__file__).with_name("fixtures")
    shutil.copy(fixtures / "previous_release.toml", tmp_path / "study.toml")
    db = tmp_path / "now.sqlite"
    summary = conduct(load_study(tmp_path / "study.toml"), db, progress=Progress(0, io.StringIO()))
    assert summary.done == 80 and summary.failed == 0
    old = shutil.copy(fixtures / "previous_release.sqlite", tmp_path / "old.sqlite")
    assert stored_rows(db) == stored_rows(old)


def test_check_json_prints_the_plan_and_one_estimate_per_worker_count(tmp_path):
    import json

    study_file = tmp_path / "s.toml"
    study_file.write_text(SWEEP.replace('["digits", "wine"]', '["wine"]').replace("[1, 3]", "[1]"))
    result = CliRunner().invoke(main, ["check", str(study_file), "--json", "--workers", "2"])
    assert result.exit_code == 0, result.output
    plan = json.loads(result.output)
    # 2 criteria x 4 depths grow distinct trees; inner folds and rules share them
    assert (plan["trials"], plan["groups"]) == (16, 8)
    assert plan["n_fits"] == 8 * 2 * 3 * (1 + 3) == plan["datasets"][0]["fits"]
    assert set(plan["seconds"]) == {"2"} and plan["seconds"]["2"] > 0
    text = CliRunner().invoke(main, ["check", str(study_file), "--workers", "1"]).output
    last = text.splitlines()[-1]
    assert last.startswith("rough time: ") and last.count("with 1 worker") == 1, last
    assert "8 groups" in text


def test_the_estimate_hands_groups_to_the_worker_that_frees_up_first():
    from prunebench.execute import estimated_seconds

    rows = [{"group_seconds": [4.0, 3.0, 3.0, 2.0]}]
    # longest first: worker A 4 + 2, worker B 3 + 3 (hand calculation)
    assert estimated_seconds(rows, 1) == 12.0 and estimated_seconds(rows, 2) == 6.0
    assert estimated_seconds(rows, 8) == 4.0  # no faster than the longest group
