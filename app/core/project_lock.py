"""One window per project: a lock file beside the project that a crash cannot leave stuck.

Opening a project writes ``.<name>.lock`` beside it with the owner's process id, host
name and start time. Another window that finds a live lock refuses to open the project
(and leaves its autosave alone). A lock is *stale*, and is taken over, when it was
written on this host by a process that no longer runs; a lock from another host (a
shared network folder) cannot be checked and is reported with its path so that the
user can remove it. A folder where no lock can be written (read-only media) opens
without one: the lock protects work, it must not block reading.
"""

from __future__ import annotations

import json
import os
import socket
import sys
import time
from dataclasses import dataclass
from pathlib import Path

#: Marks a lock file that could not be read (its owner is unknown).
UNREADABLE_PID = -1
#: An unreadable lock younger than this may be one being written; older, a crash's.
UNREADABLE_GRACE_S = 5.0

__all__ = ["LockOwner", "ProjectLock", "live_lock_owner", "lock_path_for", "process_is_running"]


def lock_path_for(project_path) -> Path:
    path = Path(project_path)
    return path.with_name(f".{path.name}.lock")


@dataclass(frozen=True)
class LockOwner:
    pid: int
    host: str
    started: float

    def describe(self) -> str:
        when = time.strftime("%Y-%m-%d %H:%M", time.localtime(self.started))
        return f"process {self.pid} on {self.host}, since {when}"

    def is_this_process(self) -> bool:
        return self.pid == os.getpid() and self.host == socket.gethostname()


def process_is_running(pid: int) -> bool:
    """Whether a process with this id runs on this computer."""
    if pid <= 0:
        return False
    if sys.platform == "win32":  # os.kill(pid, 0) would send CTRL+C there
        import ctypes

        handle = ctypes.windll.kernel32.OpenProcess(0x1000, False, pid)  # QUERY_LIMITED_INFORMATION
        if not handle:
            return False
        ctypes.windll.kernel32.CloseHandle(handle)
        return True
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:  # it exists, owned by someone else
        return True
    return True


def _read_owner(path: Path) -> LockOwner | None:
    """The owner recorded in a lock file; None if there is no readable lock."""
    try:
        doc = json.loads(path.read_text(encoding="utf-8"))
        return LockOwner(int(doc["pid"]), str(doc["host"]), float(doc["started"]))
    except FileNotFoundError:
        return None
    except (OSError, ValueError, KeyError, TypeError):
        # unreadable: being written this instant, or left half-written by a crash
        try:
            return LockOwner(UNREADABLE_PID, socket.gethostname(), path.stat().st_mtime)
        except OSError:
            return None


def _is_stale(owner: LockOwner) -> bool:
    if owner.pid == UNREADABLE_PID:
        return time.time() - owner.started > UNREADABLE_GRACE_S
    return owner.host == socket.gethostname() and not process_is_running(owner.pid)


def live_lock_owner(project_path) -> LockOwner | None:
    """The other live window holding ``project_path``; None when free, stale or ours."""
    owner = _read_owner(lock_path_for(project_path))
    if owner is None or owner.is_this_process() or _is_stale(owner):
        return None
    return owner


class ProjectLock:
    """The lock this window holds on one project file."""

    def __init__(self, project_path):
        self.project_path = str(project_path)
        self.path = lock_path_for(project_path)
        self.held = False

    def acquire(self) -> LockOwner | None:
        """Take the lock; returns the live owner when another window has it, else None."""
        for _attempt in range(2):
            try:
                descriptor = os.open(self.path, os.O_CREAT | os.O_EXCL | os.O_WRONLY, 0o644)
            except FileExistsError:
                owner = live_lock_owner(self.project_path)
                if owner is not None:
                    return owner
                self.path.unlink(missing_ok=True)  # stale, or already ours: take it over
                continue
            except OSError:
                return None  # read-only folder: open without a lock
            with os.fdopen(descriptor, "w", encoding="utf-8") as stream:
                json.dump({"pid": os.getpid(), "host": socket.gethostname(),
                           "started": time.time()}, stream)
            self.held = True
            return None
        return None

    def release(self) -> None:
        """Remove the lock file if this process still owns it."""
        if not self.held:
            return
        self.held = False
        owner = _read_owner(self.path)
        if owner is not None and owner.is_this_process():
            self.path.unlink(missing_ok=True)
