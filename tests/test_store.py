"""Tests of the results database (prunebench.store)."""

from __future__ import annotations

import os
import sqlite3
import subprocess
import sys

import pytest

from prunebench.evaluate import EvaluationSettings, evaluate_group
from prunebench.store import SCHEMA_VERSION, ResultStore, StoreError
from prunebench.study import parse_study

STUDY = """\
name = "store-unit"
seed = 4
datasets = ["iris"]
[outer]
repeats = 1
folds = 3
[factors]
max_depth = ["none", 2]
inner_folds = [3]
rule = ["min", "1se"]
"""


@pytest.fixture
def filled(tmp_path):
    study = parse_study(STUDY)
    path = tmp_path / "r.sqlite"
    with ResultStore(path) as store:
        store.register_study(study)
        for group in study.groups():
            settings = EvaluationSettings(seed=study.seed, repeats=1, folds=3)
            result = evaluate_group(group, study.datasets["iris"], settings)
            store.save_group(result, group.trials, "t0", "t1")
    return study, path


def test_unlimited_depth_is_null_and_rows_are_complete(filled):
    study, path = filled
    conn = sqlite3.connect(path)
    depths = {r[0] for r in conn.execute("SELECT DISTINCT max_depth FROM trials")}
    assert depths == {None, 2}
    assert conn.execute("SELECT COUNT(*) FROM trials WHERE status = 'done'").fetchone()[0] == 4
    # 4 trials x 3 outer folds x 2 arms
    assert conn.execute("SELECT COUNT(*) FROM folds").fetchone()[0] == 24


def test_registering_again_adds_nothing_and_changed_seed_is_refused(filled):
    study, path = filled
    with ResultStore(path) as store:
        store.register_study(study)
        assert len(store.statuses(study.study_id)) == 4
        changed = parse_study(STUDY.replace("seed = 4", "seed = 5"))
        with pytest.raises(StoreError, match="seed 4 -> 5"):
            store.register_study(changed)
        changed = parse_study(STUDY.replace("folds = 3", "folds = 4"))
        with pytest.raises(StoreError, match="outer 1x3 -> 1x4"):
            store.register_study(changed)


def test_newer_schema_and_foreign_files_are_refused(tmp_path):
    newer = tmp_path / "newer.sqlite"
    conn = sqlite3.connect(newer)
    conn.execute(f"PRAGMA user_version = {SCHEMA_VERSION + 1}")
    conn.close()
    with pytest.raises(StoreError, match="newer prunebench"):
        ResultStore(newer)
    foreign = tmp_path / "foreign.sqlite"
    conn = sqlite3.connect(foreign)
    conn.execute("CREATE TABLE recipes (x)")
    conn.close()
    with pytest.raises(StoreError, match="not a prunebench results database"):
        ResultStore(foreign)
    # a file that is not SQLite at all (a study file given as --db, say) is refused
    # before its lock file is made: nothing is written beside it
    study_file = tmp_path / "typo.toml"
    study_file.write_text('name = "typo"\n')
    with pytest.raises(StoreError, match=r"typo.toml is not a results database \(not an SQLite"):
        ResultStore(study_file, lock=True)
    assert study_file.read_text() == 'name = "typo"\n'
    # an SQLite file whose pages are garbage is damaged
    garbage = tmp_path / "garbage.sqlite"
    garbage.write_bytes(b"SQLite format 3\x00" + b"this is not a database" * 100)
    with pytest.raises(StoreError, match="is damaged"):
        ResultStore(garbage, lock=True)
    assert garbage.read_bytes() == b"SQLite format 3\x00" + b"this is not a database" * 100
    assert sorted(p.name for p in tmp_path.iterdir()) == [
        "foreign.sqlite",
        "garbage.sqlite",
        "newer.sqlite",
        "typo.toml",
    ]


def test_second_writer_is_refused(tmp_path):
    path = tmp_path / "r.sqlite"
    with ResultStore(path, lock=True):
        with pytest.raises(StoreError, match="being written by another 'prunebench conduct'"):
            ResultStore(path, lock=True)
    with ResultStore(path, lock=True):  # released on close
        assert path.with_name("r.sqlite.lock").exists()
    # and removed: a finished database has nothing beside it
    assert sorted(p.name for p in tmp_path.iterdir()) == ["r.sqlite"]


def test_readonly_store_refuses_writes(filled):
    _, path = filled
    with ResultStore(path, readonly=True) as store:
        assert store.integrity() == "ok"
        with pytest.raises(sqlite3.OperationalError):
            store.db.conn.execute("DELETE FROM pruned_folds")


def test_a_writer_uses_wal_and_leaves_one_self_contained_file(tmp_path):
    path = tmp_path / "j.sqlite"
    with ResultStore(path) as store:
        store.register_study(parse_study(STUDY))
        assert store.db.conn.execute("PRAGMA journal_mode").fetchone()[0] == "wal"
        assert path.with_name("j.sqlite-wal").exists()
    # closed: back in rollback-journal mode, no -wal or -shm beside it
    assert sorted(p.name for p in tmp_path.iterdir()) == ["j.sqlite"]
    conn = sqlite3.connect(f"file:{path}?mode=ro", uri=True)
    assert conn.execute("PRAGMA journal_mode").fetchone()[0] == "delete"
    conn.close()
    # reading creates nothing either
    with ResultStore(path, readonly=True) as store:
        assert len(store.statuses(parse_study(STUDY).study_id)) == 4
    assert sorted(p.name for p in tmp_path.iterdir()) == ["j.sqlite"]


def test_write_hook_runs_inside_the_open_transaction(tmp_path):
    study = parse_study(STUDY)
    path = tmp_path / "h.sqlite"
    seen = []

    def look_from_outside():
        # another connection does not see the group yet: the transaction is still open
        other = sqlite3.connect(f"file:{path}?mode=ro", uri=True)
        seen.append(other.execute("SELECT COUNT(*) FROM folds").fetchone()[0])
        other.close()

    with ResultStore(path, write_hook=look_from_outside) as store:
        store.register_study(study)
        group = study.groups()[0]
        settings = EvaluationSettings(seed=study.seed, repeats=1, folds=3)
        store.save_group(
            evaluate_group(group, study.datasets["iris"], settings), group.trials, "t0", "t1"
        )
        assert store.db.conn.execute("SELECT COUNT(*) FROM folds").fetchone()[0] == 12
    assert seen == [0]
    with ResultStore(path) as store:  # no hook unless one is given
        assert store.write_hook is None


def test_a_study_is_registered_in_one_transaction(tmp_path, monkeypatch):
    # Found by a progress read that saw the study with none of its trials: sqlite-utils'
    # inserts commit on their own unless a transaction is already open.  While the last
    # step of registering runs, another connection must see nothing of the study yet.
    study = parse_study(STUDY)
    path = tmp_path / "t.sqlite"
    seen = []
    record = ResultStore._record_environment

    def look_then_record(self, study_id, now):
        other = sqlite3.connect(f"file:{path}?mode=ro", uri=True)
        counts = [other.execute(f"SELECT COUNT(*) FROM {t}") for t in ("studies", "trials")]
        seen.append([c.fetchone()[0] for c in counts])
        other.close()
        record(self, study_id, now)

    monkeypatch.setattr(ResultStore, "_record_environment", look_then_record)
    with ResultStore(path) as store:
        store.register_study(study)
        assert store.db.conn.execute("SELECT COUNT(*) FROM trials").fetchone()[0] == 4
    assert seen == [[0, 0]]


def test_a_lock_whose_holder_died_is_taken_over(tmp_path):
    # the holder forks a child that keeps the lock file open (as an orphaned worker did),
    # then dies: the lock names a dead process and is stale
    path = tmp_path / "stale.sqlite"
    child_pid = tmp_path / "child.pid"
    code = (
        "import os, sys, time\n"
        "from prunebench.store import ResultStore\n"
        f"store = ResultStore({str(path)!r}, lock=True)\n"
        "pid = os.fork()\n"
        "if pid == 0:\n"
        "    time.sleep(120); os._exit(0)\n"
        f"open({str(child_pid)!r}, 'w').write(str(pid))\n"
        "os._exit(0)\n"
    )
    subprocess.run([sys.executable, "-c", code], check=True, timeout=120)
    orphan = int(child_pid.read_text())
    try:
        assert "pid" in path.with_name("stale.sqlite.lock").read_text()
        os.kill(orphan, 0)  # the orphan is alive and still holds the old lock file
        with ResultStore(path, lock=True):
            assert f"pid {os.getpid()}" in path.with_name("stale.sqlite.lock").read_text()
            # a living holder is still respected
            with pytest.raises(StoreError, match="being written by another"):
                ResultStore(path, lock=True)
    finally:
        os.kill(orphan, 9)
    # nothing of the takeover is left behind but its guard: the lock file goes on close
    assert sorted(p.name for p in tmp_path.iterdir()) == [
        "child.pid",
        "stale.sqlite",
        "stale.sqlite.lock.takeover",
    ]


def test_a_lock_named_by_a_living_process_is_not_taken(tmp_path):
    path = tmp_path / "alive.sqlite"
    holder = subprocess.Popen(
        [
            sys.executable,
            "-c",
            f"from prunebench.store import ResultStore\nimport sys\n"
            f"s = ResultStore({str(path)!r}, lock=True)\nprint('held', flush=True)\n"
            "sys.stdin.read()\n",
        ],
        stdin=subprocess.PIPE,
        stdout=subprocess.PIPE,
        text=True,
    )
    try:
        assert holder.stdout.readline().strip() == "held"
        with pytest.raises(StoreError, match=f"pid {holder.pid}"):
            ResultStore(path, lock=True)
    finally:
        holder.stdin.close()
        holder.wait(timeout=60)
    with ResultStore(path, lock=True):  # its holder ended normally: free
        pass


def test_an_old_database_is_read_without_the_shape_columns(tmp_path):
    import shutil
    from pathlib import Path

    from prunebench.results import load_folds

    old = Path(__file__).with_name("fixtures") / "previous_release.sqlite"
    copy = tmp_path / "old.sqlite"
    shutil.copy(old, copy)
    with ResultStore(copy, readonly=True) as store:
        folds = load_folds(store)
    assert "root_feature" not in folds and len(folds) > 0


def test_remove_pending_keeps_finished_trials_and_the_growths_they_use(tmp_path):
    study = parse_study(STUDY)
    path = tmp_path / "r.sqlite"
    with ResultStore(path) as store:
        store.register_study(study)
        done = study.groups()[0]
        settings = EvaluationSettings(seed=study.seed, repeats=1, folds=3)
        store.save_group(
            evaluate_group(done, study.datasets["iris"], settings), done.trials, "t0", "t1"
        )
        assert store.remove_pending(study.study_id) == 4 - len(done.trials)
        assert set(store.statuses(study.study_id).values()) == {"done"}
    conn = sqlite3.connect(path)
    used = {r[0] for r in conn.execute("SELECT growth_id FROM trials")}
    assert {r[0] for r in conn.execute("SELECT growth_id FROM growths")} == used
    assert conn.execute("PRAGMA foreign_key_check").fetchall() == []
    conn.close()
