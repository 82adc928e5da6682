"""The example in docs/estimation.md runs as written (documentation cannot go stale)."""

import re
from pathlib import Path

import pytest

DOC = Path(__file__).resolve().parents[2] / "docs" / "estimation.md"


def test_documented_example_runs(capsys):
    if not DOC.is_file():
        pytest.skip(f"{DOC} not found")
    blocks = re.findall(r"```python example\n(.*?)```", DOC.read_text(encoding="utf-8"), flags=re.S)
    assert blocks, "no example block in docs/estimation.md"
    for code in blocks:
        exec(compile(code, str(DOC), "exec"), {})
    assert "Fit statistics" in capsys.readouterr().out
