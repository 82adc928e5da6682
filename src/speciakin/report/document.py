"""The report document: plain sections of blocks, no science.

Every part of speciakin that wants to say something in a report builds a
:class:`ReportDocument` out of the blocks of :mod:`speciakin.report.blocks`;
the renderers (:mod:`speciakin.report.html`, :mod:`speciakin.report.pdf`,
:mod:`speciakin.report.xlsx`) only know these blocks.  A document round-trips
through :meth:`ReportDocument.to_dict` / :meth:`ReportDocument.from_dict`
(figures as base64) so that a report can be rendered again later without
re-running a fit.  The block types are re-exported here.
"""

from __future__ import annotations

import json
import os
import re
from dataclasses import dataclass, field
from datetime import datetime, timezone
from pathlib import Path
from typing import Any, Iterator, Mapping

from speciakin import __version__
from speciakin.errors import InputError, Location
from speciakin.report import blocks as _blocks
from speciakin.report.blocks import (
    BLOCK_TYPES,
    CALLOUT_KINDS,
    PNG_SIGNATURE,
    RESERVED_ANCHORS,
    Block,
    BulletList,
    Callout,
    Cell,
    Figure,
    KeyValues,
    Paragraph,
    Table,
    _fail,
    _text,
    format_cell,
    slugify,
)

#: The document's own names, and the block names re-exported from :mod:`speciakin.report.blocks`.
__all__ = ["Section", "ReportDocument", "save_document", "load_document", "REPRODUCE_LABEL", "REPRODUCE_NOTE",
           *(name for name in _blocks.__all__ if name != "Block")]

#: Label of the recorded command, and the note beside it in every format (its paths are relative to the
#: report's folder: no absolute path in a report).
REPRODUCE_LABEL = "Reproduce with"
REPRODUCE_NOTE = "paths from the folder of this report"


@dataclass
class Section:
    """A titled part of the report; ``anchor`` defaults to a slug of the title."""

    title: str
    blocks: list[Block] = field(default_factory=list)
    anchor: str = ""

    def __post_init__(self) -> None:
        self.title = _text(self.title, "section.title")
        self.anchor = slugify(self.anchor or self.title)
        for i, block in enumerate(self.blocks):
            if type(block) not in BLOCK_TYPES.values():
                raise _fail("not a report block", f"section '{self.title}'.blocks[{i}]",
                            type(block).__name__, ", ".join(t.__name__ for t in BLOCK_TYPES.values()))

    def to_dict(self) -> dict[str, Any]:
        return {"title": self.title, "anchor": self.anchor, "blocks": [b.to_dict() for b in self.blocks]}

    @classmethod
    def from_dict(cls, data: Mapping[str, Any]) -> "Section":
        if not isinstance(data, Mapping):
            raise _fail("a section must be a mapping", "sections[]", type(data).__name__, "a JSON object")
        blocks = []
        for i, b in enumerate(data.get("blocks", [])):
            kind = b.get("block") if isinstance(b, Mapping) else None
            if kind not in BLOCK_TYPES:
                raise _fail("unknown block type", f"sections['{data.get('title')}'].blocks[{i}].block", kind,
                            "one of " + ", ".join(BLOCK_TYPES))
            try:
                blocks.append(BLOCK_TYPES[kind].from_dict(b))
            except (TypeError, AttributeError, ValueError) as exc:
                raise _fail(f"malformed {kind} block: {exc}", f"sections['{data.get('title')}'].blocks[{i}]",
                            None, f"the fields written by {BLOCK_TYPES[kind].__name__}.to_dict") from None
        return cls(data.get("title"), blocks, data.get("anchor", ""))


def _now_iso() -> str:
    return datetime.now(timezone.utc).replace(microsecond=0).isoformat()


@dataclass
class ReportDocument:
    """One report, independent of its rendering.

    Parameters
    ----------
    title, subtitle
        Shown on the title block.
    sections
        In reading order.  Anchors are made unique (``-2``, ``-3``... appended).
    created
        ISO 8601 timestamp (default: now, UTC).
    software_version
        speciakin version that made the numbers.
    command
        Command line that reproduces the report.
    tables_for_workbook
        Tables that become sheets of the XLSX rendering (parameters,
        intervals, correlation, data with fitted values and residuals,
        window, ...).
    """

    title: str
    sections: list[Section] = field(default_factory=list)
    subtitle: str = ""
    created: str = field(default_factory=_now_iso)
    software_version: str = __version__
    command: str = ""
    tables_for_workbook: list[Table] = field(default_factory=list)

    def __post_init__(self) -> None:
        self.title = _text(self.title, "report.title")
        try:
            datetime.fromisoformat(self.created)
        except (TypeError, ValueError):
            raise _fail("created is not an ISO 8601 timestamp", "report.created", self.created,
                        "e.g. 2026-05-04T10:30:00+00:00") from None
        seen: dict[str, int] = {a: 1 for a in RESERVED_ANCHORS}
        for section in self.sections:
            if not isinstance(section, Section):
                raise _fail("not a report section", "report.sections", type(section).__name__, "Section")
            base = section.anchor
            if base in seen:
                seen[base] += 1
                section.anchor = f"{base}-{seen[base]}"
            else:
                seen[base] = 1
        for i, table in enumerate(self.tables_for_workbook):
            if not isinstance(table, Table):
                raise _fail("not a table", f"report.tables_for_workbook[{i}]", type(table).__name__, "Table")

    def blocks(self, block_kind: str | None = None) -> Iterator[tuple[Section, Block]]:
        """Every (section, block) pair in reading order, optionally of one ``block_kind``."""
        for section in self.sections:
            for block in section.blocks:
                if block_kind is None or block.block_kind == block_kind:
                    yield section, block

    def callouts(self, kind: str) -> list[Callout]:
        """Callouts of one kind (``"decision"``, ``"warning"``...) in reading order."""
        if kind not in CALLOUT_KINDS:
            raise _fail("unknown callout kind", "callout.kind", kind, "one of " + ", ".join(CALLOUT_KINDS))
        return [b for _, b in self.blocks("callout") if b.kind == kind]

    def alerts(self) -> list[Callout]:
        """The warning and caution callouts as the first page gathers them, in reading order: a sentence an
        earlier one already says is left out (the sampler's own warnings are also among those of the fit and
        the posterior), and a callout with nothing left is dropped; the sections keep theirs whole."""
        said: set[str] = set()
        found: list[Callout] = []
        for block in self.callouts("warning") + self.callouts("caution"):
            sentences = _sentences(block.text)
            new = [s for s in sentences if s not in said]
            said.update(sentences)
            if len(new) == len(sentences):
                found.append(block)
            elif new:
                found.append(Callout(block.kind, block.title, " ".join(new)))
        return found

    def outline(self) -> str:
        """Plain-text table of contents (stable headings), for logs and checks."""
        lines = [self.title, "=" * len(self.title)]
        lines += [f"{i}. {s.title}" for i, s in enumerate(self.sections, 1)]
        if self.tables_for_workbook:
            lines.append("Workbook sheets: " + ", ".join(t.title for t in self.tables_for_workbook))
        return "\n".join(lines)

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready dictionary (figures as base64 PNG)."""
        return {
            "title": self.title, "subtitle": self.subtitle, "created": self.created,
            "software_version": self.software_version, "command": self.command,
            "sections": [s.to_dict() for s in self.sections],
            "tables_for_workbook": [t.to_dict() for t in self.tables_for_workbook],
        }

    @classmethod
    def from_dict(cls, data: Mapping[str, Any]) -> "ReportDocument":
        if not isinstance(data, Mapping):
            raise _fail("a report document must be a mapping", "report", type(data).__name__, "a JSON object")
        return cls(
            title=data.get("title"),
            sections=[Section.from_dict(s) for s in data.get("sections", [])],
            subtitle=data.get("subtitle", ""),
            created=data.get("created", _now_iso()),
            software_version=data.get("software_version", __version__),
            command=data.get("command", ""),
            tables_for_workbook=[Table.from_dict(t) for t in data.get("tables_for_workbook", [])],
        )

    def to_json(self) -> str:
        return json.dumps(self.to_dict(), indent=1, allow_nan=True)

    @classmethod
    def from_json(cls, text: str, source: str | None = None) -> "ReportDocument":
        try:
            data = json.loads(text)
        except json.JSONDecodeError as exc:
            raise InputError(f"not a report document: {exc.msg}", Location(file=source, line=exc.lineno),
                             expected="JSON written by ReportDocument.to_json") from None
        return cls.from_dict(data)


def save_document(doc: ReportDocument, path: str | os.PathLike) -> Path:
    """Write ``doc`` as JSON (figures embedded) atomically, to render again later."""
    from speciakin.report._io import atomic_write_text

    return atomic_write_text(path, doc.to_json())


def load_document(path: str | os.PathLike) -> ReportDocument:
    """Read a document written by :func:`save_document`.

    Raises
    ------
    InputError
        If the file is missing, unreadable or not a report document.
    """
    source = Path(path)
    try:
        text = source.read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError) as exc:
        raise InputError(f"cannot read report document: {getattr(exc, 'strerror', None) or exc}",
                         Location(file=str(source)), expected="a JSON file written by save_document") from None
    return ReportDocument.from_json(text, source=str(source))


def _sentences(text: str) -> list[str]:
    """The sentences of a callout's text (split after a full stop followed by white space)."""
    return [part for part in re.split(r"(?<=[.!?])\s+", text.strip()) if part]
