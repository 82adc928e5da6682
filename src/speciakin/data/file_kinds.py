"""What kind of file a campaign source is, before and beside reading its cells.

* :func:`workbook_kind_problem`: password-protected workbooks, Excel 97-2003
  ``.xls``, text or HTML saved under ``.xlsx`` get one plain sentence;
* :func:`decode_csv`: UTF-8, UTF-16 and Windows-1252/Latin-1 CSV text, with a
  note for the latter two;
* :func:`formulas_without_result`: formula cells whose result was never
  stored (they would read as blank).
"""

from __future__ import annotations

import html
import re

__all__ = ["column_index", "workbook_kind_problem", "decode_csv", "formulas_without_result"]


def column_index(letters: bytes) -> int:
    """Spreadsheet column letters (ASCII bytes) -> 0-based index (b"A" -> 0, b"AA" -> 26)."""
    n = 0
    for ch in letters:
        n = n * 26 + (ch - 64)
    return n - 1


_OLE_MAGIC = b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1"
_ENCRYPTED_MARK = "EncryptedPackage".encode("utf-16-le")


def workbook_kind_problem(data: bytes) -> str | None:
    """A plain sentence when ``data`` is not an XLSX workbook we can read, else None.

    An XLSX file is a zip archive (starts with ``PK``); a password-protected
    workbook is an OLE container holding an ``EncryptedPackage`` stream; the
    Excel 97-2003 ``.xls`` format is an OLE container without it.
    """
    if data.startswith(_OLE_MAGIC):
        if _ENCRYPTED_MARK in data:
            return ("the workbook is password-protected (encrypted) and cannot be read; "
                    "remove the password (File > Info > Protect Workbook) or save an unprotected copy")
        return "this is an old Excel 97-2003 (.xls) workbook; open it and save it as .xlsx"
    if data[:5] == b"{\\rtf" or data.lstrip()[:1] == b"<":
        return "the file is not a workbook (it holds text or HTML); save it from the spreadsheet program as .xlsx"
    if not data.startswith(b"PK"):
        return "the file is not an XLSX workbook (not a zip archive); save it from the spreadsheet program as .xlsx"
    return None


_FORMULA_NO_VALUE = re.compile(
    rb'<c r="([A-Z]{1,3})(\d+)"[^>]*?(?<!/)>\s*<f(?:[^>]*?/>|[^>]*>(.*?)</f>)\s*(?:<v\s*/>|<v></v>)?\s*</c>', re.S)


def formulas_without_result(ws) -> list[tuple[int, int, str]]:
    """(row, 0-based column, formula) of formula cells that carry no stored result.

    A workbook written by a program that does not calculate (a script, some
    exporters) stores formulas without their values; read with
    ``data_only=True`` they look blank.  Returns [] when the sheet's XML is
    not reachable.
    """
    try:
        with ws._get_source() as source:
            data = source.read()
    except (AttributeError, KeyError, OSError):
        return []
    if b"<f" not in data:
        return []
    return [(int(row), column_index(letters), html.unescape((formula or b"").decode("utf-8", "replace")))
            for letters, row, formula in _FORMULA_NO_VALUE.findall(data)]


def decode_csv(data: bytes) -> tuple[str, list[tuple[str, str, str]]]:
    """Text of a CSV file and notes about its encoding.

    UTF-8 (with or without BOM) is read silently.  UTF-16 (as written by
    "Unicode text" exports) and Windows-1252/Latin-1 are read with one note
    each.  Raises ValueError for a file that is not text.
    """
    if data.startswith((b"\xff\xfe", b"\xfe\xff")) or (len(data) > 3 and data[1:2] == b"\x00" and data[3:4] == b"\x00"):
        try:
            text = data.decode("utf-16")
        except UnicodeDecodeError:
            raise ValueError("the file looks like UTF-16 text but does not decode; save it as 'CSV UTF-8'") from None
        return text.lstrip("\ufeff"), [("warning", "the file is UTF-16 text; it was read as such (saving as 'CSV UTF-8' "
                                         "is recommended)", "encoding")]
    if b"\x00" in data:
        raise ValueError("the file is not text (it holds NUL bytes); export the sheet as 'CSV UTF-8'")
    try:
        return data.decode("utf-8-sig"), []
    except UnicodeDecodeError:
        pass
    try:
        text = data.decode("cp1252")
    except UnicodeDecodeError:
        text = data.decode("latin-1")
    return text, [("warning", "the file is not UTF-8; it was read as Windows-1252/Latin-1 text (check accented names; "
                   "saving as 'CSV UTF-8' avoids this)", "encoding")]
