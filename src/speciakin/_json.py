"""The one JSON codec of the project, shared by every layer.

Every result file is strict JSON: NaN and infinities become ``null``, numpy
scalars and arrays become Python numbers and lists, paths become text.
Readers turn ``null`` back into NaN where a number is expected
(:func:`nan_from_null`).  Version tags of the result files are spelled one way,
``speciakin.<kind>/<version>`` (:func:`format_tag`).
"""

from __future__ import annotations

import json
import math
from pathlib import PurePath
from typing import Any

import numpy as np

__all__ = ["json_ready", "dumps", "format_tag", "nan_from_null", "finite_or_none"]


def json_ready(value: Any) -> Any:
    """``value`` with NaN/inf -> None, numpy -> Python, tuples -> lists, paths -> text (nested)."""
    if isinstance(value, dict):
        return {str(k): json_ready(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [json_ready(v) for v in value]
    if isinstance(value, np.ndarray):
        return json_ready(value.tolist())
    if isinstance(value, np.generic):
        return json_ready(value.item())
    if isinstance(value, float):
        return value if math.isfinite(value) else None
    if isinstance(value, PurePath):
        return str(value)
    return value


def finite_or_none(value: Any) -> float | None:
    """A number as float, or None when it is NaN or infinite (table cells, JSON)."""
    value = float(value)
    return value if math.isfinite(value) else None


def dumps(value: Any, indent: int | None = 1) -> str:
    """Strict JSON text of ``value`` (see :func:`json_ready`)."""
    return json.dumps(json_ready(value), indent=indent, allow_nan=False)


def format_tag(kind: str, version: int) -> str:
    """The version tag of a result file: ``speciakin.<kind>/<version>``."""
    return f"speciakin.{kind}/{int(version)}"


def nan_from_null(value: Any) -> Any:
    """Inverse of :func:`json_ready` for numbers: None -> NaN in nested lists."""
    if value is None:
        return math.nan
    if isinstance(value, list):
        return [nan_from_null(v) for v in value]
    return value
