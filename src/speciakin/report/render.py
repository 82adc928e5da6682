"""Registry of report formats and one entry point that dispatches on it."""

from __future__ import annotations

import os
from dataclasses import dataclass
from pathlib import Path
from types import MappingProxyType
from typing import Callable, Mapping

from speciakin.errors import InputError, Location
from speciakin.report.document import ReportDocument

__all__ = ["ReportFormat", "REPORT_FORMATS", "render", "render_all"]


@dataclass(frozen=True)
class ReportFormat:
    """One rendering: file suffix, description and the function that writes it."""

    name: str
    suffix: str
    description: str
    writer: Callable[[ReportDocument, str | os.PathLike], Path]


def _html(doc, path):
    from speciakin.report.html import render_html

    return render_html(doc, path)


def _pdf(doc, path):
    from speciakin.report.pdf import render_pdf

    return render_pdf(doc, path)


def _xlsx(doc, path):
    from speciakin.report.xlsx import render_xlsx

    return render_xlsx(doc, path)


#: Every report format.  The CLI option choices and the docs read this table.
REPORT_FORMATS: Mapping[str, ReportFormat] = MappingProxyType({
    f.name: f for f in (
        ReportFormat("html", ".html", "one self-contained web page (prints on A4)", _html),
        ReportFormat("pdf", ".pdf", "A4 document with numbered pages", _pdf),
        ReportFormat("xlsx", ".xlsx", "workbook: summary sheet and one sheet per table", _xlsx),
    )
})


def render(doc: ReportDocument, path: str | os.PathLike, format: str | None = None) -> Path:
    """Write ``doc`` to ``path`` in ``format`` (default: from the file suffix).

    Raises
    ------
    InputError
        For an unknown format or suffix; the message lists the accepted ones.
    """
    target = Path(path)
    if format is None:
        by_suffix = {f.suffix: f for f in REPORT_FORMATS.values()}
        chosen = by_suffix.get(target.suffix.lower())
        if chosen is None:
            raise InputError("unknown report file type", Location(file=str(target)), target.suffix or "(none)",
                             "one of " + ", ".join(by_suffix))
    else:
        chosen = REPORT_FORMATS.get(format)
        if chosen is None:
            raise InputError("unknown report format", Location(key="format"), format,
                             "one of " + ", ".join(REPORT_FORMATS))
    return chosen.writer(doc, target)


def render_all(doc: ReportDocument, folder: str | os.PathLike, stem: str = "report",
               formats: tuple[str, ...] | None = None) -> dict[str, Path]:
    """Write ``doc`` in several formats into ``folder`` as ``<stem><suffix>``."""
    chosen = formats or tuple(REPORT_FORMATS)
    unknown = [name for name in chosen if name not in REPORT_FORMATS]
    if unknown:
        raise InputError("unknown report format", Location(key="formats"), ", ".join(unknown),
                         "one of " + ", ".join(REPORT_FORMATS))
    return {name: render(doc, Path(folder) / f"{stem}{REPORT_FORMATS[name].suffix}", name) for name in chosen}
