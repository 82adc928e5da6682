"""The example in docs/report.md runs as written."""

from __future__ import annotations

import re
from pathlib import Path

DOC = Path(__file__).resolve().parents[2] / "docs" / "report.md"


def test_docs_example_runs(tmp_path):
    blocks = re.findall(r"```python\n(.*?)```", DOC.read_text(encoding="utf-8"), flags=re.S)
    assert blocks, "docs/report.md has no python example"
    namespace = {"output_folder": tmp_path}
    for code in blocks:
        exec(compile(code, str(DOC), "exec"), namespace)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["example.html", "example.pdf", "example.xlsx"]
