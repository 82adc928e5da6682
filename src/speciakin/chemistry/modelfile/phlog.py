"""Logged pH of a run: an inline table of times and pH values, or a CSV file.

The CSV (path relative to the model file) has a header row with a time column
(``time [min]``, unit in brackets, default min) and a ``pH`` column; other
columns are ignored.  The file is opened read-only.
"""

from __future__ import annotations

import csv
import io
import math
from pathlib import Path
from typing import Any

from speciakin.chemistry.modelfile.paths import sub_path
from speciakin.chemistry.modelfile.reader import TableReader
from speciakin.chemistry.modelfile.units import BARE_NUMBER_UNITS
from speciakin.errors import Location
from speciakin.units import DIMENSIONS, split_header, to_internal

__all__ = ["read_ph_log"]


def _csv_log(reader: TableReader, path: str, file_path: Path) -> tuple[tuple[float, ...], tuple[float, ...]]:
    def problem(message: str, row: int | None = None, column: str | None = None,
                value: Any = None, expected: str | None = None) -> None:
        reader.collector.error(message, Location(file=str(file_path), row=row, column=column),
                               value, expected)

    try:
        text = file_path.read_bytes().decode("utf-8-sig")
    except OSError as exc:
        reader.error(path, f"cannot read pH log: {exc.strerror}", str(file_path), "an existing CSV file")
        return (), ()
    except UnicodeDecodeError:
        reader.error(path, "pH log is not UTF-8 text", str(file_path), "a UTF-8 CSV file")
        return (), ()
    rows = list(csv.reader(io.StringIO(text)))
    if not rows:
        problem("pH log is empty", expected="a header row 'time [min], pH' and data rows")
        return (), ()
    header = [split_header(h) for h in rows[0]]
    names = [h[0].strip().lower() for h in header]
    if "time" not in names or "ph" not in names:
        problem("pH log needs a 'time' and a 'pH' column", row=1, value=rows[0],
                expected="a header such as 'time [min], pH'")
        return (), ()
    it, ip = names.index("time"), names.index("ph")
    unit = header[it][1] or BARE_NUMBER_UNITS["time"]
    if unit not in DIMENSIONS["time"]:
        problem("unknown time unit", row=1, column=rows[0][it], value=unit,
                expected="one of: " + ", ".join(DIMENSIONS["time"]))
        return (), ()
    times, values = [], []
    for number, row in enumerate(rows[1:], start=2):
        if not any(cell.strip() for cell in row):
            continue
        try:
            t = float(row[it])
            ph = float(row[ip])
        except (ValueError, IndexError):
            problem("not a number", row=number, value=row, expected="numbers in the time and pH columns")
            continue
        if not (math.isfinite(t) and math.isfinite(ph)):
            problem("not a finite number", row=number, value=row, expected="finite numbers")
            continue
        times.append(to_internal(t, unit, "time"))
        values.append(ph)
    return tuple(times), tuple(values)


def read_ph_log(reader: TableReader, table: dict, path: str,
                base_dir: Path) -> tuple[tuple[float, ...], tuple[float, ...]]:
    """Return (times [s], pH values) of a logged-pH table; problems go to ``reader``."""
    if "file" in table:
        if "times" in table or "values" in table:
            reader.error(path, "give the pH log either inline (times, values) or as 'file', not both",
                         expected="one of them")
        name = reader.string(table, "file", path)
        if name is None:
            return (), ()
        return _csv_log(reader, sub_path(path, "file"), base_dir / name)
    unit = reader.string(table, "time_unit", path, default=BARE_NUMBER_UNITS["time"],
                         choices=DIMENSIONS["time"]) or BARE_NUMBER_UNITS["time"]
    raw_t = reader.typed(table.get("times", []), sub_path(path, "times"), list) or []
    raw_p = reader.typed(table.get("values", []), sub_path(path, "values"), list) or []
    times = [reader.number(x, sub_path(path, "times", i)) for i, x in enumerate(raw_t)]
    values = [reader.number(x, sub_path(path, "values", i)) for i, x in enumerate(raw_p)]
    if len(times) != len(values):
        reader.error(sub_path(path, "values"), "times and values differ in length",
                     f"{len(times)} times, {len(values)} values", "one pH value per time")
    if None in times or None in values:
        return (), ()
    return tuple(to_internal(t, unit, "time") for t in times), tuple(values)
