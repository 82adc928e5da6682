"""HTML rendering: one self-contained file (inline CSS, images as data URIs).

The page needs no network and no script: it opens from an e-mail attachment
or a document-management system and prints cleanly (print CSS: A4 pages,
headings kept with their content, table headers repeated).
"""

from __future__ import annotations

import base64
import os
from functools import lru_cache
from pathlib import Path

import jinja2

from speciakin.report._io import atomic_write_text
from speciakin.report.document import REPRODUCE_LABEL, REPRODUCE_NOTE, RESERVED_ANCHORS, Figure, ReportDocument, Table

__all__ = ["SUMMARY_TITLE", "SUMMARY_ANCHOR", "html_text", "render_html"]

SUMMARY_TITLE = "Decision summary"
SUMMARY_ANCHOR = RESERVED_ANCHORS[0]
_TEMPLATE = "report.html.j2"


@lru_cache(maxsize=1)
def _environment() -> jinja2.Environment:
    return jinja2.Environment(
        loader=jinja2.FileSystemLoader(str(Path(__file__).parent / "templates")),
        autoescape=True,
        undefined=jinja2.StrictUndefined,
        trim_blocks=False,
        lstrip_blocks=False,
    )


def _data_uri(figure: Figure) -> str:
    return "data:image/png;base64," + base64.b64encode(figure.image_bytes()).decode("ascii")


def _is_number(value: object) -> bool:
    return isinstance(value, (int, float)) and not isinstance(value, bool)


def _numeric_column(table: Table, index: int) -> bool:
    cells = [row[index] for row in table.rows if row[index] is not None]
    return bool(cells) and all(_is_number(c) for c in cells)


def html_text(doc: ReportDocument) -> str:
    """The complete HTML page of ``doc`` as text.

    The decision callouts come first (a summary box), followed by warning and
    caution callouts, the table of contents and the sections in order.
    """
    template = _environment().get_template(_TEMPLATE)
    alerts = doc.alerts()
    return template.render(
        doc=doc,
        decisions=doc.callouts("decision"),
        alerts=alerts,
        summary_title=SUMMARY_TITLE,
        reproduce_label=REPRODUCE_LABEL,
        reproduce_note=REPRODUCE_NOTE,
        summary_anchor=SUMMARY_ANCHOR,
        data_uri=_data_uri,
        is_number=_is_number,
        numeric_column=_numeric_column,
    )


def render_html(doc: ReportDocument, path: str | os.PathLike) -> Path:
    """Write ``doc`` as one self-contained HTML file at ``path`` (atomically); returns the path."""
    return atomic_write_text(path, html_text(doc))
