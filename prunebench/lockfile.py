"""The conducting lock beside a results database: one writer, stale locks taken over.

``DB.lock`` holds an exclusive ``flock`` while a ``conduct`` writes, and names
its holder (``pid N on HOST``).  A lock whose named process no longer exists on
this host is stale even if something that process started still holds the file
open: a fresh file (a new inode, free of the old lock) is put in its place under
a short-lived guard lock, so two processes cannot both take over.
"""

from __future__ import annotations

import fcntl
import os
import socket
from pathlib import Path
from typing import IO

__all__ = ["acquire", "holder_gone", "lock_path", "release", "writer_active"]


def lock_path(database: Path) -> Path:
    """The lock file of a database: ``DB.lock`` beside it."""
    return database.with_name(database.name + ".lock")


def writer_active(database: Path) -> bool:
    """True while a conducting process holds the database's lock file."""
    try:
        handle = open(lock_path(database))
    except OSError:
        return False  # no lock file: nobody has conducted here, or it was removed
    with handle:
        try:
            fcntl.flock(handle, fcntl.LOCK_SH | fcntl.LOCK_NB)
        except BlockingIOError:
            return True
        fcntl.flock(handle, fcntl.LOCK_UN)
        return False


def holder_gone(holder: str) -> bool:
    """Whether the process a lock file names ("pid N on HOST") no longer exists here.

    Parameters
    ----------
    holder : str
        The lock file's text.

    Returns
    -------
    bool
        False when it cannot be told (another host, a text this version did not write).
    """
    parts = holder.split()
    if len(parts) < 2 or parts[0] != "pid" or not parts[1].isdigit():
        return False
    if len(parts) >= 4 and parts[2] == "on" and parts[3] != socket.gethostname():
        return False
    pid = int(parts[1])
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return True
    except PermissionError:
        return False
    try:  # a zombie has ended; only its parent has not collected it yet
        stat = Path(f"/proc/{pid}/stat").read_text()
        return stat.rsplit(")", 1)[1].split()[0] == "Z"
    except (OSError, IndexError):
        return False


def _is_current(handle: IO, path: Path) -> bool:
    """Whether an open lock file is still the one at ``path`` (not replaced)."""
    try:
        now = os.stat(path)
    except FileNotFoundError:
        return False
    held = os.fstat(handle.fileno())
    return (held.st_dev, held.st_ino) == (now.st_dev, now.st_ino)


def _replace_stale(path: Path) -> None:
    """Put a fresh lock file in place of one whose holder has died (under a guard lock)."""
    guard_path = path.with_name(path.name + ".takeover")
    with open(guard_path, "a+") as guard:
        fcntl.flock(guard, fcntl.LOCK_EX)
        with open(path, "a+") as current:
            try:
                fcntl.flock(current, fcntl.LOCK_EX | fcntl.LOCK_NB)
                fcntl.flock(current, fcntl.LOCK_UN)
                return  # free again: nothing to replace
            except BlockingIOError:
                current.seek(0)
                if not holder_gone(current.read().strip()):
                    return  # someone else took it over first; the caller sees them
        fresh = path.with_name(f"{path.name}.{os.getpid()}.new")
        fresh.write_text("")
        os.replace(fresh, path)


def acquire(path: Path, attempts: int = 5) -> tuple[IO | None, str]:
    """Take the lock file at ``path``, taking over a stale one.

    Parameters
    ----------
    path : Path
        The lock file (see :func:`lock_path`).
    attempts : int, default=5
        How often to retry when the file is replaced while it is being locked.

    Returns
    -------
    (file or None, str)
        The open, locked file and ``""``; or ``None`` and the living holder's text.

    Raises
    ------
    OSError
        If the lock file cannot be created.
    """
    holder = "another process"
    for _ in range(attempts):
        path.parent.mkdir(parents=True, exist_ok=True)
        handle = open(path, "a+")
        try:
            fcntl.flock(handle, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except BlockingIOError:
            handle.seek(0)
            holder = handle.read().strip() or "another process"
            handle.close()
            if not holder_gone(holder):
                return None, holder
            _replace_stale(path)
            continue
        if _is_current(handle, path):
            handle.seek(0)
            handle.truncate()
            handle.write(f"pid {os.getpid()} on {socket.gethostname()}")
            handle.flush()
            return handle, ""
        handle.close()  # replaced by a takeover while we waited: lock the new file
    return None, holder


def release(handle: IO, path: Path | None = None) -> None:
    """Release and close a lock file taken by :func:`acquire`, removing it first.

    The file is unlinked while still locked, so nothing is left beside a finished
    database.  A process that opened it meanwhile gets the lock of a file that is no
    longer at ``path``; :func:`acquire` sees that (:func:`_is_current`) and locks a
    new one.

    Parameters
    ----------
    handle : file
        The open, locked file :func:`acquire` returned.
    path : Path, optional
        Where it lies; given, the file is removed if it is still the one there.
    """
    if path is not None and _is_current(handle, path):
        try:
            path.unlink()
        except OSError:
            pass  # a read-only folder keeps it; it is free once unlocked
    fcntl.flock(handle, fcntl.LOCK_UN)
    handle.close()
