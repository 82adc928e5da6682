"""Every code block of docs/*.md is run, so the documentation cannot go stale.

Conventions (DEVELOPERS.md, "Documentation"):

* ```python blocks run as written, in a scratch folder that holds
  ``my-campaign/`` (a reduced copy of the invented demo: campaign.xlsx,
  model.toml, process.toml) and a copy of its ``model.toml``;
* ```bash blocks: every command is ``speciakin ...`` and runs through the
  command-line entry point with exit code 0, unless the fence says
  ```bash not-run: REASON``;
* ```toml blocks must be valid TOML (the model-file examples are also parsed
  by tests/chemistry/test_modelfile_docs.py);
* ```text blocks (API listings, folder trees, printed output) are not code.

A fence without one of these words fails the test.
"""

from __future__ import annotations

import re
import shlex
import shutil
import tomllib
from pathlib import Path

import pytest

from pipeline.regression_case import build_reduced_demo

ROOT = Path(__file__).resolve().parents[2]
DOCS = sorted((ROOT / "docs").glob("*.md"))
FENCE = re.compile(r"^```([^\n]*)\n(.*?)^```", flags=re.S | re.M)
KINDS = ("python", "bash", "toml", "text")


def blocks():
    """(id, kind, info, code) of every fenced block in docs/*.md."""
    out = []
    for doc in DOCS:
        text = doc.read_text(encoding="utf-8")
        for m in FENCE.finditer(text):
            info = m.group(1).strip()
            line = text[:m.start()].count("\n") + 1
            out.append(pytest.param(info.split(" ")[0] if info else "", info, m.group(2),
                                    id=f"{doc.name}:{line}"))
    return out


def test_the_docs_have_code_blocks():
    assert len(blocks()) > 20


@pytest.fixture(scope="module")
def scratch(tmp_path_factory) -> Path:
    folder = tmp_path_factory.mktemp("docs")
    build_reduced_demo(folder / "my-campaign")
    shutil.copy(folder / "my-campaign" / "model.toml", folder / "model.toml")
    return folder


def commands(code: str) -> list[list[str]]:
    """The commands of a bash block: continuation lines joined, comments dropped."""
    joined = code.replace("\\\n", " ")
    return [shlex.split(line, comments=True) for line in joined.splitlines()
            if shlex.split(line, comments=True)]


@pytest.mark.filterwarnings("ignore")
@pytest.mark.parametrize("kind,info,code", blocks())
def test_block(kind, info, code, scratch, monkeypatch, tmp_path):
    assert kind in KINDS, f"fence '{info}': say which of {', '.join(KINDS)} it is"
    if kind == "text":
        return
    if kind == "toml":
        tomllib.loads(code)
        return
    run_in = tmp_path / "cwd"
    shutil.copytree(scratch, run_in)
    monkeypatch.chdir(run_in)
    monkeypatch.syspath_prepend(str(ROOT))
    if kind == "python":
        exec(compile(code, "docs block", "exec"), {"__name__": "docs_block"})
        return
    if info.startswith("bash not-run:"):
        assert len(info) > len("bash not-run:") + 10, "a not-run block needs its reason"
        return
    from speciakin.cli.main import main

    for argv in commands(code):
        assert argv[0] == "speciakin", f"{argv[0]}: only speciakin commands run (or mark the block not-run)"
        assert main(argv[1:]) == 0, " ".join(argv)
