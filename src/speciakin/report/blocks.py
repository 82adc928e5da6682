"""Report blocks: paragraph, key/value list, table, figure, callout, bullet list.

Each block is a small dataclass that checks itself on construction (raising
:class:`~speciakin.errors.InputError` with the offending key and value) and
round-trips through ``to_dict`` / ``from_dict``.  :data:`BLOCK_TYPES` is the one
registry of block types.
"""

from __future__ import annotations

import base64
import binascii
import math
import os
import re
from dataclasses import dataclass
from pathlib import Path
from types import MappingProxyType
from typing import Any, ClassVar, Mapping, Sequence, Union

from speciakin.errors import InputError, Location

__all__ = [
    "Block",
    "CALLOUT_KINDS",
    "BLOCK_TYPES",
    "Cell",
    "Paragraph",
    "KeyValues",
    "Table",
    "Figure",
    "Callout",
    "BulletList",
    "format_cell",
    "slugify",
    "PNG_SIGNATURE",
    "RESERVED_ANCHORS",
]

#: Callout kinds and the heading each rendering shows for them, in the order
#: a reader should meet them.
CALLOUT_KINDS: Mapping[str, str] = MappingProxyType({
    "decision": "Decision",
    "warning": "Warning",
    "caution": "Caution",
    "note": "Note",
})

#: Anchors the renderings use themselves (summary box, contents).
RESERVED_ANCHORS = ("decision-summary", "contents")

#: First eight bytes of every PNG file (ISO/IEC 15948, section 5.2).
PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"

#: A table cell: text, a number or empty.
Cell = Union[str, float, int, None]

#: Shown for an empty cell.
EMPTY_CELL = "\u2013"

DEFAULT_NUMBER_FORMAT = ".4g"


def _fail(message: str, key: str, value: Any = None, expected: str | None = None) -> InputError:
    return InputError(message, Location(key=key), value, expected)


def slugify(text: str) -> str:
    """Lower-case ASCII anchor made of letters, digits and hyphens."""
    slug = re.sub(r"[^a-z0-9]+", "-", text.lower()).strip("-")
    return slug or "section"


def _check_format(spec: str | None, key: str) -> None:
    if spec is None:
        return
    try:
        format(1.5, spec)
    except (ValueError, TypeError):
        raise _fail("not a number format", key, spec, "a Python format spec such as '.3g' or '.2f'") from None


def format_cell(value: Cell, spec: str | None = None) -> str:
    """Text of one cell: numbers with ``spec`` (default ``.4g``), None as a dash."""
    if value is None:
        return EMPTY_CELL
    if isinstance(value, str):
        return value
    if isinstance(value, float) and not math.isfinite(value):
        return "NaN" if math.isnan(value) else ("inf" if value > 0 else "-inf")
    if isinstance(value, int) and (spec is None or not spec.endswith(("d", "n", ","))):
        return str(value)  # integers (counts, seeds) print as integers whatever the column format
    return format(value, spec or DEFAULT_NUMBER_FORMAT)


def _clean_cell(value: Any, key: str) -> Cell:
    if value is None or isinstance(value, str):
        return value
    if isinstance(value, bool):
        return "yes" if value else "no"
    # numpy scalars and other number types: keep ints as ints
    if hasattr(value, "dtype") and getattr(value, "shape", None) == ():
        value = value.item()
    if isinstance(value, int):
        return int(value)
    if isinstance(value, float):
        return float(value)
    raise _fail("a table cell must be text, a number or empty", key, value, "str, float, int or None")


def _text(value: Any, key: str, allow_empty: bool = False) -> str:
    if not isinstance(value, str) or (not allow_empty and not value.strip()):
        raise _fail("expected text", key, value, "a non-empty string" if not allow_empty else "a string")
    return value


@dataclass
class Paragraph:
    """A paragraph of plain text (no markup; renderers escape it)."""

    text: str
    block_kind: ClassVar[str] = "paragraph"

    def __post_init__(self) -> None:
        self.text = _text(self.text, "paragraph.text", allow_empty=True)

    def to_dict(self) -> dict[str, Any]:
        return {"block": self.block_kind, "text": self.text}

    @classmethod
    def from_dict(cls, data: Mapping[str, Any]) -> "Paragraph":
        return cls(data.get("text"))


@dataclass
class KeyValues:
    """Label/value pairs, e.g. ``[("Recommended pH", "7.4 - 8.1"), ...]``."""

    rows: list[tuple[str, Cell]]
    number_format: str | None = None
    block_kind: ClassVar[str] = "key_values"

    def __post_init__(self) -> None:
        cleaned = []
        for i, row in enumerate(self.rows):
            if not isinstance(row, (tuple, list)) or len(row) != 2:
                raise _fail("each key/value row must be a pair", f"key_values.rows[{i}]", row,
                            "(label, value)")
            cleaned.append((_text(row[0], f"key_values.rows[{i}].label"),
                            _clean_cell(row[1], f"key_values.rows[{i}].value")))
        self.rows = cleaned
        _check_format(self.number_format, "key_values.number_format")

    def formatted(self) -> list[tuple[str, str]]:
        return [(label, format_cell(value, self.number_format)) for label, value in self.rows]

    def to_dict(self) -> dict[str, Any]:
        return {"block": self.block_kind, "rows": [list(r) for r in self.rows], "number_format": self.number_format}

    @classmethod
    def from_dict(cls, data: Mapping[str, Any]) -> "KeyValues":
        return cls([tuple(r) if isinstance(r, list) else r for r in data.get("rows", [])],
                   data.get("number_format"))


@dataclass
class Table:
    """A table of text and numbers.

    Parameters
    ----------
    title
        Shown above the table (and used for the workbook sheet name).
    columns
        Column names without units.
    rows
        One list of cells per row, as long as ``columns``.
    units
        One unit per column (``None`` for no unit); shown as ``name [unit]``.
    note
        A sentence shown under the table.
    formats
        One Python format spec per column for numbers (``None``: ``.4g``).
    sheet_name
        Name of the workbook sheet (default: derived from the title).
    """

    title: str
    columns: list[str]
    rows: list[list[Cell]]
    units: list[str | None] | None = None
    note: str | None = None
    formats: list[str | None] | None = None
    sheet_name: str | None = None
    block_kind: ClassVar[str] = "table"

    def __post_init__(self) -> None:
        self.title = _text(self.title, "table.title")
        if not isinstance(self.columns, (list, tuple)) or not self.columns:
            raise _fail("a table needs at least one column", f"table '{self.title}'.columns",
                        self.columns, "a non-empty list of names")
        self.columns = [_text(c, f"table '{self.title}'.columns[{i}]") for i, c in enumerate(self.columns)]
        n = len(self.columns)
        for name, seq in (("units", self.units), ("formats", self.formats)):
            if seq is not None and len(seq) != n:
                raise _fail(f"{name} must have one entry per column", f"table '{self.title}'.{name}",
                            len(seq), f"{n} entries")
        self.units = list(self.units) if self.units is not None else [None] * n
        self.formats = list(self.formats) if self.formats is not None else [None] * n
        for i, spec in enumerate(self.formats):
            _check_format(spec, f"table '{self.title}'.formats[{i}]")
        rows = []
        for r, row in enumerate(self.rows):
            if not isinstance(row, (list, tuple)) or len(row) != n:
                raise _fail("row length differs from the number of columns",
                            f"table '{self.title}'.rows[{r}]",
                            len(row) if isinstance(row, (list, tuple)) else row, f"{n} cells")
            rows.append([_clean_cell(c, f"table '{self.title}'.rows[{r}][{i}]") for i, c in enumerate(row)])
        self.rows = rows

    def headers(self) -> list[str]:
        """Column headers with units in brackets: ``"k1 [L/(mol*s)]"``."""
        return [f"{c} [{u}]" if u else c for c, u in zip(self.columns, self.units)]

    def formatted_rows(self) -> list[list[str]]:
        """Every cell as display text, numbers formatted with the column format."""
        return [[format_cell(c, f) for c, f in zip(row, self.formats)] for row in self.rows]

    def to_dict(self) -> dict[str, Any]:
        return {"block": self.block_kind, "title": self.title, "columns": list(self.columns),
                "rows": [list(r) for r in self.rows], "units": list(self.units), "note": self.note,
                "formats": list(self.formats), "sheet_name": self.sheet_name}

    @classmethod
    def from_dict(cls, data: Mapping[str, Any]) -> "Table":
        return cls(data.get("title"), data.get("columns"), data.get("rows", []), data.get("units"),
                   data.get("note"), data.get("formats"), data.get("sheet_name"))


@dataclass
class Figure:
    """A PNG image with a caption and an alternative text.

    Parameters
    ----------
    image
        PNG bytes, or the path of a PNG file (read when the report is rendered).
    caption
        Shown under the figure.
    alt
        Alternative text for readers who cannot see the image (default: caption).
    width_fraction
        Share of the text width the figure takes [-], 0.1 to 1.
    """

    image: bytes | str | os.PathLike
    caption: str = ""
    alt: str = ""
    width_fraction: float = 1.0
    block_kind: ClassVar[str] = "figure"

    def __post_init__(self) -> None:
        self.caption = _text(self.caption, "figure.caption", allow_empty=True)
        if isinstance(self.image, (bytes, bytearray)):
            self.image = bytes(self.image)
        elif isinstance(self.image, (str, os.PathLike)) and str(self.image):
            self.image = str(self.image)
        else:
            raise _fail("a figure needs PNG bytes or the path of a PNG file", f"figure '{self.caption}'.image",
                        type(self.image).__name__, "bytes or a file path")
        if not (isinstance(self.width_fraction, (int, float)) and 0.1 <= self.width_fraction <= 1.0):
            raise _fail("width fraction out of range", f"figure '{self.caption}'.width_fraction",
                        self.width_fraction, "a number from 0.1 to 1")
        if not self.alt:
            self.alt = self.caption

    @property
    def png(self) -> bytes | None:
        """The PNG bytes given in memory (None when the figure refers to a file)."""
        return self.image if isinstance(self.image, bytes) else None

    @property
    def path(self) -> str | None:
        """The PNG file path (None when the bytes were given)."""
        return self.image if isinstance(self.image, str) else None

    def image_bytes(self) -> bytes:
        """The PNG bytes (read from ``path`` if given); checks the PNG signature."""
        if self.png is not None:
            data = bytes(self.png)
            where = Location(key=f"figure '{self.caption}'")
        else:
            where = Location(file=str(self.path))
            try:
                data = Path(self.path).read_bytes()
            except OSError as exc:
                raise InputError(f"cannot read figure: {exc.strerror or exc}", where,
                                 expected="a readable PNG file") from None
        if not data.startswith(PNG_SIGNATURE):
            raise InputError("figure is not a PNG image", where, data[:8], "PNG data")
        return data

    def to_dict(self) -> dict[str, Any]:
        return {"block": self.block_kind, "caption": self.caption, "alt": self.alt,
                "png_base64": base64.b64encode(self.image_bytes()).decode("ascii"),
                "width_fraction": self.width_fraction}

    @classmethod
    def from_dict(cls, data: Mapping[str, Any]) -> "Figure":
        try:
            png = base64.b64decode(data.get("png_base64", ""), validate=True)
        except (binascii.Error, TypeError, ValueError):
            raise _fail("figure data is not base64", "figure.png_base64", None, "base64 text") from None
        return cls(png, data.get("caption", ""), data.get("alt", ""), data.get("width_fraction", 1.0))


def as_sentences(items: Sequence[str]) -> str:
    """Plain-words notes as one text: each ends with a full stop, and one that opens with a plain
    lower-case word starts with a capital (a note opening with a name, "pKa[...]" or "log10k[...]",
    keeps it as written)."""
    out = []
    for item in items:
        text = item.strip()
        if re.match(r"[a-z]+\s", text):
            text = text[0].upper() + text[1:]
        out.append(text if text.endswith(".") else text + ".")
    return " ".join(out)


@dataclass
class Callout:
    """A highlighted box: ``kind`` is one of :data:`CALLOUT_KINDS`."""

    kind: str
    title: str
    text: str
    block_kind: ClassVar[str] = "callout"

    def __post_init__(self) -> None:
        if self.kind not in CALLOUT_KINDS:
            raise _fail("unknown callout kind", "callout.kind", self.kind,
                        "one of " + ", ".join(CALLOUT_KINDS))
        self.title = _text(self.title, "callout.title")
        self.text = _text(self.text, "callout.text", allow_empty=True)

    @property
    def heading(self) -> str:
        return CALLOUT_KINDS[self.kind]

    def to_dict(self) -> dict[str, Any]:
        return {"block": self.block_kind, "kind": self.kind, "title": self.title, "text": self.text}

    @classmethod
    def from_dict(cls, data: Mapping[str, Any]) -> "Callout":
        return cls(data.get("kind"), data.get("title"), data.get("text", ""))


@dataclass
class BulletList:
    """An unordered list of plain-text items."""

    items: list[str]
    block_kind: ClassVar[str] = "bullets"

    def __post_init__(self) -> None:
        self.items = [_text(t, f"bullets.items[{i}]") for i, t in enumerate(self.items)]

    def to_dict(self) -> dict[str, Any]:
        return {"block": self.block_kind, "items": list(self.items)}

    @classmethod
    def from_dict(cls, data: Mapping[str, Any]) -> "BulletList":
        return cls(list(data.get("items", [])))


Block = Union[Paragraph, KeyValues, Table, Figure, Callout, BulletList]

#: Block types by their ``kind`` tag; drives :meth:`Section.from_dict` and the renderers.
BLOCK_TYPES: Mapping[str, type] = MappingProxyType({
    t.block_kind: t for t in (Paragraph, KeyValues, Table, Figure, Callout, BulletList)
})
