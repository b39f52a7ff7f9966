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

__all__ = ["temporary_beside", "write_atomically", "stale_temporaries", "TEMP_MARK"]

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
