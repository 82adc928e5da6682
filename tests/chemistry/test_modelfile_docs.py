"""The examples of docs/model-file.md are executed, so they cannot go stale."""

from __future__ import annotations

import math
import re
from pathlib import Path

import pytest

from speciakin.chemistry.modelfile import model_summary, parse_model, validate_model
from speciakin.chemistry.modelfile.units import parse_rate_constant

DOC = Path(__file__).resolve().parents[2] / "docs" / "model-file.md"


def toml_blocks() -> list[str]:
    return re.findall(r"```toml\n(.*?)```", DOC.read_text(encoding="utf-8"), flags=re.S)


def test_complete_example_in_the_docs_parses():
    full = [b for b in toml_blocks() if "[model]" in b]
    assert len(full) == 1
    m = parse_model(full[0], source="docs/model-file.md")
    assert [p for p in validate_model(m) if p.severity == "error"] == []
    assert [s.name for s in m.steps] == ["coupling", "hydrolysis_water_R"]
    assert "A[N free] + R -> B" in model_summary(m)


def test_worked_unit_example_in_the_docs():
    # docs: "2.1 L/(mol*min)" becomes log10(2.1/60) = -1.456
    assert "log10(2.1/60) = -1.456" in DOC.read_text(encoding="utf-8")
    assert parse_rate_constant("2.1 L/(mol*min)", 2) == pytest.approx(round(math.log10(2.1 / 60), 3), abs=5e-4)
