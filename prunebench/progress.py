"""How far a study's conduct has come: counts, rate and ETA, readable while it writes.

:func:`progress_report` backs ``prunebench progress``; :func:`duration_text` is the
short duration both it and the conduct's progress line print.
"""

from __future__ import annotations

import datetime as _dt
import tomllib
from pathlib import Path

from .lockfile import writer_active
from .results import resolve_study
from .store import ResultStore

__all__ = ["duration_text", "progress_report"]


def duration_text(seconds: float) -> str:
    """A duration as ``1h05m`` or ``4m07s``."""
    seconds = int(round(seconds))
    h, rest = divmod(seconds, 3600)
    m, s = divmod(rest, 60)
    return f"{h}h{m:02d}m" if h else f"{m}m{s:02d}s"


def progress_report(path: str | Path, study: str | None = None, last_errors: int = 3) -> dict:
    """Counts, rate and ETA of a study, readable while a ``conduct`` writes to it.

    Returns
    -------
    dict
        ``study``, ``done``, ``failed``, ``pending``, ``total``, ``rate_per_minute``
        (trials finished per minute over the run so far), ``eta_seconds``,
        ``eta`` (as text), ``last_finished``, ``errors`` (the last lines of the latest
        tracebacks), ``search`` (whether the study is a search) and ``writing`` (whether
        a ``conduct`` holds the database now).

    Notes
    -----
    A search records a configuration's trials only as it reaches them (see
    :mod:`prunebench.search`), so while it runs ``total`` is the trials so far and
    ``pending`` at most a batch; how many remain depends on the sampler and on early
    stopping, so its ETA is unknown (``None``) until it has ended.  Pending trials
    while no ``conduct`` holds the database (it was stopped or killed) have no ETA
    either: nothing is running them.
    """
    with ResultStore(path, readonly=True) as store:
        chosen = resolve_study(store, study)
        writing = writer_active(store.path)
        sid = chosen["study_id"]
        counts = {
            r["status"]: r["n"]
            for r in store.query(
                "SELECT status, COUNT(*) AS n FROM trials WHERE study_id = ? GROUP BY status", [sid]
            )
        }
        times = store.query(
            "SELECT MIN(started) AS first, MAX(finished) AS last FROM trials WHERE study_id = ? "
            "AND status != 'pending'",
            [sid],
        )[0]
        errors = store.query(
            "SELECT error FROM trials WHERE study_id = ? AND status = 'failed' "
            "ORDER BY finished DESC LIMIT ?",
            [sid, last_errors],
        )
    done, failed, pending = (counts.get(k, 0) for k in ("done", "failed", "pending"))
    rate = eta = None
    if times["first"] and times["last"] and done + failed:
        span = (
            _dt.datetime.fromisoformat(times["last"]) - _dt.datetime.fromisoformat(times["first"])
        ).total_seconds()
        if span > 0:
            rate = (done + failed) / span * 60
            eta = pending / (rate / 60) if pending else 0.0
    search = "search" in tomllib.loads(chosen["study_text"])
    if (search and writing) or (pending and not writing):
        eta = None  # a search's end is unknown; trials nobody is running have no ETA
    return {
        "study": chosen["name"],
        "done": done,
        "failed": failed,
        "pending": pending,
        "total": done + failed + pending,
        "rate_per_minute": rate,
        "eta_seconds": eta,
        "eta": "-" if eta is None else duration_text(eta),
        "last_finished": times["last"],
        "errors": [e["error"].strip().splitlines()[-1] for e in errors if e["error"]],
        "search": search,
        "writing": writing,
    }
