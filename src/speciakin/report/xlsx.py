"""XLSX rendering with openpyxl: a summary sheet, then one sheet per table.

The workbook is meant for the reader who wants to recompute or re-plot:
numbers are stored as numbers (formatted for display, not converted to
text), headers carry units in brackets, the header row is frozen and has a
filter, and column widths follow the content.
"""

from __future__ import annotations

import io
import math
import os
import re
from pathlib import Path

from speciakin._cells import guard_workbook
from speciakin.report._io import atomic_write_bytes
from speciakin.report.document import REPRODUCE_LABEL, REPRODUCE_NOTE, Cell, ReportDocument, Table, format_cell

__all__ = ["SUMMARY_SHEET", "render_xlsx", "xlsx_bytes", "excel_number_format", "sheet_names"]

SUMMARY_SHEET = "summary"
_MAX_SHEET = 31  # Excel limit on sheet-name length
_FORBIDDEN = re.compile(r"[\[\]:*?/\\]")
_HEADER_FILL = "F3F5F7"


def excel_number_format(spec: str | None) -> str:
    """Excel display format for a Python format spec (``".3f"`` -> ``"0.000"``).

    Fixed (``f``), scientific (``e``) and percent (``%``) specs with a
    precision are translated; anything else shows as ``General``.
    """
    match = re.fullmatch(r"[<>^=]?[+\- ]?(,)?\.(\d+)([efEF%])", spec or "")
    if not match:
        return "General"
    grouping, digits, kind = match.group(1), int(match.group(2)), match.group(3).lower()
    decimals = "." + "0" * digits if digits else ""
    if kind == "f":
        return ("#,##0" if grouping else "0") + decimals
    if kind == "e":
        return "0" + decimals + "E+00"
    return "0" + decimals + "%"


def sheet_names(tables: list[Table]) -> list[str]:
    """Valid, unique sheet names for ``tables`` (the summary sheet name is reserved)."""
    used = {SUMMARY_SHEET.lower()}
    names = []
    for table in tables:
        base = _FORBIDDEN.sub("_", table.sheet_name or table.title).strip("' ") or "table"
        base = base[:_MAX_SHEET]
        name, n = base, 1
        while name.lower() in used:
            n += 1
            suffix = f" ({n})"
            name = base[: _MAX_SHEET - len(suffix)] + suffix
        used.add(name.lower())
        names.append(name)
    return names


def _value(cell: Cell):
    """What goes into the spreadsheet cell: numbers stay numbers; NaN/inf become text."""
    if isinstance(cell, float) and not math.isfinite(cell):
        return format_cell(cell)
    return cell


def _width(texts: list[str]) -> float:
    return float(min(60, max(8, max((len(t) for t in texts), default=8) + 2)))


def _write_table(ws, table: Table) -> None:
    from openpyxl.styles import Alignment, Font, PatternFill
    from openpyxl.utils import get_column_letter

    headers = table.headers()
    ws.append(headers)
    for cell in ws[1]:
        cell.font = Font(bold=True)
        cell.fill = PatternFill("solid", fgColor=_HEADER_FILL)
        cell.alignment = Alignment(wrap_text=True, vertical="top")
    formats = [excel_number_format(f) for f in table.formats]
    for number, row in enumerate(table.rows, start=2):  # the header is row 1 (ws.max_row scans every cell)
        ws.append([_value(c) for c in row])
        for i, value in enumerate(row):
            if isinstance(value, float) and math.isfinite(value):
                ws.cell(row=number, column=i + 1).number_format = formats[i]
    texts = table.formatted_rows()
    for i, header in enumerate(headers):
        ws.column_dimensions[get_column_letter(i + 1)].width = _width([header] + [r[i] for r in texts])
    ws.freeze_panes = "A2"
    if table.rows:
        ws.auto_filter.ref = f"A1:{get_column_letter(len(headers))}{len(table.rows) + 1}"


def _write_summary(ws, doc: ReportDocument, names: list[str]) -> None:
    from openpyxl.styles import Alignment, Font

    bold = Font(bold=True)
    wrap = Alignment(wrap_text=True, vertical="top")

    def heading(text: str) -> None:
        ws.append([])
        ws.append([text])
        ws.cell(row=ws.max_row, column=1).font = Font(bold=True, size=12)

    ws.append([doc.title])
    ws.cell(row=1, column=1).font = Font(bold=True, size=14)
    if doc.subtitle:
        ws.append([doc.subtitle])
    for label, value in (("Created", doc.created), ("Software", f"speciakin {doc.software_version}"),
                         (f"{REPRODUCE_LABEL} ({REPRODUCE_NOTE})", doc.command or None)):
        if value:
            ws.append([label, value])
            ws.cell(row=ws.max_row, column=1).font = bold
    for kind, title in (("decision", "Decision"), ("warning", "Warnings"), ("caution", "Cautions")):
        callouts = doc.callouts(kind)
        if not callouts and kind != "decision":
            continue
        heading(title)
        if not callouts:
            ws.append(["", "This report states no decision."])
        for block in callouts:
            ws.append([block.title, block.text])
            ws.cell(row=ws.max_row, column=1).font = bold
            ws.cell(row=ws.max_row, column=2).alignment = wrap
    key_values = list(doc.blocks("key_values"))
    if key_values:
        heading("Key values")
        for section, block in key_values:
            for label, value in block.rows:
                ws.append([label, _value(value), section.title])
    if doc.tables_for_workbook:
        heading("Sheets")
        for name, table in zip(names, doc.tables_for_workbook):
            ws.append([name, table.title + (f" \u2014 {table.note}" if table.note else "")])
    ws.column_dimensions["A"].width = 34
    ws.column_dimensions["B"].width = 90
    ws.column_dimensions["C"].width = 28


def xlsx_bytes(doc: ReportDocument) -> bytes:
    """The complete workbook of ``doc`` as bytes."""
    from openpyxl import Workbook

    workbook = Workbook()
    summary = workbook.active
    summary.title = SUMMARY_SHEET
    names = sheet_names(doc.tables_for_workbook)
    _write_summary(summary, doc, names)
    for name, table in zip(names, doc.tables_for_workbook):
        _write_table(workbook.create_sheet(name), table)
    workbook.properties.title = doc.title
    workbook.properties.creator = f"speciakin {doc.software_version}"
    guard_workbook(workbook)  # texts such as '=1+2' stay text
    buffer = io.BytesIO()
    workbook.save(buffer)
    return buffer.getvalue()


def render_xlsx(doc: ReportDocument, path: str | os.PathLike) -> Path:
    """Write ``doc`` as an XLSX workbook at ``path`` (atomically); returns the path."""
    return atomic_write_bytes(path, xlsx_bytes(doc))
