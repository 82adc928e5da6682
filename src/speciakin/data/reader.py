"""Read campaign sheets from an XLSX workbook or a folder of CSV files.

Files are read once into memory (the bytes are hashed for provenance) and
never opened for writing.  Every cell keeps its spreadsheet position so that
messages can point at it: ``row`` is the row number the spreadsheet program
shows (header = row 1), columns are named by letter and header text.

Large logs: openpyxl's read-only streaming mode with ``values_only`` yields
plain tuples; numeric columns are converted with one numpy call when they are
clean and cell by cell only when something needs reporting.
"""

from __future__ import annotations

import csv
import hashlib
import html
import io
import math
import re
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from speciakin._cells import unguard_csv_text
from speciakin.data.cell_formats import percent_styles, values_noting_percent
from speciakin.data.file_kinds import column_index, decode_csv, formulas_without_result, workbook_kind_problem
from speciakin.errors import DataError, Location, ProblemCollector

__all__ = ["RawTable", "SourceFile", "read_workbook", "read_csv_folder", "column_letter",
           "numeric_column", "text_column", "is_blank"]


@dataclass(frozen=True)
class SourceFile:
    """Provenance of one input file.

    Attributes
    ----------
    path
        Path as given (string).
    sheets
        Sheet names read from it (the CSV file's sheet for a CSV).
    sha256
        SHA-256 hex digest of the file's bytes.
    size
        Size [bytes].
    """

    path: str
    sheets: tuple[str, ...]
    sha256: str
    size: int

    def to_dict(self) -> dict[str, Any]:
        return {"path": self.path, "sheets": list(self.sheets), "sha256": self.sha256, "size": self.size}


@dataclass
class RawTable:
    """Cells of one sheet below its header row.

    ``rows[i]`` is a tuple of cell values (None for blank) at spreadsheet row
    ``row_numbers[i]``; fully blank rows are dropped.  ``formula_cells``
    lists (row, 0-based column, formula) of formulas without a stored result
    (read as blank); ``notes`` holds (message, code) remarks about the whole
    file as (severity, message, code), severity "fatal" meaning the sheet's
    columns cannot be trusted (cells shifted); ``comma_cells`` collects (row, 0-based column, text) of numbers
    written with a decimal comma as they are converted.  ``percent_cells`` holds (row, 0-based column)
    of the numbers in cells formatted as percentages (the workbook stores 40.59 % as 0.4059), and
    ``percent_read`` collects (row, 0-based column, stored number) of those a sheet reader took as
    the percentage shown (area%; the rest are read as stored, :func:`percent_format`).
    """

    file: str
    sheet: str
    headers: list[str]
    rows: list[tuple]
    row_numbers: np.ndarray
    formula_cells: list[tuple[int, int, str]] = field(default_factory=list)
    notes: list[tuple[str, str, str]] = field(default_factory=list)
    comma_cells: list[tuple[int, int, str]] = field(default_factory=list)
    percent_cells: set[tuple[int, int]] = field(default_factory=set)
    percent_read: list[tuple[int, int, float]] = field(default_factory=list)

    def location(self, row: int | None = None, column: int | None = None) -> Location:
        col = None
        if column is not None:
            col = f"{column_letter(column)} ({self.headers[column]})"
        return Location(file=self.file, sheet=self.sheet, row=row, column=col)

    def column_values(self, index: int) -> list:
        return [r[index] if index < len(r) else None for r in self.rows]


def column_letter(index: int) -> str:
    """0-based column index -> spreadsheet letters (0 -> A, 26 -> AA)."""
    letters = ""
    n = index + 1
    while n:
        n, rem = divmod(n - 1, 26)
        letters = chr(65 + rem) + letters
    return letters


def is_blank(value: Any) -> bool:
    return value is None or (isinstance(value, str) and not value.strip())


def _hash(data: bytes) -> str:
    return hashlib.sha256(data).hexdigest()


def _table(file: str, sheet: str, raw_rows) -> RawTable:
    it = iter(raw_rows)
    header_row = next(it, None)
    headers = ["" if is_blank(h) else str(h).strip() for h in (header_row or ())]
    while headers and headers[-1] == "":
        headers.pop()
    width = len(headers)
    rows: list[tuple] = []
    numbers: list[int] = []
    pad = (None,) * width
    for number, row in enumerate(it, start=2):
        row = tuple(row[:width]) if len(row) >= width else tuple(row) + pad[len(row):]
        # cheap test first: any() is False for rows of None and ''; whitespace-only cells need a closer look
        first = row[0] if row else None
        if not any(row) or ((first is None or (type(first) is str and not first.strip()))
                            and all(is_blank(v) for v in row)):
            continue
        rows.append(row)
        numbers.append(number)
    return RawTable(file, sheet, headers, rows, np.asarray(numbers, dtype=np.int64))


# One cell of the sheet XML, attributes in the order Excel, LibreOffice and openpyxl write them
# (r, s, t).  Groups: column letters, row, style, type, cached value, inline-string body.
_CELL = re.compile(
    rb'<c r="([A-Z]{1,3})(\d+)"(?: s="(\d+)")?(?: t="(\w+)")?(?: [^>]*?)?'
    rb'(?:/>|>(?:<f(?:[^>]*?/>|[^>]*>.*?</f>))?(?:<v>([^<]*)</v>|<v ?/>)?(?:<is>(.*?)</is>)?</c>)', re.S)
_CELL_START = re.compile(rb"<c[ >/]")
_TEXT = re.compile(rb"<t(?:\s[^>]*)?>(.*?)</t>", re.S)


def fast_sheet_rows(ws, percent: set[tuple[int, int]] | None = None,
                    styles: set[int] | None = None) -> list[tuple] | None:
    """Cell values of a read-only openpyxl worksheet by scanning its XML once.

    With ``percent`` and ``styles`` (:func:`percent_styles`), the (row,
    0-based column) of every number in a cell of one of those styles is
    added to ``percent``.

    openpyxl's streaming reader builds several Python objects per cell; for
    logs of 10^5 rows this scan is several times faster.  It returns None
    (the caller then uses openpyxl's own reader) whenever the sheet holds
    anything it does not handle exactly like openpyxl with ``data_only=True``:
    a cell the pattern does not match (other attribute order, prefixed XML
    names), date-formatted numbers, ISO date cells, or openpyxl internals that
    are not where expected.
    """
    try:
        with ws._get_source() as source:
            data = source.read()
        shared = ws._shared_strings
        date_styles = ws.parent._date_formats
    except (AttributeError, KeyError, OSError):
        return None
    cells = _CELL.findall(data)
    if len(cells) != len(_CELL_START.findall(data)):
        return None
    rows: dict[int, dict[int, Any]] = {}
    letters_cache: dict[bytes, int] = {}
    unescape = html.unescape
    for letters, row_text, style, kind, raw, inline in cells:
        if kind == b"" or kind == b"n":
            if not raw:
                continue
            if style:
                style_index = int(style)
                if style_index in date_styles:
                    return None
                if styles and style_index in styles and percent is not None:
                    percent.add((int(row_text), column_index(letters)))
            value: Any = float(raw)
        elif kind == b"s":
            if not raw:
                continue
            value = shared[int(raw)]
        elif kind == b"inlineStr":
            value = unescape(b"".join(_TEXT.findall(inline)).decode("utf-8"))
        elif kind in (b"str", b"e"):
            value = unescape(raw.decode("utf-8"))
        elif kind == b"b":
            if not raw:
                continue
            value = raw.strip() == b"1"
        else:
            return None
        if value == "":
            continue  # openpyxl reads an empty text cell as None
        col = letters_cache.get(letters)
        if col is None:
            col = letters_cache[letters] = column_index(letters)
        rows.setdefault(int(row_text), {})[col] = value
    if not rows:
        return []
    width = max(max(r) for r in rows.values()) + 1
    out: list[tuple] = []
    empty = (None,) * width
    for number in range(1, max(rows) + 1):
        found = rows.get(number)
        if found is None:
            out.append(empty)
            continue
        row = [None] * width
        for col, value in found.items():
            row[col] = value
        out.append(tuple(row))
    return out


def read_workbook(path: Path) -> tuple[dict[str, RawTable], SourceFile]:
    """Read every sheet of an XLSX workbook.

    Raises
    ------
    DataError
        If the file cannot be read as a workbook.
    """
    import openpyxl  # heavy; imported on use
    from zipfile import BadZipFile

    try:
        data = path.read_bytes()
    except OSError as exc:
        raise DataError(f"cannot read workbook: {exc.strerror}", Location(file=str(path))) from None
    not_xlsx = workbook_kind_problem(data)
    if not_xlsx:
        raise DataError(not_xlsx, Location(file=str(path)), expected="a workbook saved as .xlsx without a password")
    try:
        wb = openpyxl.load_workbook(io.BytesIO(data), read_only=True, data_only=True)
    except (BadZipFile, KeyError, ValueError, OSError, TypeError, AttributeError, IndexError) as exc:
        raise DataError("not a readable XLSX workbook (" + (str(exc) or type(exc).__name__) + ")",
                        Location(file=str(path)), expected="a workbook saved as .xlsx") from None
    tables: dict[str, RawTable] = {}
    styles = percent_styles(wb)
    try:
        for ws in wb.worksheets:
            percent: set[tuple[int, int]] = set()
            rows = fast_sheet_rows(ws, percent, styles)
            if rows is None:
                percent.clear()
                rows = values_noting_percent(ws, styles, percent) if styles else ws.iter_rows(values_only=True)
            table = _table(str(path), ws.title, rows)
            table.percent_cells = percent
            table.formula_cells = formulas_without_result(ws)
            tables[ws.title] = table
    finally:
        wb.close()
    return tables, SourceFile(str(path), tuple(tables), _hash(data), len(data))


def read_csv_folder(folder: Path) -> tuple[dict[str, RawTable], list[SourceFile]]:
    """Read every ``*.csv`` file of ``folder``; the sheet name is the file stem."""
    tables: dict[str, RawTable] = {}
    sources: list[SourceFile] = []
    for path in sorted(folder.glob("*.csv")):
        try:
            data = path.read_bytes()
        except OSError as exc:
            raise DataError(f"cannot read CSV file: {exc.strerror}", Location(file=str(path))) from None
        try:
            text, notes = decode_csv(data)
        except ValueError as exc:
            raise DataError(str(exc), Location(file=str(path)), expected="a CSV text file") from None
        try:
            sample = text[:4096]
            delimiter = csv.Sniffer().sniff(sample, delimiters=",;\t").delimiter if sample.strip() else ","
        except csv.Error:
            delimiter = ","
        # only the delimiter is sniffed: the quote character is always '"' (a sniffed "'" would
        # swallow texts that our writers quote against formula execution, such as '=1+2)
        dialect = type("SniffedDialect", (csv.excel,), {"delimiter": delimiter})
        raw = _csv_rows_fast(text, dialect)
        if raw is None:
            try:
                raw = list(csv.reader(io.StringIO(text), dialect))
            except csv.Error as exc:
                raise DataError(f"cannot parse CSV file ({exc})", Location(file=str(path))) from None
        if "'" in text:  # texts guarded against formula execution by our writers: '=1+2 -> =1+2
            raw = [tuple(unguard_csv_text(v) for v in row) for row in raw]
        table = _table(str(path), path.stem, raw)
        table.notes = notes + _wide_rows(raw, len(table.headers), getattr(dialect, "delimiter", ","))
        tables[path.stem] = table
        sources.append(SourceFile(str(path), (path.stem,), _hash(data), len(data)))
    return tables, sources


def _wide_rows(raw: list, width: int, delimiter: str) -> list[tuple[str, str, str]]:
    """A fatal note when data rows hold more filled cells than the header row."""
    wide = [n for n, row in enumerate(raw[1:], start=2)
            if len(row) > width and any(not is_blank(v) for v in row[width:])]
    if not wide or width == 0:
        return []
    text = (f"{len(wide)} row(s) have more cells than the header row (first: row {wide[0]}), so the "
            "columns are shifted")
    if delimiter == ",":
        text += ("; the numbers seem to use decimal commas while commas also separate the cells: "
                 "export with ';' as the separator, or with decimal points")
    return [("fatal", text, "shifted_cells")]


def _csv_rows_fast(text: str, dialect) -> list[tuple] | None:
    """Rows of a CSV text via pandas' C parser (cells as text, blanks as None).

    Returns None (the caller then uses the csv module) for anything the fast
    path does not reproduce exactly: ragged rows, unusual dialects, parser
    errors or embedded line breaks.
    """
    import pandas as pd

    delimiter = getattr(dialect, "delimiter", ",")
    if getattr(dialect, "quotechar", '"') != '"' or "\r" in text or not text.strip():
        return None
    lines = text.split("\n")
    try:
        frame = pd.read_csv(io.StringIO(text), header=None, dtype=object, keep_default_na=False,
                            na_filter=False, sep=delimiter, engine="c", skip_blank_lines=False,
                            quotechar='"', doublequote=True)
    except (pd.errors.ParserError, ValueError, csv.Error):
        return None
    expected = len(lines) - (1 if lines[-1] == "" else 0)
    if len(frame) != expected:
        return None  # quoted line breaks or skipped lines: let the csv module decide
    values = frame.to_numpy(dtype=object)
    width = values.shape[1]
    # a row shorter than the widest one was padded: the csv module keeps it short (same blanks)
    values[values == ""] = None
    return [tuple(r) for r in values.tolist()] if width else None


def has_decimal_comma(value: Any) -> bool:
    """True for a text such as ``'7,5'``: one comma, no point (read as 7.5 everywhere)."""
    return isinstance(value, str) and value.count(",") == 1 and "." not in value


def to_float(value: Any) -> float | None:
    """One cell -> float, or None when it is not a number.

    The one rule for every sheet: a text with one comma and no point is a
    decimal comma (``'7,5'`` -> 7.5); callers note such cells once per file.
    """
    if isinstance(value, bool):
        return None
    if isinstance(value, (int, float, np.integer, np.floating)):
        return float(value)
    if isinstance(value, str):
        try:
            return float(value.strip().replace(",", ".") if has_decimal_comma(value) else value.strip())
        except ValueError:
            return None
    return None


_NUMBER_AND_UNIT = re.compile(r"^\s*[-+]?(\d+([.,]\d*)?|[.,]\d+)([eE][-+]?\d+)?\s*[^\d\s.,].*$")


def _expected_number(value: Any, header: str) -> str:
    """What a numeric cell should hold; a number written with a unit ('25 °C') is told that the
    header gives the unit."""
    if isinstance(value, str) and _NUMBER_AND_UNIT.match(value):
        if header and ("[" in header or "(" in header or "/" in header):
            return f"a number alone: the unit is the column header's ('{header.strip()}')"
        return "a number alone, without a unit" + (f" (see the column '{header.strip()}' in the Read me sheet)"
                                                  if header else "")
    return "a number"


def numeric_column(table: RawTable, index: int, collector: ProblemCollector, *,
                   what: str, factor: float = 1.0, offset: float = 0.0,
                   minimum: float | None = None, maximum: float | None = None,
                   blank_ok: bool = True, skip: np.ndarray | None = None) -> np.ndarray:
    """Convert column ``index`` to floats in internal units.

    Blank cells become NaN (an error when ``blank_ok`` is False).  Non-numeric,
    infinite or out-of-range cells are reported to ``collector`` with their
    location and become NaN.  ``minimum``/``maximum`` apply to the value as
    written (before conversion).  ``skip`` marks rows handled elsewhere
    (e.g. censored HPLC values).
    """
    values = table.column_values(index)
    n = len(values)
    if skip is None and bool not in set(map(type, values)):
        # one vectorised conversion; cells it cannot read (blank, text, '7,5') are looked at one by one
        import pandas as pd

        out = np.array(pd.to_numeric(pd.Series(values, dtype=object), errors="coerce"), dtype=float)
        todo = np.flatnonzero(np.isnan(out))
    else:
        out = np.full(n, np.nan)
        todo = range(n)
    for i in todo:
        if skip is not None and skip[i]:
            continue
        v = values[i]
        if is_blank(v):
            continue
        f = to_float(v)
        if f is not None and has_decimal_comma(v):
            table.comma_cells.append((int(table.row_numbers[i]), index, v))
        if f is None:
            collector.error(f"{what} is not a number", table.location(int(table.row_numbers[i]), index),
                            v, _expected_number(v, table.headers[index] if index < len(table.headers) else ""),
                            code="not_numeric")
        else:
            out[i] = f
    bad = ~np.isfinite(out)
    blank = np.zeros(n, bool)
    for i in np.flatnonzero(bad):
        blank[i] = is_blank(values[i])
    if skip is not None:
        blank |= skip
    for i in np.flatnonzero(bad & ~blank):
        v = values[i]
        if to_float(v) is not None and not math.isfinite(to_float(v)):
            collector.error(f"{what} is not a finite number", table.location(int(table.row_numbers[i]), index),
                            v, "a finite number", code="not_numeric")
    if not blank_ok:
        for i in np.flatnonzero(blank & (np.ones(n, bool) if skip is None else ~skip)):
            collector.error(f"{what} is missing", table.location(int(table.row_numbers[i]), index),
                            None, "a number", code="missing_value")
    out[~np.isfinite(out)] = np.nan
    if minimum is not None or maximum is not None:
        low = out < minimum if minimum is not None else np.zeros(n, bool)
        high = out > maximum if maximum is not None else np.zeros(n, bool)
        for i in np.flatnonzero(low | high):
            expected = (f"a number from {minimum:g} to {maximum:g}" if minimum is not None and maximum is not None
                        else f"a number >= {minimum:g}" if minimum is not None else f"a number <= {maximum:g}")
            code = "negative" if (minimum == 0 and maximum is None and low[i]) else "out_of_range"
            collector.error(f"{what} is out of range", table.location(int(table.row_numbers[i]), index),
                            values[i], expected, code=code)
            out[i] = np.nan
    if factor != 1.0 or offset != 0.0:
        out = out * factor + offset
    return out


def text_column(table: RawTable, index: int) -> list[str]:
    """Column ``index`` as stripped strings ('' for blank)."""
    return [v.strip() if type(v) is str else "" if v is None else
            str(int(v)) if isinstance(v, float) and v.is_integer() else str(v).strip()
            for v in table.column_values(index)]
