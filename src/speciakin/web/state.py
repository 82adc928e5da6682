"""What the server keeps: the campaign root, the job board and caches of loaded files.

Caches are keyed by path and modification times, so an edited workbook or a
new result is read again; nothing is stored outside the campaign root.
"""

from __future__ import annotations

import threading
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Callable

from speciakin.web.jobs import JobBoard
from speciakin.web.paths import campaign_inputs, inside_root

__all__ = ["WebState", "file_stamp"]

_CACHE_SIZE = 32  # a campaign's check, tables, model, result views and a figure per run


def file_stamp(paths: list[Path]) -> tuple:
    """(path, modification time [ns], size [bytes]) of each file of ``paths`` that exists, sorted."""
    found = []
    for p in sorted(paths):
        try:
            info = p.stat()
        except OSError:
            continue
        found.append((str(p), info.st_mtime_ns, info.st_size))
    return tuple(found)


@dataclass
class WebState:
    """The server's state: ``root`` (resolved), the job board, caches."""

    root: Path
    board: JobBoard = field(default_factory=JobBoard)
    _cache: dict[tuple, Any] = field(default_factory=dict)
    _lock: threading.Lock = field(default_factory=threading.Lock)

    def folder(self, name: str | None) -> Path:
        """A campaign folder chosen on the page, resolved inside the root (raises InputError)."""
        return inside_root(self.root, name)

    def cached(self, kind: str, files: list[Path], make: Callable[[], Any]) -> Any:
        """``make()``, remembered while ``files`` keep their modification times."""
        key = (kind, file_stamp(files))
        with self._lock:
            if key in self._cache:
                return self._cache[key]
        value = make()
        with self._lock:
            if len(self._cache) >= _CACHE_SIZE:
                self._cache.pop(next(iter(self._cache)))
            self._cache[key] = value
        return value

    def model(self, campaign: Path):
        """The campaign's model file ``model.toml``, loaded (cached while the file is unchanged); raises
        the model file's errors (:class:`~speciakin.errors.SpeciakinError`) and OSError."""
        from speciakin.chemistry.modelfile import load_model

        path = Path(campaign) / "model.toml"
        return self.cached("model-object", [path], lambda: load_model(path))

    @staticmethod
    def inputs_of(campaign: Path) -> list[Path]:
        """The files a campaign's check depends on (workbook, CSV files, model and process files), and
        the folder itself."""
        return campaign_inputs(campaign) + [campaign]
