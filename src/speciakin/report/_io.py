"""Atomic output for the report layer.

A renderer builds the whole file in memory first, then hands the bytes to
:func:`atomic_write_bytes`, which writes a temporary file in the target folder
and renames it over the target.  A failure at any point leaves either the old
target or no target, never a half-written file, and no temporary file behind.

(The writing itself is :func:`speciakin._io.atomic_write_bytes`; this wrapper
turns an operating-system failure into a message naming the file.)
"""

from __future__ import annotations

import os
from pathlib import Path

from speciakin._io import atomic_write_bytes as shared_atomic_write_bytes
from speciakin.errors import InputError, Location

__all__ = ["atomic_write_bytes", "atomic_write_text"]


def atomic_write_bytes(path: str | os.PathLike, data: bytes) -> Path:
    """Write ``data`` to ``path`` atomically and return the path.

    Parameters
    ----------
    path
        Target file; its folder is created if needed.
    data
        The complete file content.

    Raises
    ------
    InputError
        If the folder cannot be created or the file cannot be written; the
        message names the file and the operating system's reason.
    """
    target = Path(path)
    try:
        return shared_atomic_write_bytes(target, data)
    except OSError as exc:
        raise InputError(f"cannot write the report: {exc.strerror or exc}",
                         Location(file=str(target)), expected="a writable folder and file") from None


def atomic_write_text(path: str | os.PathLike, text: str) -> Path:
    """Write ``text`` as UTF-8 to ``path`` atomically (see :func:`atomic_write_bytes`)."""
    return atomic_write_bytes(path, text.encode("utf-8"))
