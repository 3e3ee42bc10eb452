"""Reliability suite: real faults — kills, lost workers, full, read-only, locked, damaged
databases, degenerate data, time limits — with nothing lost or half-written."""

from __future__ import annotations

import io
import os
import shutil
import signal
import sqlite3
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner
from helpers import descendants, done_trials, start_and_wait, still_running, stored_rows

from prunebench.cli import main
from prunebench.execute import Progress, conduct
from prunebench.store import SCHEMA_VERSION, ResultStore, StoreError
from prunebench.study import load_study, parse_study

SWEEP = """\
name = "reliability"
seed = 12
datasets = ["wine", "breast_cancer"]
[outer]
repeats = 2
folds = 3
[factors]
criterion = ["gini", "entropy"]
max_depth = ["none", 2, 4, 6]
inner_folds = [3]
rule = ["min", "1se"]
"""
N_TRIALS = 2 * 2 * 4 * 2
FAULT_ENTRY = Path(__file__).with_name("fault_entry.py")


def quiet():
    return Progress(0, io.StringIO())


@pytest.fixture(scope="module")
def sweep(tmp_path_factory):
    folder = tmp_path_factory.mktemp("reliability")
    path = folder / "sweep.toml"
    path.write_text(SWEEP)
    reference = folder / "reference.sqlite"
    assert conduct(load_study(path), reference, progress=quiet()).done == N_TRIALS
    return path, stored_rows(reference)


def _conduct_cmd(study, db, *extra):
    return [sys.executable, "-m", "prunebench.cli", "conduct", str(study), "--db", str(db), *extra]


needs_two_cpus = pytest.mark.skipif(
    len(os.sched_getaffinity(0)) < 2, reason="a pool of two workers needs two CPUs here"
)


@needs_two_cpus
def test_kill_9_of_a_two_worker_conduct_leaves_no_process_and_resumes(sweep, tmp_path):
    # issue 12, case 1: the workers outlived their parent and held the lock
    study, reference = sweep
    db = tmp_path / "orphans.sqlite"
    cmd = _conduct_cmd(study, db, "--workers", "2")
    proc = start_and_wait(cmd, db, at_least=4)
    workers = descendants(proc.pid)
    assert len(workers) >= 2
    proc.send_signal(signal.SIGKILL)
    proc.wait()
    assert still_running(workers, within=10) == set()
    result = subprocess.run(cmd, capture_output=True, text=True, timeout=300)
    assert result.returncode == 0, result.stderr
    assert "already finished" in result.stdout
    assert stored_rows(db) == reference


@needs_two_cpus
@pytest.mark.parametrize(("signum", "code"), [(signal.SIGINT, 130), (signal.SIGTERM, 143)])
def test_sigint_and_sigterm_stop_the_workers_keep_the_groups_and_say_so(
    sweep, tmp_path, signum, code
):
    # issue 12, case 2: Ctrl-C said only "Aborted!" (exit 1); SIGTERM was silent and
    # left the workers running
    study, reference = sweep
    db = tmp_path / "interrupted.sqlite"
    cmd = _conduct_cmd(study, db, "--workers", "2")
    log = tmp_path / "stderr.txt"
    with open(log, "w") as stderr:
        proc = start_and_wait(cmd, db, at_least=4, stderr=stderr)
        workers = descendants(proc.pid)
        proc.send_signal(signum)
        assert proc.wait(timeout=60) == code
    assert still_running(workers, within=10) == set()
    lines = log.read_text().strip().splitlines()
    stored = done_trials(db)
    assert lines[-1] == (
        f"error: {'interrupted (SIGINT)' if code == 130 else 'stopped by SIGTERM'}; {stored} "
        f"of {N_TRIALS} trials are stored in {db}; running the same command again resumes"
    )
    assert "Traceback" not in log.read_text() and "Aborted" not in log.read_text()
    assert 0 < stored < N_TRIALS
    partial = stored_rows(db)
    assert {r[0] for r in partial["folds"]} == {t[0] for t in partial["trials"] if t[-1] == "done"}
    result = subprocess.run(cmd, capture_output=True, text=True, timeout=300)
    assert result.returncode == 0, result.stderr
    assert stored_rows(db) == reference


@needs_two_cpus
def test_a_worker_killed_mid_run_gives_one_line_and_the_resume_completes(
    sweep, tmp_path, monkeypatch
):
    # issue 12, case 4: a BrokenProcessPool traceback
    import prunebench.execute as execute

    study, reference = sweep
    db = tmp_path / "worker-died.sqlite"
    real = execute.conduct
    killed = []

    def kill_its_worker(outcome):
        if not killed:
            os.kill(outcome.pid, signal.SIGKILL)
            killed.append(outcome.pid)

    def conduct_killing_a_worker(*args, **kwargs):
        return real(*args, on_group=kill_its_worker, **kwargs)

    monkeypatch.setattr(execute, "conduct", conduct_killing_a_worker)
    result = CliRunner().invoke(main, ["conduct", str(study), "--db", str(db), "--workers", "2"])
    assert killed and killed[0] != os.getpid()
    assert result.exit_code == 1
    assert "Traceback" not in result.output and "BrokenProcessPool" not in result.output
    last = result.output.strip().splitlines()[-1]
    stored = done_trials(db)
    assert last == (
        f"error: a worker process died while it ran a trial group; {stored} of {N_TRIALS} "
        f"trials are stored in {db}; running the same command again resumes"
    )
    assert 0 < stored < N_TRIALS
    monkeypatch.setattr(execute, "conduct", real)
    assert conduct(load_study(study), db, workers=2, progress=quiet()).failed == 0
    assert stored_rows(db) == reference


def test_too_many_workers_are_clamped_to_the_cpus_with_a_note(sweep, tmp_path):
    # issue 12: "check --workers 100000" passed silently; conduct would start 100,000 workers
    from prunebench.execute import usable_workers

    cpus = len(os.sched_getaffinity(0))
    assert usable_workers(cpus) == (cpus, None)
    used, note = usable_workers(100000)
    assert used == cpus and f"using {cpus}" in note and "100000" in note
    study, _ = sweep
    result = CliRunner().invoke(main, ["check", str(study), "--workers", "100000"])
    assert result.exit_code == 0, result.output
    assert result.output.splitlines()[0] == f"note: {note}"
    assert f"with {cpus}" in result.output.splitlines()[-1]
    small = tmp_path / "small.toml"
    small.write_text(
        SWEEP.replace('["wine", "breast_cancer"]', '["wine"]').replace(
            '["none", 2, 4, 6]', '["none"]'
        )
    )
    stream = io.StringIO()
    summary = conduct(
        load_study(small), tmp_path / "s.sqlite", workers=100000, progress=Progress(0, stream)
    )
    assert summary.done == 4
    assert f"note: {note}" in stream.getvalue().splitlines()
    result = CliRunner().invoke(main, ["conduct", str(small), "--workers", "0"])
    assert result.exit_code == 2 and "workers must be at least 1; got 0" in result.output


def test_kill_9_at_many_moments_then_resume(sweep, tmp_path):
    study, reference = sweep
    db = tmp_path / "killed.sqlite"
    cmd = [sys.executable, "-m", "prunebench.cli", "conduct", str(study), "--db", str(db)]
    marker = tmp_path / "in-write"
    # the same command through an entry script that pauses inside each group's transaction
    paused = [sys.executable, str(FAULT_ENTRY), "5", str(marker), *cmd[3:]]
    kills = 0
    # alternate: kill after a delay, or in the middle of a group's transaction
    for moment in range(12):
        during_write = moment % 2 == 1
        if during_write:
            marker.unlink(missing_ok=True)
        proc = subprocess.Popen(
            paused if during_write else cmd, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL
        )
        deadline = time.monotonic() + 60
        if during_write:
            while not marker.exists() and proc.poll() is None and time.monotonic() < deadline:
                time.sleep(0.02)
        else:
            # once the sweep is under way, wait a different while each time
            while done_trials(db) < 0 and proc.poll() is None and time.monotonic() < deadline:
                time.sleep(0.02)
            time.sleep(0.05 * moment)
        if proc.poll() is None:
            before = done_trials(db)
            proc.send_signal(signal.SIGKILL)
            proc.wait()
            kills += 1
            if during_write:
                # the group being written when the kill came is not there at all
                assert done_trials(db) == before
        if done_trials(db) < 0:
            continue  # killed before the schema was written: nothing to check yet
        conn = sqlite3.connect(db)
        assert conn.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
        partial = stored_rows(db)
        done = {t[0] for t in partial["trials"] if t[-1] == "done"}
        assert {r[0] for r in partial["folds"]} == done  # only whole groups
        conn.close()
    assert kills >= 10
    result = subprocess.run(cmd, capture_output=True, text=True, timeout=300)
    assert result.returncode == 0, result.stderr
    assert stored_rows(db) == reference


@pytest.fixture(scope="module")
def local_cluster():
    distributed = pytest.importorskip("distributed")
    cluster = distributed.LocalCluster(
        n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None
    )
    client = distributed.Client(cluster)
    yield client
    client.close()
    cluster.close()


def test_dask_local_cluster_gives_the_local_rows(sweep, tmp_path, local_cluster):
    study, reference = sweep
    db = tmp_path / "dask.sqlite"
    summary = conduct(load_study(study), db, cluster=local_cluster, progress=quiet())
    assert summary.done == N_TRIALS
    assert stored_rows(db) == reference


def test_a_dask_worker_killed_mid_task_changes_nothing(sweep, tmp_path, local_cluster):
    study, reference = sweep
    db = tmp_path / "lost-worker.sqlite"
    pids = list(local_cluster.run(os.getpid).values())
    killed = []

    def kill_once(outcome):
        if not killed:
            os.kill(pids[0], signal.SIGKILL)  # a worker dies while others run
            killed.append(pids[0])

    summary = conduct(
        load_study(study), db, cluster=local_cluster, progress=quiet(), on_group=kill_once
    )
    assert killed and summary.done == N_TRIALS and summary.failed == 0
    assert stored_rows(db) == reference


def test_cluster_address_that_does_not_answer(sweep, tmp_path):
    pytest.importorskip("distributed")
    study, _ = sweep
    result = CliRunner().invoke(
        main,
        [
            "conduct",
            str(study),
            "--db",
            str(tmp_path / "x.sqlite"),
            "--cluster",
            "tcp://127.0.0.1:9",
        ],
    )
    assert result.exit_code == 2 and "cannot reach the Dask scheduler" in result.output


def _half_done(study, db):
    """Run the sweep, stopping after a few groups; return what was stored."""

    class Stop(Exception):
        pass

    def stop_after(outcome, seen=[]):  # noqa: B006 - a counter across calls
        seen.append(outcome)
        if len(seen) == 3:
            raise Stop

    with pytest.raises(Stop):
        conduct(load_study(study), db, progress=quiet(), on_group=stop_after)
    return stored_rows(db)


def test_full_database_gives_a_clear_message_and_loses_nothing(sweep, tmp_path, monkeypatch):
    study, reference = sweep
    db = tmp_path / "full.sqlite"
    before = _half_done(study, db)
    original = ResultStore._prepare

    def capped(self):
        original(self)
        pages = self.db.conn.execute("PRAGMA page_count").fetchone()[0]
        self.db.conn.execute(f"PRAGMA max_page_count = {pages + 1}")

    monkeypatch.setattr(ResultStore, "_prepare", capped)
    with pytest.raises(StoreError, match="full.*intact"):
        conduct(load_study(study), db, progress=quiet())
    after = stored_rows(db)
    assert set(before["folds"]) <= set(after["folds"])
    assert sqlite3.connect(db).execute("PRAGMA integrity_check").fetchone()[0] == "ok"
    monkeypatch.setattr(ResultStore, "_prepare", original)
    conduct(load_study(study), db, progress=quiet())
    assert stored_rows(db) == reference


def test_database_locked_by_another_writer(sweep, tmp_path, monkeypatch):
    study, reference = sweep
    db = tmp_path / "locked.sqlite"
    before = _half_done(study, db)
    monkeypatch.setattr(ResultStore, "busy_timeout", 0.3)
    other = sqlite3.connect(db, isolation_level=None)
    other.execute("BEGIN EXCLUSIVE")
    try:
        with pytest.raises(StoreError, match="locked by another program"):
            conduct(load_study(study), db, progress=quiet())
    finally:
        other.execute("ROLLBACK")
        other.close()
    assert stored_rows(db)["folds"] == before["folds"]
    conduct(load_study(study), db, progress=quiet())
    assert stored_rows(db) == reference


def _make_read_only(paths):
    """Really read-only, even for root: the immutable attribute (chattr +i), else modes."""
    if os.geteuid() == 0:
        if shutil.which("chattr") is None:
            pytest.skip("chattr is needed to make a file read-only for root")
        for p in paths:
            if subprocess.run(["chattr", "+i", str(p)], capture_output=True).returncode:
                pytest.skip("this file system does not support the immutable attribute")
        return lambda: [subprocess.run(["chattr", "-i", str(p)]) for p in paths]
    for p in paths:
        os.chmod(p, 0o555 if p.is_dir() else 0o444)
    return lambda: [os.chmod(p, 0o755 if p.is_dir() else 0o644) for p in paths]


def test_read_only_database(sweep, tmp_path):
    study, _ = sweep
    folder = tmp_path / "ro"
    folder.mkdir()
    db = folder / "ro.sqlite"
    before = _half_done(study, db)
    # fold the WAL into the file, then neither the file nor its folder can be written
    sqlite3.connect(db).execute("PRAGMA wal_checkpoint(TRUNCATE)").close()
    for extra in ("-wal", "-shm"):
        (folder / f"ro.sqlite{extra}").unlink(missing_ok=True)
    digest = db.read_bytes()
    undo = _make_read_only([db, folder])
    try:
        result = CliRunner().invoke(main, ["conduct", str(study), "--db", str(db)])
    finally:
        undo()
    assert result.exit_code != 0
    assert result.output.startswith("error: ") and result.output.count("\n") == 1, result.output
    assert "cannot be written" in result.output or "read-only" in result.output
    assert db.read_bytes() == digest
    assert stored_rows(db)["folds"] == before["folds"]


def _read_everything(db, study_name):
    """Every read path: the store, the pandas API, SQL, and the compare and sql commands."""
    from prunebench.tables import open_results, run_query

    with ResultStore(db, readonly=True) as store:
        assert store.integrity() == "ok"
        counts = store.query("SELECT status, COUNT(*) AS n FROM trials GROUP BY status")
    assert counts == [{"status": "done", "n": N_TRIALS}]
    results = open_results(db)
    assert len(results.trials()) == N_TRIALS
    assert len(results.comparison()) == N_TRIALS
    assert run_query(db, "SELECT COUNT(*) AS n FROM folds").iloc[0, 0] == N_TRIALS * 6 * 2
    compare = CliRunner().invoke(main, ["compare", "--db", str(db), "--json"])
    assert compare.exit_code == 0, compare.output
    sql = CliRunner().invoke(main, ["sql", "--db", str(db), "SELECT name FROM studies"])
    assert sql.exit_code == 0 and study_name in sql.output, sql.output


@pytest.mark.parametrize("journal", ["as conducted", "left in WAL mode"])
def test_read_commands_read_a_database_on_read_only_media(sweep, tmp_path, journal):
    # issue 12, case 3: compare said the file "cannot be written", sql "unable to open
    # database file"; as root only the immutable attribute makes a folder read-only
    study, _ = sweep
    folder = tmp_path / "archive"
    folder.mkdir()
    db = folder / "study.sqlite"
    shutil.copy(study.with_name("reference.sqlite"), db)
    if journal == "left in WAL mode":  # e.g. copied from a conduct that was killed
        sqlite3.connect(db).execute("PRAGMA journal_mode=WAL").close()
    undo = _make_read_only([db, folder])
    try:
        _read_everything(db, "reliability")
        assert sorted(p.name for p in folder.iterdir()) == ["study.sqlite"]
    finally:
        undo()


def test_reading_leaves_no_file_beside_a_finished_database(sweep, tmp_path):
    # issue 12, case 3: every read command left -wal and -shm files behind
    study, _ = sweep
    db = tmp_path / "finished.sqlite"
    shutil.copy(study.with_name("reference.sqlite"), db)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["finished.sqlite"]
    before = db.read_bytes()
    _read_everything(db, "reliability")
    assert sorted(p.name for p in tmp_path.iterdir()) == ["finished.sqlite"]
    assert db.read_bytes() == before


def test_damaged_and_newer_databases_are_refused_untouched(sweep, tmp_path):
    study, _ = sweep
    db = tmp_path / "damaged.sqlite"
    _half_done(study, db)
    sqlite3.connect(db).execute("PRAGMA wal_checkpoint(TRUNCATE)").close()
    data = bytearray(db.read_bytes())
    page = 4096
    data[2 * page : 6 * page] = os.urandom(4 * page)  # garbage over a few pages
    db.write_bytes(bytes(data))
    for extra in ("-wal", "-shm"):
        db.with_name(db.name + extra).unlink(missing_ok=True)
    result = CliRunner().invoke(main, ["conduct", str(study), "--db", str(db)])
    assert result.exit_code != 0
    assert result.output.startswith("error: ") and result.output.count("\n") == 1
    assert "damaged" in result.output or "malformed" in result.output
    newer = tmp_path / "newer.sqlite"
    conn = sqlite3.connect(newer)
    conn.execute(f"PRAGMA user_version = {SCHEMA_VERSION + 3}")
    conn.close()
    before = newer.read_bytes()
    result = CliRunner().invoke(main, ["conduct", str(study), "--db", str(newer)])
    assert result.exit_code != 0 and "newer prunebench" in result.output
    assert newer.read_bytes() == before


DEGENERATE = {
    "one_feature": lambda rng: (rng.normal(size=(60, 1)), rng.integers(0, 2, 60)),
    "constant_feature": lambda rng: (
        np.c_[np.ones(60), rng.normal(size=60)],
        rng.integers(0, 2, 60),
    ),
    "duplicate_rows": lambda rng: (
        np.repeat(rng.normal(size=(15, 2)), 4, axis=0),
        np.repeat(rng.integers(0, 2, 15), 4),
    ),
    "class_of_exactly_folds_rows": lambda rng: (
        rng.normal(size=(43, 3)),
        np.r_[np.zeros(40, int), np.ones(3, int)],
    ),
}


@pytest.mark.parametrize("name", sorted(DEGENERATE))
def test_degenerate_data_runs_to_the_end(name, tmp_path):
    X, y = DEGENERATE[name](np.random.default_rng(1))
    header = ",".join(f"x{i}" for i in range(X.shape[1])) + ",y"
    lines = [header] + [
        ",".join(map(str, row)) + f",{label}" for row, label in zip(X, y, strict=True)
    ]
    (tmp_path / f"{name}.csv").write_text("\n".join(lines) + "\n")
    unique = f"{name}_{abs(hash(str(tmp_path))) % 10**8}"
    (tmp_path / "m.toml").write_text(
        f'[[dataset]]\nname = "{unique}"\nfile = "{name}.csv"\ntarget = "y"\ntask = "binary"\n'
    )
    study = parse_study(
        'name = "degenerate"\nseed = 1\ndatasets = [{ manifest = "m.toml" }]\n[outer]\n'
        'repeats = 2\nfolds = 3\n[factors]\ninner_folds = [2]\nrule = ["min", "1se"]\n'
        'max_depth = ["none", 2]\n',
        base=tmp_path,
    )
    summary = conduct(study, tmp_path / "d.sqlite", progress=quiet())
    assert summary.done == 4 and summary.failed == 0


def test_a_trial_past_the_time_limit_is_stopped_and_recorded(tmp_path, monkeypatch):
    # The group's clock is replaced so the test does not depend on how busy the machine is:
    # the first group (iris) never sees time pass; the second (digits) sees 5 s pass after
    # its third tree fit, so it must stop before its fourth and be stored as failed.
    from prunebench import evaluate

    clocks = []
    real_init = evaluate._Clock.__init__

    def init(self, limit):
        real_init(self, limit)
        self.index, self.checks = len(clocks), 0
        clocks.append(self)

    def elapsed(self):
        return 5.0 if self.index == 1 and self.checks > 3 else 0.0

    real_check = evaluate._Clock.check

    def check(self):
        self.checks += 1
        real_check(self)

    monkeypatch.setattr(evaluate._Clock, "__init__", init)
    monkeypatch.setattr(evaluate._Clock, "elapsed", elapsed)
    monkeypatch.setattr(evaluate._Clock, "check", check)
    study = parse_study(
        'name = "limited"\nseed = 1\ntime_limit = 1.0\ndatasets = ["iris", "digits"]\n'
        "[outer]\nrepeats = 3\nfolds = 5\n[factors]\ninner_folds = [10]\n"
        'criterion = ["entropy"]\n'
    )
    summary = conduct(study, tmp_path / "t.sqlite", progress=quiet())
    conn = sqlite3.connect(tmp_path / "t.sqlite")
    status = dict(
        conn.execute("SELECT d.name, t.status FROM trials t JOIN datasets d USING (dataset_id)")
    )
    assert status == {"iris": "done", "digits": "failed"}
    error = conn.execute("SELECT error FROM trials WHERE status = 'failed'").fetchone()[0]
    assert "time_limit of 1 s" in error and "(5 s)" in error
    assert summary.done == 1 and summary.failed == 1
    assert clocks[1].checks == 4  # stopped at the check before its fourth fit


def test_large_data_stays_within_memory(tmp_path):
    # 100,000 rows in a subprocess: the peak resident memory stays bounded
    code = (
        "import io, resource; from prunebench.execute import conduct, Progress;"
        "from prunebench.study import parse_study;"
        's = parse_study(\'name = "big"\\nseed = 1\\n'
        'datasets = [{ name = "waveform", n_samples = 100000, seed = 1 }]\\n'
        "[outer]\\nrepeats = 1\\nfolds = 2\\n[factors]\\nmax_depth = [8]\\ninner_folds = [2]\\n');"
        f"conduct(s, {str(tmp_path / 'big.sqlite')!r}, progress=Progress(0, io.StringIO()));"
        "print(resource.getrusage(resource.RUSAGE_SELF).ru_maxrss)"
    )
    out = subprocess.run(
        [sys.executable, "-c", code], capture_output=True, text=True, timeout=300, check=True
    )
    peak_mib = int(out.stdout.split()[-1]) / 1024
    assert peak_mib < 1500, peak_mib
