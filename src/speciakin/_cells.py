"""Text cells that never execute, shared by every CSV and XLSX writer.

A spreadsheet program reads a cell that starts with ``=``, ``+``, ``-`` or
``@`` (and, in some programs, a tab or carriage return) as a formula.  A run
or compound name such as ``=HYPERLINK("http://...")`` would then become a
live formula in an output table.  The usual guard (OWASP "CSV injection"):

* CSV: such a text gets a leading single quote (``'=1+2``), which the
  spreadsheet shows and does not evaluate.  :func:`unguard_csv_text` undoes
  it for files this project wrote, so round trips keep the text.
* XLSX: the cell is stored as text (never as a formula) with the
  ``quotePrefix`` style flag, so it stays text even when edited; the text
  itself is unchanged.

Numbers stay numbers: only ``str`` values are guarded (``-2.5`` as a float
is written as a number).
"""

from __future__ import annotations

from typing import Any

__all__ = ["FORMULA_TRIGGERS", "needs_guard", "csv_text", "unguard_csv_text", "guard_workbook",
           "has_carriage_return", "frame_csv_text", "frame_xlsx_bytes"]

#: First characters that make a spreadsheet program evaluate a cell.
FORMULA_TRIGGERS = ("=", "+", "-", "@", "\t", "\r")


def needs_guard(value: Any) -> bool:
    """True for a text that a spreadsheet program would read as a formula."""
    return isinstance(value, str) and value.startswith(FORMULA_TRIGGERS)


def csv_text(value: Any) -> Any:
    """The value to write into a CSV cell: a guarded text gets a leading ``'``."""
    return "'" + value if needs_guard(value) else value


def unguard_csv_text(value: Any) -> Any:
    """Undo :func:`csv_text` for a cell read back from a CSV file."""
    if isinstance(value, str) and value.startswith("'") and needs_guard(value[1:]):
        return value[1:]
    return value


def guard_workbook(workbook) -> int:
    """Store every formula-like text of an openpyxl ``workbook`` as quoted text.

    Call it once just before saving.  Returns the number of cells guarded.
    """
    count = 0
    for ws in workbook.worksheets:
        for row in ws.iter_rows():
            for cell in row:
                value = cell.value
                if needs_guard(value) or (cell.data_type == "f" and isinstance(value, str)):
                    cell.data_type = "s"
                    cell.quotePrefix = True
                    count += 1
    return count


def has_carriage_return(values) -> bool:
    """True when a text among ``values`` holds a carriage return: Python's csv
    writer (before 3.12) leaves such a field unquoted with a "\\n" line end,
    which splits the row for every reader, so the caller quotes it."""
    return any(isinstance(v, str) and "\r" in v for v in values)


def frame_csv_text(frame) -> str:
    """A pandas DataFrame as CSV text with guarded headers and text cells."""
    import csv

    out = frame.copy()
    out.columns = [csv_text(str(c)) for c in out.columns]
    quote = has_carriage_return(out.columns)
    for name in out.columns:
        if out[name].dtype == object or str(out[name].dtype).startswith(("string", "str")):
            out[name] = out[name].map(csv_text).astype(object)
            quote = quote or has_carriage_return(out[name])
    return out.to_csv(index=False, quoting=csv.QUOTE_NONNUMERIC if quote else csv.QUOTE_MINIMAL)


def frame_xlsx_bytes(frame, sheet_name: str = "Sheet1") -> bytes:
    """A pandas DataFrame as the bytes of an XLSX workbook whose texts never execute."""
    import io

    import pandas as pd

    buffer = io.BytesIO()
    with pd.ExcelWriter(buffer, engine="openpyxl") as writer:
        frame.to_excel(writer, index=False, sheet_name=sheet_name)
        guard_workbook(writer.book)
    return buffer.getvalue()
