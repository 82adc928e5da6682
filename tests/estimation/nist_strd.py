"""Reader and model functions for the NIST StRD nonlinear regression datasets.

The datasets (``tests/data/nist_strd/``) are the reference problems of the
estimation layer's tests and of ``benchmarks/nist_table.py``.  The model functions use only numpy
operations that accept complex input, so the complex-step Jacobian applies.

References
----------
NIST Statistical Reference Datasets, Nonlinear Regression,
https://www.itl.nist.gov/div898/strd/nls/nls_main.shtml (public domain).
"""

from __future__ import annotations

import os
from dataclasses import dataclass
from pathlib import Path
from types import MappingProxyType

import numpy as np

from speciakin.errors import DataError, Location

__all__ = ["NistProblem", "read_nist_file", "NIST_MODELS", "NIST_DIFFICULTY", "NIST_FOLDER",
           "log_relative_error"]


def _rational(num_coeffs, den_coeffs, x):
    num = sum(c * x ** k for k, c in enumerate(num_coeffs))
    den = 1.0 + sum(c * x ** (k + 1) for k, c in enumerate(den_coeffs))
    return num / den


def _gauss(b, x):
    return (b[0] * np.exp(-b[1] * x) + b[2] * np.exp(-(x - b[3]) ** 2 / b[4] ** 2)
            + b[5] * np.exp(-(x - b[6]) ** 2 / b[7] ** 2))


def _lanczos(b, x):
    return b[0] * np.exp(-b[1] * x) + b[2] * np.exp(-b[3] * x) + b[4] * np.exp(-b[5] * x)


def _enso(b, x):
    w = 2 * np.pi * x
    return (b[0] + b[1] * np.cos(w / 12) + b[2] * np.sin(w / 12) + b[4] * np.cos(w / b[3])
            + b[5] * np.sin(w / b[3]) + b[7] * np.cos(w / b[6]) + b[8] * np.sin(w / b[6]))


# Model formulas as written in the NIST files (b = parameter vector, x = predictor columns).
NIST_MODELS = MappingProxyType({
    "Misra1a": lambda b, x: b[0] * (1 - np.exp(-b[1] * x)),
    "Chwirut2": lambda b, x: np.exp(-b[0] * x) / (b[1] + b[2] * x),
    "Chwirut1": lambda b, x: np.exp(-b[0] * x) / (b[1] + b[2] * x),
    "Lanczos3": _lanczos,
    "Gauss1": _gauss,
    "Gauss2": _gauss,
    "DanWood": lambda b, x: b[0] * x ** b[1],
    "Misra1b": lambda b, x: b[0] * (1 - (1 + b[1] * x / 2) ** (-2)),
    "Kirby2": lambda b, x: _rational(b[0:3], b[3:5], x),
    "Hahn1": lambda b, x: _rational(b[0:4], b[4:7], x),
    "Nelson": lambda b, x: b[0] - b[1] * x[:, 0] * np.exp(-b[2] * x[:, 1]),
    "MGH17": lambda b, x: b[0] + b[1] * np.exp(-x * b[3]) + b[2] * np.exp(-x * b[4]),
    "Lanczos1": _lanczos,
    "Lanczos2": _lanczos,
    "Gauss3": _gauss,
    "Misra1c": lambda b, x: b[0] * (1 - (1 + 2 * b[1] * x) ** (-0.5)),
    "Misra1d": lambda b, x: b[0] * b[1] * x * ((1 + b[1] * x) ** (-1)),
    "Roszman1": lambda b, x: b[0] - b[1] * x - np.arctan(b[2] / (x - b[3])) / 3.141592653589793238462643383279,
    "ENSO": _enso,
    "MGH09": lambda b, x: b[0] * (x ** 2 + x * b[1]) / (x ** 2 + x * b[2] + b[3]),
    "Thurber": lambda b, x: _rational(b[0:4], b[4:7], x),
    "BoxBOD": lambda b, x: b[0] * (1 - np.exp(-b[1] * x)),
    "Rat42": lambda b, x: b[0] / (1 + np.exp(b[1] - b[2] * x)),
    "MGH10": lambda b, x: b[0] * np.exp(b[1] / (x + b[2])),
    "Eckerle4": lambda b, x: (b[0] / b[1]) * np.exp(-0.5 * ((x - b[2]) / b[1]) ** 2),
    "Rat43": lambda b, x: b[0] / ((1 + np.exp(b[1] - b[2] * x)) ** (1 / b[3])),
    "Bennett5": lambda b, x: b[0] * (b[1] + x) ** (-1 / b[2]),
})

# NIST's level of difficulty (from each file's "Data:" block).
NIST_DIFFICULTY = MappingProxyType({
    **{n: "lower" for n in ("Misra1a", "Chwirut2", "Chwirut1", "Lanczos3", "Gauss1", "Gauss2", "DanWood",
                            "Misra1b")},
    **{n: "average" for n in ("Kirby2", "Hahn1", "Nelson", "MGH17", "Lanczos1", "Lanczos2", "Gauss3",
                              "Misra1c", "Misra1d", "Roszman1", "ENSO")},
    **{n: "higher" for n in ("MGH09", "Thurber", "BoxBOD", "Rat42", "MGH10", "Eckerle4", "Rat43", "Bennett5")},
})


@dataclass(frozen=True)
class NistProblem:
    """One NIST StRD problem: data, starts and certified values."""

    name: str
    difficulty: str
    y: np.ndarray
    x: np.ndarray
    start1: np.ndarray
    start2: np.ndarray
    certified_values: np.ndarray
    certified_standard_errors: np.ndarray
    certified_rss: float

    @property
    def response(self) -> np.ndarray:
        """Fitted response (``log(y)`` for Nelson, whose model is for log y)."""
        return np.log(self.y) if self.name == "Nelson" else self.y

    def residual(self, b: np.ndarray) -> np.ndarray:
        """``response - model(b, x)``; accepts complex ``b``."""
        return self.response - NIST_MODELS[self.name](b, self.x)


def read_nist_file(path: str | os.PathLike) -> NistProblem:
    """Parse one ``<Name>.dat`` file (layout in the folder's README).

    Raises
    ------
    DataError
        If the file does not follow the StRD layout.
    """
    path = Path(path)
    lines = [ln.rstrip() for ln in path.read_text(encoding="ascii", errors="replace").splitlines()]

    def fail(msg: str, line: int) -> DataError:
        return DataError(msg, Location(file=str(path), line=line), lines[line - 1] if line <= len(lines) else None,
                         "the NIST StRD file layout")
    try:
        cert = lines[5].split()
        first, last = int(cert[-3]), int(cert[-1].rstrip(")"))
        data_first = int(lines[6].split()[-3])
        rows = [lines[i].split() for i in range(first - 1, first - 1 + (last - first + 1) - 5)]
        p = len(rows)
        table = np.array([[float(t) for t in row[2:6]] for row in rows])
        rss = float(lines[first - 1 + p + 1].split(":")[1])
        data = np.array([[float(t) for t in ln.split()] for ln in lines[data_first - 1:] if ln.strip()])
    except (IndexError, ValueError) as exc:
        raise fail(f"cannot parse ({exc})", 6) from None
    name = path.stem
    x = data[:, 1] if data.shape[1] == 2 else data[:, 1:]
    return NistProblem(name, NIST_DIFFICULTY.get(name, "unknown"), data[:, 0], x, table[:, 0], table[:, 1],
                       table[:, 2], table[:, 3], rss)


#: The certified NIST StRD files, kept in the repository (see its README.md).
NIST_FOLDER = Path(__file__).resolve().parents[1] / "data" / "nist_strd"


def log_relative_error(estimate: float, certified: float) -> float:
    """``LRE = -log10(|est - cert| / |cert|)``, capped at 15 (agreement to double precision)."""
    if estimate == certified:
        return 15.0
    if not np.isfinite(estimate):
        return 0.0
    return float(min(15.0, max(0.0, -np.log10(abs(estimate - certified) / abs(certified)))))
