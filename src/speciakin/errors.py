"""Error types shared by every layer.

A user mistake raises :class:`InputError` (or a subclass); its message names
where the bad value came from (file, sheet, row, column or key), the value and
what was expected.  The CLI turns any :class:`SpeciakinError` into a one-line
(or one-block) message and a non-zero exit code, never a traceback.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

__all__ = [
    "Location",
    "Problem",
    "show_value",
    "problems_with",
    "ProblemList",
    "SpeciakinError",
    "InputError",
    "ModelFileError",
    "DataError",
    "SolverError",
    "ProblemCollector",
]


#: How :meth:`Location.describe` writes each field, in the order it lists them.
_LOCATION_WORDS = (("file", "{}"), ("sheet", "sheet '{}'"), ("line", "line {}"), ("row", "row {}"),
                   ("column", "column '{}'"), ("key", "key '{}'"))


@dataclass(frozen=True)
class Location:
    """Where a value came from.  Every field is optional.

    ``row`` is the row number as the spreadsheet program shows it (1-based,
    header included); ``line`` is a 1-based text line.
    """

    file: str | None = None
    sheet: str | None = None
    row: int | None = None
    column: str | None = None
    key: str | None = None
    line: int | None = None

    def describe(self) -> str:
        """The place in words, e.g. ``runs.csv, row 4, column 'pH setpoint'``;
        a field that is None or empty text is left out."""
        values = ((words, getattr(self, name)) for name, words in _LOCATION_WORDS)
        return ", ".join(words.format(v) for words, v in values if v is not None and v != "")

    def to_dict(self) -> dict[str, Any]:
        return {k: v for k, v in self.__dict__.items() if v is not None}


def show_value(value: Any) -> str:
    """A value as a person reads it in a message: never a Python repr such as
    ``np.float64(300.0)`` or ``datetime.timedelta(seconds=300)``.

    Texts are quoted (control characters escaped), numbers written plainly,
    dates and times in ISO form, durations in seconds, sequences and
    mappings item by item.
    """
    import datetime
    import math

    if isinstance(value, str):
        return repr(value)
    if isinstance(value, bool) or value is None:
        return str(value)
    item = getattr(value, "item", None)
    if callable(item) and getattr(value, "ndim", None) == 0:
        try:
            value = item()  # numpy scalar -> Python scalar
        except (TypeError, ValueError):
            pass
    if isinstance(value, bool):
        return str(value)
    if isinstance(value, int):
        return str(value)
    if isinstance(value, float):
        return repr(value) if math.isfinite(value) else str(value)
    if isinstance(value, datetime.timedelta):
        return f"{value.total_seconds():g} s"
    if isinstance(value, (datetime.datetime, datetime.date, datetime.time)):
        return value.isoformat()
    if isinstance(value, dict):
        return "{" + ", ".join(f"{k}: {show_value(v)}" for k, v in value.items()) + "}"
    tolist = getattr(value, "tolist", None)
    if callable(tolist):
        value = tolist()
        if not isinstance(value, list):
            return show_value(value)
    if isinstance(value, (list, tuple, set, frozenset)):
        items = list(value)
        shown = ", ".join(show_value(v) for v in items[:8]) + (", ..." if len(items) > 8 else "")
        return "[" + shown + "]"
    return str(value)


@dataclass(frozen=True)
class Problem:
    """One finding: ``severity`` is ``"error"`` or ``"warning"``."""

    message: str
    location: Location = field(default_factory=Location)
    value: Any = None
    expected: str | None = None
    severity: str = "error"
    code: str = "invalid"

    def describe(self) -> str:
        where = self.location.describe()
        text = f"{where}: {self.message}" if where else self.message
        if self.value is not None:
            text += f" (value {show_value(self.value)}"
            text += f"; expected {self.expected})" if self.expected else ")"
        elif self.expected:
            text += f" (expected {self.expected})"
        return text

    def to_dict(self) -> dict[str, Any]:
        return {
            "severity": self.severity,
            "code": self.code,
            "message": self.message,
            "location": self.location.to_dict(),
            "value": None if self.value is None else show_value(self.value),
            "expected": self.expected,
            "text": self.describe(),
        }


def problems_with(problems, severity: str) -> list[Problem]:
    """The problems of one severity ("error" or "warning"), in their order."""
    return [p for p in problems if p.severity == severity]


class SpeciakinError(Exception):
    """Base class of every error the project raises on purpose."""

    exit_code = 1


class InputError(SpeciakinError):
    """A user mistake in a file, a sheet or a command-line option.

    Parameters
    ----------
    message
        What is wrong, in plain words.
    location
        Where the value came from.
    value
        The offending value, if there is one.
    expected
        What would have been accepted.
    problems
        Several findings gathered in one pass; the message lists them all.
    """

    exit_code = 2

    def __init__(
        self,
        message: str = "",
        location: Location | None = None,
        value: Any = None,
        expected: str | None = None,
        problems: list[Problem] | None = None,
    ) -> None:
        if problems is None:
            problems = [Problem(message, location or Location(), value, expected)]
        self.problems = list(problems)
        errors = problems_with(self.problems, "error") or self.problems
        if len(errors) == 1:
            text = errors[0].describe()
        else:
            text = f"{len(errors)} problems:\n" + "\n".join(f"  - {p.describe()}" for p in errors)
        super().__init__(text)

    @property
    def location(self) -> Location:
        return self.problems[0].location


class ModelFileError(InputError):
    """A model, process or run file that does not parse or validate."""


class DataError(InputError):
    """Campaign spreadsheets that do not import or validate (bad input: exit code 2 when a command
    stops on it; ``speciakin check`` itself reports them and exits 1)."""


class SolverError(SpeciakinError):
    """A numerical method failed; the message carries the solver's own words."""

    exit_code = 3


class ProblemList:
    """``errors`` and ``warnings`` of an object that holds ``problems`` (a list of Problem)."""

    problems: list[Problem]

    @property
    def errors(self) -> list[Problem]:
        return problems_with(self.problems, "error")

    @property
    def warnings(self) -> list[Problem]:
        return problems_with(self.problems, "warning")


class ProblemCollector(ProblemList):
    """Gather problems in one pass and raise them together.

    Examples
    --------
    >>> c = ProblemCollector()
    >>> c.error("pKa is not a number", Location(key="molecule.S.site.N1.pka"), "abc", "a number")
    >>> c.has_errors
    True
    """

    def __init__(self) -> None:
        self.problems: list[Problem] = []
        self._cells: set[tuple] = set()  # the cells holding an error

    def error(self, message: str, location: Location | None = None, value: Any = None,
              expected: str | None = None, code: str = "invalid") -> None:
        """Record an error; a spreadsheet cell (row and column known) gets one error, the first
        (the most specific: a later check that reads the same cell has nothing to add)."""
        location = location or Location()
        if location.row is not None and location.column is not None:
            cell = (location.file, location.sheet, location.row, location.column)
            if cell in self._cells:
                return
            self._cells.add(cell)
        self.problems.append(Problem(message, location, value, expected, "error", code))

    def warning(self, message: str, location: Location | None = None, value: Any = None,
                expected: str | None = None, code: str = "suspicious") -> None:
        self.problems.append(Problem(message, location or Location(), value, expected, "warning", code))

    @property
    def has_errors(self) -> bool:
        return bool(self.errors)

    def raise_if_errors(self, error_type: type[InputError] = InputError) -> None:
        if self.has_errors:
            raise error_type(problems=self.errors)
