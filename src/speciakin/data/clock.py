"""Clock times and durations in the time columns of a campaign workbook.

A chemist often writes the time of day a sample was taken ("10:35") instead of
the minutes since the start.  The time columns (HPLC sampling time, probe and
titrant log times, dosing start and end) accept:

* a duration cell (an Excel duration such as ``[h]:mm`` = 0:35, read by the
  spreadsheet reader as a time span): the elapsed time itself;
* a clock time (an Excel time such as 10:35, a date and time, or the text
  ``"10:35"`` / ``"10:35:20"`` in a CSV file): elapsed time from the run's
  time zero, which is the **earliest clock time written for that run in any of
  these columns** (a probe-log reading at the start, or the dosing start).
  When the earliest clock time of a run is an HPLC sample, a warning says so
  (time zero is then the first sample, which is rarely right).

A run may not mix clock times with plain numbers; a run that goes past
midnight needs date-and-time cells.  The cells are replaced by numbers in
the column's unit before the sheets are read, so every later check applies.
"""

from __future__ import annotations

import datetime as dt
import re
from typing import Any

from speciakin.data.columns import SheetColumns
from speciakin.errors import ProblemCollector

__all__ = ["TIME_COLUMNS", "clock_seconds", "convert_clock_cells"]

#: (sheet key, column key) of every time column that accepts clock times.
TIME_COLUMNS = (("dosing", "start"), ("dosing", "end"), ("probe", "time"), ("titrant", "time"), ("hplc", "time"))
_CLOCK_TEXT = re.compile(r"^\s*(\d{1,2}):(\d{2})(?::(\d{2}(?:\.\d+)?))?\s*$")


def clock_seconds(value: Any) -> float | None:
    """Seconds after midnight of a clock-time cell, or None when it is not one.

    ``datetime.time`` and ``datetime.datetime`` cells and ``"hh:mm[:ss]"`` texts
    are clock times (a datetime also counts its date, so runs over midnight work).
    """
    if isinstance(value, dt.datetime):
        return (value - dt.datetime(1899, 12, 30)).total_seconds()
    if isinstance(value, dt.time):
        return value.hour * 3600.0 + value.minute * 60.0 + value.second + value.microsecond * 1e-6
    if isinstance(value, str):
        m = _CLOCK_TEXT.match(value)
        if m and int(m.group(1)) < 24 and int(m.group(2)) < 60:
            return int(m.group(1)) * 3600.0 + int(m.group(2)) * 60.0 + float(m.group(3) or 0.0)
    return None


def convert_clock_cells(matched: dict[str, SheetColumns], c: ProblemCollector) -> None:
    """Replace duration and clock-time cells of the time columns by elapsed
    time in the column's unit (in place); problems go to ``c``."""
    clocks: dict[str, list[tuple[float, str, SheetColumns, int, int]]] = {}
    numbers: dict[str, list[tuple[SheetColumns, int, int]]] = {}
    for sheet, key in TIME_COLUMNS:
        cols = matched.get(sheet)
        if cols is None or cols.index(key) is None or cols.index("run") is None:
            continue
        j, r = cols.index(key), cols.index("run")
        factor = cols.unit(key).factor if cols.unit(key) else 60.0
        for i, row in enumerate(cols.table.rows):
            value = row[j] if j < len(row) else None
            run = str(row[r]).strip() if r < len(row) and row[r] is not None else ""
            if isinstance(value, dt.timedelta):
                _set(cols, i, j, value.total_seconds() / factor)
                continue
            seconds = clock_seconds(value)
            if seconds is not None:
                clocks.setdefault(run, []).append((seconds, sheet, cols, i, j))
            elif value not in (None, ""):
                numbers.setdefault(run, []).append((cols, i, j))
    for run, cells in clocks.items():
        if run in numbers and len(cells) <= len(numbers[run]):
            # the few clock times are the slip: each is named where it is (and read no further)
            for _, _, cols, i, j in cells:
                c.error(f"run {run} mixes clock times and elapsed times: a clock time among "
                        f"{len(numbers[run])} elapsed time(s)", cols.table.location(int(cols.table.row_numbers[i]), j),
                        cols.table.rows[i][j], "an elapsed time (a number), as the run's other times",
                        code="mixed_times")
            continue
        if run in numbers:  # the few numbers are the slip; the clock times are read as usual
            for cols, i, j in numbers[run]:
                c.error(f"run {run} mixes clock times and elapsed times: a number among {len(cells)} clock "
                        "time(s)", cols.table.location(int(cols.table.row_numbers[i]), j), cols.table.rows[i][j],
                        "a clock time (such as 10:35), as the run's other times", code="mixed_times")
        zero, sheet, cols, i, j = min(cells, key=lambda x: x[0])
        if sheet == "hplc":
            c.warning(f"time zero of run {run} is its first HPLC sample (the earliest clock time written)",
                      cols.table.location(int(cols.table.row_numbers[i]), j), cols.table.rows[i][j],
                      "a clock time at the start of the run in the probe log or the Dosing sheet")
        for seconds, _, cols, i, j in cells:
            elapsed = seconds - zero
            _set(cols, i, j, elapsed / _unit_factor(cols, j))


def _unit_factor(cols: SheetColumns, j: int) -> float:
    for index, unit in cols.found.values():
        if index == j:
            return unit.factor if unit is not None else 60.0
    return 60.0


def _set(cols: SheetColumns, i: int, j: int, value: float) -> None:
    row = list(cols.table.rows[i])
    row[j] = value
    cols.table.rows[i] = tuple(row)
