"""Atomic output files for the data layer (temp file in the same folder, then rename)."""

from __future__ import annotations

import os
import tempfile
from pathlib import Path

__all__ = ["write_bytes_atomically"]


def write_bytes_atomically(path: str | os.PathLike, data: bytes) -> None:
    """Write ``data`` to ``path`` so that readers never see a half-written file."""
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent)
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
        os.replace(tmp, path)
    except BaseException:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        raise
