"""Atomic output files, shared by every layer.

A writer never leaves a half-written file: the content goes to a temporary
file in the target's folder, is flushed to disk, and is then renamed over the
target (``os.replace`` is atomic on POSIX and Windows).  On any failure the
temporary file is removed and the old target, if any, is untouched.
"""

from __future__ import annotations

import contextlib
import os
import tempfile
from pathlib import Path
from typing import Iterator

__all__ = ["atomic_path", "atomic_write_bytes", "atomic_write_text"]


def _default_mode() -> int:
    """Permissions of a new file under the current umask (mkstemp makes 0600 files)."""
    mask = os.umask(0)
    os.umask(mask)
    return 0o666 & ~mask


def _fsync_dir(folder: Path) -> None:
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


@contextlib.contextmanager
def atomic_path(path: str | os.PathLike) -> Iterator[Path]:
    """Yield a temporary path beside ``path``; on success it replaces ``path``.

    For writers that need a file name (HDF5, matplotlib).  The folder is
    created if needed.
    """
    target = Path(path)
    target.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".tmp", dir=target.parent)
    os.close(fd)
    try:
        yield Path(tmp)
        with open(tmp, "rb+") as raw:
            os.fsync(raw.fileno())
        os.chmod(tmp, _default_mode())
        os.replace(tmp, target)
        _fsync_dir(target.parent)
    except BaseException:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        raise


def atomic_write_bytes(path: str | os.PathLike, data: bytes) -> Path:
    """Write ``data`` to ``path`` atomically; returns the path."""
    with atomic_path(path) as tmp:
        with os.fdopen(os.open(tmp, os.O_WRONLY | os.O_TRUNC), "wb") as handle:
            handle.write(data)
    return Path(path)


def atomic_write_text(path: str | os.PathLike, text: str) -> Path:
    """Write ``text`` as UTF-8 to ``path`` atomically."""
    return atomic_write_bytes(path, text.encode("utf-8"))
