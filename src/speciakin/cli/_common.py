"""Helpers shared by the sub-command modules (argument parsing, output files)."""

from __future__ import annotations

import os
import tempfile
from pathlib import Path

from speciakin.errors import InputError, Location


def output_dir(path: str | os.PathLike) -> Path:
    """Create (if needed) and return an output folder."""
    p = Path(path)
    try:
        p.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise InputError(f"cannot create output folder: {exc.strerror}", Location(file=str(p))) from None
    return p


def existing_file(path: str | os.PathLike, what: str) -> Path:
    p = Path(path)
    if not p.exists():
        raise InputError(f"{what} not found", Location(file=str(p)), expected="an existing file")
    return p


def atomic_write_bytes(path: str | os.PathLike, data: bytes) -> None:
    """Write ``data`` to ``path`` atomically (temp file in the same folder, then rename)."""
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


def atomic_write_text(path: str | os.PathLike, text: str) -> None:
    atomic_write_bytes(path, text.encode("utf-8"))
