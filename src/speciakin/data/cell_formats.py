"""Number formats of workbook cells: which cells show a percentage.

A ``%`` in a cell's number format shows the stored number times 100 (a cell
shown as 40.59 % stores 0.4059); the sheet readers decide what such a number
means (``import_hplc`` reads an area% value as the percentage shown) and the
importer notes every such cell once per sheet.
"""

from __future__ import annotations

import re

__all__ = ["percent_format", "percent_styles", "values_noting_percent"]

_QUOTED = re.compile(r'"[^"]*"|\\.|\[[^\]]*\]')


def percent_format(number_format: str | None) -> bool:
    """True when a cell number format shows the number times 100 with a percent sign.

    A ``%`` outside quoted text, backslash escapes and bracketed codes scales
    the displayed number by 100 (ECMA-376 Part 1, 18.8.31 numFmts; built-in
    formats 9 ``0%`` and 10 ``0.00%``, 18.8.30), so the workbook stores a
    cell shown as 40.59 % as 0.4059.  ``0.00"%"`` shows a literal sign without
    scaling.
    """
    if not number_format or "%" not in number_format:
        return False
    return "%" in _QUOTED.sub("", number_format)


def percent_styles(wb) -> set[int]:
    """Indices of the workbook's cell styles whose number format is a percentage (:func:`percent_format`)."""
    from openpyxl.styles.numbers import BUILTIN_FORMATS, BUILTIN_FORMATS_MAX_SIZE

    found: set[int] = set()
    try:
        styles = wb._cell_styles
        custom = wb._number_formats
    except AttributeError:
        return found
    for index, style in enumerate(styles):
        fmt_id = getattr(style, "numFmtId", 0)
        try:
            fmt = (BUILTIN_FORMATS.get(fmt_id) if fmt_id < BUILTIN_FORMATS_MAX_SIZE
                   else custom[fmt_id - BUILTIN_FORMATS_MAX_SIZE])
        except (IndexError, TypeError):
            continue
        if percent_format(fmt):
            found.add(index)
    return found


def values_noting_percent(ws, styles: set[int], percent: set[tuple[int, int]]):
    """Rows of values of a read-only worksheet (openpyxl's reader), noting in ``percent`` the
    (row, 0-based column) of numbers in cells whose style is in ``styles``."""
    for number, row in enumerate(ws.iter_rows(), start=1):
        values = []
        for col, cell in enumerate(row):
            value = getattr(cell, "value", None)
            values.append(value)
            if (styles and isinstance(value, (int, float)) and not isinstance(value, bool)
                    and getattr(cell, "_style_id", 0) in styles):
                percent.add((number, col))
        yield tuple(values)
