"""The pipeline's numbers stay what they were: fit.json, window.json and the
report's table sheets of the reduced demo against the stored copy in
``tests/pipeline/baseline/``.

The stored copy was made by the code itself before the pipeline layer was
reorganised (a regression guard, not an outside reference; the report tables
by the code of that time too, run from an export of its sources).  After an
intended change of numbers regenerate it with
``python scripts/regenerate_pipeline_baseline.py``.
"""

from __future__ import annotations

import json
import math

from .regression_case import BASELINE, RESULT_FILES

TOLERANCE = 1e-12


def differences(stored, new, path="$") -> list[str]:
    """Every place where ``new`` differs from ``stored`` (numbers beyond 1e-12 relative to max(1, |x|))."""
    if isinstance(stored, dict) and isinstance(new, dict):
        out = [f"{path}: keys differ: {sorted(set(stored) ^ set(new))}"] if set(stored) != set(new) else []
        for key in set(stored) & set(new):
            out += differences(stored[key], new[key], f"{path}.{key}")
        return out
    if isinstance(stored, list) and isinstance(new, list):
        if len(stored) != len(new):
            return [f"{path}: length {len(stored)} -> {len(new)}"]
        return [d for i, (a, b) in enumerate(zip(stored, new)) for d in differences(a, b, f"{path}[{i}]")]
    numbers = (int, float)
    if (isinstance(stored, numbers) and isinstance(new, numbers) and not isinstance(stored, bool)
            and not isinstance(new, bool)):
        if math.isclose(stored, new, rel_tol=0.0, abs_tol=TOLERANCE * max(1.0, abs(stored))):
            return []
        return [f"{path}: {stored!r} -> {new!r}"]
    return [] if stored == new else [f"{path}: {stored!r} -> {new!r}"]


def test_differences_finds_a_change():
    assert differences({"a": [1.0, "x"]}, {"a": [1.0 + 1e-9, "x"]})
    assert not differences({"a": [1.0, None]}, {"a": [1.0 + 1e-14, None]})


def test_fit_window_and_report_numbers_match_the_stored_copy(pinned_regression):
    # the case in a subprocess with the instruction set of the stored copy (tests/pinned_numbers.py: compiled
    # code differs in the last bits from one CPU to another, and the fit and the window carry that further),
    # run beside the other tests (``pinned_regression``, tests/conftest.py)
    for name in RESULT_FILES:
        stored = json.loads((BASELINE / name).read_text())
        found = differences(stored, json.loads((pinned_regression / name).read_text()))
        assert not found, f"{name} differs from the stored copy:\n" + "\n".join(found[:20])
