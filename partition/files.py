"""Writing files all at once: the one writer every output of crewcut goes through.

Each file is written to a temporary file in its own folder, flushed and synced to
disk (``os.fsync``), given the usual file mode (``0o666`` less the umask, as
``open()`` would) and only then renamed over its name (``os.replace``, atomic on
one file system). Several files are written all or none: every temporary file
first, the renames last, so a failure part-way (a full disk, a folder that cannot
be made) leaves none of them behind and no temporary file either.
"""
from __future__ import annotations

import os
import tempfile
from pathlib import Path
from typing import Iterable

__all__ = ["atomic_write", "atomic_write_many", "file_mode"]


def file_mode() -> int:
    """The mode a new file gets from ``open()``: ``0o666`` less the process's umask."""
    umask = os.umask(0)
    os.umask(umask)
    return 0o666 & ~umask


def atomic_write(path: str | Path, data: str | bytes) -> Path:
    """Write one file all at once (text is encoded as UTF-8); returns its path."""
    return atomic_write_many([(path, data)])[0]


def atomic_write_many(files: Iterable[tuple[str | Path, str | bytes]]) -> list[Path]:
    """Write several files all or none; returns their paths in the order given."""
    mode = file_mode()
    staged: list[tuple[str, Path]] = []
    try:
        for path, data in files:
            path = Path(path)
            path.parent.mkdir(parents=True, exist_ok=True)
            raw = data.encode("utf-8") if isinstance(data, str) else bytes(data)
            fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".part", dir=path.parent)
            staged.append((tmp, path))
            with os.fdopen(fd, "wb") as fh:
                fh.write(raw)
                fh.flush()
                os.fsync(fh.fileno())
            os.chmod(tmp, mode)  # mkstemp makes owner-only files
        for i, (tmp, path) in enumerate(staged):
            os.replace(tmp, path)
            staged[i] = ("", path)
    except BaseException:
        for tmp, _ in staged:
            if tmp:
                Path(tmp).unlink(missing_ok=True)
        raise
    for folder in sorted({str(p.parent) for _, p in staged}):
        _sync_folder(folder)
    return [p for _, p in staged]


def _sync_folder(folder: str) -> None:
    """Make the renames durable too, where the system allows syncing a folder."""
    try:
        fd = os.open(folder, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)
