"""Key paths of the model file and the text lines where they are written.

A key path names a value inside the file the way a chemist reads it:
``molecule.S.site[1].pka`` (array items are counted from 1),
``ion."Na+"`` (names with characters other than letters, digits, ``_`` and
``-`` are quoted).  :class:`KeyLines` scans the raw text once and maps each
key path written there to its 1-based line, so that error messages can point
at the line (best effort: keys inside inline tables map to the line of the
enclosing key).
"""

from __future__ import annotations

import json
import re

__all__ = ["format_path", "sub_path", "parent_path", "KeyLines"]

_BARE = re.compile(r"^[A-Za-z0-9_\-]+$")
_KEY_TOKEN = re.compile(r'"((?:[^"\\]|\\.)*)"|\'([^\']*)\'|([A-Za-z0-9_\-]+)')
_HEADER = re.compile(r"^\s*(\[\[|\[)\s*([^\]]+?)\s*(\]\]|\])\s*(#.*)?$")
_KEY_LINE = re.compile(
    r"""^\s*((?:[A-Za-z0-9_\-]+|"(?:[^"\\]|\\.)*"|'[^']*')"""
    r"""(?:\s*\.\s*(?:[A-Za-z0-9_\-]+|"(?:[^"\\]|\\.)*"|'[^']*'))*)\s*=""")
_LAST = re.compile(r'(\[\d+\]|\.(?:"(?:[^"\\]|\\.)*"|[^.\[\]"]+))$')


def format_path(*parts: str | int) -> str:
    """Join key-path parts; an int ``i`` is written ``[i+1]``."""
    out = ""
    for p in parts:
        if isinstance(p, int):
            out += f"[{p + 1}]"
            continue
        seg = p if _BARE.match(p) else json.dumps(p)
        out += ("." if out else "") + seg
    return out


def sub_path(prefix: str, *parts: str | int) -> str:
    """Append raw parts to an already formatted key path ``prefix``."""
    tail = format_path(*parts)
    if not prefix:
        return tail
    return prefix + (tail if tail.startswith("[") else "." + tail)


def parent_path(path: str) -> str:
    """``molecule.S.site[1].pka`` -> ``molecule.S.site[1]``; top level -> ``""``."""
    stripped = _LAST.sub("", path)
    return "" if stripped == path else stripped


def _split_key(text: str) -> list[str]:
    parts = []
    for m in _KEY_TOKEN.finditer(text):
        if m.group(1) is not None:
            parts.append(json.loads(f'"{m.group(1)}"'))
        elif m.group(2) is not None:
            parts.append(m.group(2))
        else:
            parts.append(m.group(3))
    return parts


class KeyLines:
    """Index of key path -> line number built from the raw TOML text."""

    def __init__(self, text: str) -> None:
        self.lines: dict[str, int] = {}
        counters: dict[str, int] = {}
        table: list[str | int] = []
        in_multiline = None
        for number, line in enumerate(text.splitlines(), start=1):
            if in_multiline:
                if line.count(in_multiline) % 2 == 1:
                    in_multiline = None
                continue
            header = _HEADER.match(line)
            if header:
                parts = _split_key(header.group(2))
                if header.group(1) == "[[":
                    key = format_path(*parts)
                    index = counters.get(key, 0)
                    counters[key] = index + 1
                    table = [*parts, index]
                else:
                    table = list(parts)
                self.lines.setdefault(format_path(*table), number)
                continue
            key = _KEY_LINE.match(line)
            if key:
                path = format_path(*table, *_split_key(key.group(1)))
                self.lines.setdefault(path, number)
                rest = line[key.end():]
                for quote in ('"""', "'''"):
                    if rest.count(quote) % 2 == 1:
                        in_multiline = quote

    def line(self, path: str) -> int | None:
        """Line of ``path`` or of its nearest written ancestor; None if unknown."""
        while path:
            if path in self.lines:
                return self.lines[path]
            path = parent_path(path)
        return None
