"""Writing files so that nothing half-written ever looks complete, and nobody else's file is touched.

Every file `gen` writes is first written under a new hidden temporary name in the target folder,
created exclusively (O_EXCL, so an existing file or a symbolic link planted under that name is
never followed or overwritten), and renamed into place only when complete. The temporary name
carries the writer's process id, so that leftovers of a killed writer can be recognized and
removed later (`stale_temporaries`).
"""

from __future__ import annotations

import os
import tempfile
from pathlib import Path

__all__ = ["temporary_beside", "write_atomically", "stale_temporaries", "TEMP_MARK", "FolderLock", "LockHeld"]

#: what every temporary name contains after the target's name
TEMP_MARK = ".partial-"


def temporary_beside(path: Path) -> tuple[int, Path]:
    """A new, exclusively created temporary file in path's folder: (open descriptor, its path)."""
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}{TEMP_MARK}{os.getpid()}-", suffix=".tmp", dir=path.parent)
    return fd, Path(tmp)


def write_atomically(path: Path, data: str | bytes) -> Path:
    """Write text or bytes to path through an exclusive temporary file renamed into place; on any
    failure (OSError included) nothing is left behind and the exception propagates."""
    fd, tmp = temporary_beside(path)
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(data.encode("utf-8") if isinstance(data, str) else data)
        os.replace(tmp, path)
    except BaseException:
        tmp.unlink(missing_ok=True)
        raise
    return path


def stale_temporaries(folder: Path, name: str) -> list[Path]:
    """Temporary files for `name` in folder whose writing process no longer runs."""
    out = []
    for tmp in folder.glob(f".{name}{TEMP_MARK}*"):
        try:
            pid = int(tmp.name[len(name) + 1 + len(TEMP_MARK):].split("-", 1)[0])
            os.kill(pid, 0)
        except (ValueError, ProcessLookupError):
            out.append(tmp)
        except PermissionError:  # alive, owned by someone else
            pass
    return out


class LockHeld(OSError):
    """Another live process holds the lock; its description says who."""


class FolderLock:
    """An exclusive lock on one unit of work in a folder (a run, a batch part, a merge): a file
    `.gen-lock-<unit>` created with O_EXCL, holding the host, process id and start time of its
    holder, removed on release. A lock left by a process of this host that no longer runs is
    stale and taken over; one from another host is reported with its holder, for the user to judge."""

    def __init__(self, folder: Path, unit: str):
        self.path = folder / f".gen-lock-{unit}"
        self.held = False
        #: the folders acquire() created, deepest first (removed again by `remove_created` if left empty)
        self.created: list[Path] = []

    def acquire(self) -> "FolderLock":
        import json
        import socket
        import time

        missing = [p for p in [self.path.parent, *self.path.parent.parents] if not p.exists()]
        self.path.parent.mkdir(parents=True, exist_ok=True)
        self.created = missing
        me = {"host": socket.gethostname(), "pid": os.getpid(), "started": time.strftime("%Y-%m-%d %H:%M:%S")}
        for _ in range(3):
            try:
                fd = os.open(self.path, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o644)
            except FileExistsError:
                holder = self._holder()
                if holder is not None and self._stale(holder, me["host"]):
                    self.path.unlink(missing_ok=True)
                    continue
                who = (f"process {holder.get('pid')} on {holder.get('host')} since {holder.get('started')}"
                       if holder else "an unknown process")
                raise LockHeld(f"{self.path.parent}: {who} is writing here (lock {self.path.name}); wait for it to "
                               f"finish, or remove {self.path} if that process is gone") from None
            with os.fdopen(fd, "w", encoding="utf-8") as fh:
                fh.write(json.dumps(me))
            self.held = True
            return self
        raise LockHeld(f"{self.path}: could not take the lock")

    def _holder(self) -> dict | None:
        import json

        try:
            doc = json.loads(self.path.read_text(encoding="utf-8"))
            return doc if isinstance(doc, dict) else {}
        except FileNotFoundError:
            return None
        except (OSError, ValueError):
            return {}

    @staticmethod
    def _stale(holder: dict, host: str) -> bool:
        pid = holder.get("pid")
        if holder.get("host") != host or not isinstance(pid, int):
            return False
        try:
            os.kill(pid, 0)
        except ProcessLookupError:
            return True
        except PermissionError:
            return False
        return False

    def release(self) -> None:
        if self.held:
            self.path.unlink(missing_ok=True)
            self.held = False

    def remove_created(self) -> None:
        """Remove the folders acquire() created, where they are empty (a failed run leaves nothing)."""
        for folder in self.created:
            try:
                folder.rmdir()
            except OSError:
                break

    def __enter__(self) -> "FolderLock":
        return self.acquire()

    def __exit__(self, *exc) -> None:
        self.release()
