"""Damaged model files give a ModelFileError, never another exception.

Each case deletes one line of the invented example or replaces one value by
a value of a wrong type or range; the parser must either accept the file or
raise ModelFileError (a user mistake never becomes a traceback).
"""

from __future__ import annotations

import re
from pathlib import Path

import numpy as np
import pytest

from speciakin.chemistry.modelfile import parse_model
from speciakin.errors import ModelFileError

EXAMPLE = Path(__file__).resolve().parents[2] / "examples" / "two_amines.toml"
REPLACEMENTS = ('true', '"x"', '-1', '[]', '{}', '0', '"-5 min"', '{ value = "x", fit = 1 }',
                '["a", 1]', 'nan', '"1e400 mmol"')


def mutations() -> list[str]:
    text = EXAMPLE.read_text(encoding="utf-8")
    # inline the CSV log so that the cases do not depend on the working folder
    text = text.replace('file = "two_amines_ph_log.csv"', 'times = [0, 60, 120], values = [8, 7.5, 7]')
    lines = text.splitlines()
    out = []
    for i, line in enumerate(lines):
        out.append("\n".join(lines[:i] + lines[i + 1:]))
        m = re.match(r'^(\s*[\w"+-]+\s*=\s*)(.*)$', line)
        if m:
            out += ["\n".join(lines[:i] + [m.group(1) + r] + lines[i + 1:]) for r in REPLACEMENTS]
    return out


def _parse_or_model_error(text: str) -> None:
    try:
        parse_model(text, source="fuzz.toml")
    except ModelFileError as exc:
        assert str(exc)  # a message, with at least one problem
        assert exc.problems


def test_damaged_files_sample():
    cases = mutations()
    rng = np.random.default_rng(20261201)
    for index in rng.choice(len(cases), size=80, replace=False):
        _parse_or_model_error(cases[index])


@pytest.mark.slow
def test_damaged_files_all():
    for text in mutations():
        _parse_or_model_error(text)
