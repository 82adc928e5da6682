"""Report layer: one document, rendered as HTML, PDF and XLSX, plus the plot style.

Build a :class:`ReportDocument` from plain sections and blocks, then call
:func:`render` (or a renderer directly).  Figures come from
:mod:`speciakin.report.figures` and share one :class:`SpeciesColors`.
"""

from speciakin.report.document import (
    BLOCK_TYPES,
    CALLOUT_KINDS,
    BulletList,
    Callout,
    Figure,
    KeyValues,
    Paragraph,
    ReportDocument,
    Section,
    Table,
    format_cell,
    load_document,
    save_document,
)
from speciakin.palette import OKABE_ITO, SpeciesColors
from speciakin.report.render import REPORT_FORMATS, render, render_all
from speciakin.report.texts import assumptions_section, cautions_section

__all__ = [
    "BLOCK_TYPES",
    "CALLOUT_KINDS",
    "BulletList",
    "Callout",
    "Figure",
    "KeyValues",
    "Paragraph",
    "ReportDocument",
    "Section",
    "Table",
    "format_cell",
    "load_document",
    "save_document",
    "OKABE_ITO",
    "SpeciesColors",
    "REPORT_FORMATS",
    "render",
    "render_all",
    "assumptions_section",
    "cautions_section",
]
