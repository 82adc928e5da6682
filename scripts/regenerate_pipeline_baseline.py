"""Regenerate the stored fit.json / window.json / report_tables.json of the pipeline regression test.

Run after an intended change of numbers (and say so in the commit)::

    python scripts/regenerate_pipeline_baseline.py

Runs the reduced demo case of ``tests/pipeline/regression_case.py`` in a
subprocess with the pinned instruction set of ``tests/pinned_numbers.py`` (the
one the test compares in) and writes its results into ``tests/pipeline/baseline/``.
"""

from __future__ import annotations

import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "tests"))

from pinned_numbers import run_pinned  # noqa: E402

if __name__ == "__main__":
    case = ROOT / "tests" / "pipeline" / "regression_case.py"
    sys.stdout.write(run_pinned(case, str(ROOT / "tests" / "pipeline" / "baseline")).stdout)
