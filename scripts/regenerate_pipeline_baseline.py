"""Regenerate the stored fit.json / window.json of the pipeline regression test.

Run after an intended change of numbers (and say so in the commit)::

    python scripts/regenerate_pipeline_baseline.py

Writes ``tests/pipeline/baseline/fit.json`` and ``window.json`` from the
reduced demo case in ``tests/pipeline/regression_case.py``.
"""

from __future__ import annotations

import sys
import tempfile
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "tests" / "pipeline"))

from regression_case import write_baseline  # noqa: E402

if __name__ == "__main__":
    with tempfile.TemporaryDirectory() as tmp:
        for path in write_baseline(Path(tmp)):
            sys.stdout.write(f"wrote {path}\n")
