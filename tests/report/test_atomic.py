"""Atomic output: a failed render or write never leaves a half-written target or a temp file."""

from __future__ import annotations

import os

import pytest

from speciakin.errors import InputError
from speciakin.report import Figure, ReportDocument, Section, render
from speciakin.report import _io
from speciakin.report.document import PNG_SIGNATURE

OLD = b"previous report, must survive"


def _small_document() -> ReportDocument:
    return ReportDocument("Small", [Section("Only", [])])


def _leftovers(folder) -> list[str]:
    return sorted(p.name for p in folder.iterdir() if p.name.endswith(".tmp"))


def test_failure_mid_render_keeps_the_old_file(tmp_path, monkeypatch):
    # HTML: the second figure's file is missing; PDF: the first figure is a
    # PNG signature followed by garbage, found when the image is decoded.
    broken = Figure(PNG_SIGNATURE + b"not an image at all", "broken")
    missing = Figure(tmp_path / "gone.png", "missing")
    cases = {".html": (ReportDocument("Fails", [Section("S", [Figure(PNG_SIGNATURE, "ok"), missing])]),
                       "gone.png"),
             ".pdf": (ReportDocument("Fails", [Section("S", [broken])]), "cannot be decoded")}
    for suffix, (doc, match) in cases.items():
        target = tmp_path / f"report{suffix}"
        target.write_bytes(OLD)
        with pytest.raises(InputError, match=match):
            render(doc, target)
        assert target.read_bytes() == OLD, suffix
    assert _leftovers(tmp_path) == []


def test_failure_mid_workbook_keeps_the_old_file(tmp_path, monkeypatch):
    from speciakin.report import Table, xlsx

    real = xlsx._write_table
    calls = []

    def fail_on_second(ws, table):
        calls.append(table.title)
        real(ws, table)
        if len(calls) == 2:
            raise RuntimeError("simulated crash while writing the second sheet")

    monkeypatch.setattr(xlsx, "_write_table", fail_on_second)
    doc = ReportDocument("Fails", tables_for_workbook=[Table("a", ["x"], [[1.0]]), Table("b", ["x"], [[2.0]])])
    target = tmp_path / "report.xlsx"
    target.write_bytes(OLD)
    with pytest.raises(RuntimeError, match="second sheet"):
        render(doc, target)
    assert target.read_bytes() == OLD
    assert _leftovers(tmp_path) == []


def test_failure_while_writing_removes_the_temp_file(tmp_path, monkeypatch):
    target = tmp_path / "report.html"
    target.write_bytes(OLD)
    real_fdopen = os.fdopen

    class HalfWriter:
        def __init__(self, handle):
            self.handle = handle

        def __enter__(self):
            return self

        def __exit__(self, *exc):
            self.handle.close()
            return False

        def write(self, data):
            self.handle.write(data[: len(data) // 2])
            raise OSError(28, "No space left on device")

    monkeypatch.setattr(_io.os, "fdopen", lambda fd, mode: HalfWriter(real_fdopen(fd, mode)))
    with pytest.raises(InputError, match="report.html.*No space left on device"):
        render(_small_document(), target)
    assert target.read_bytes() == OLD
    assert _leftovers(tmp_path) == []


def test_failure_at_rename_removes_the_temp_file(tmp_path, monkeypatch):
    target = tmp_path / "report.pdf"

    def refuse(src, dst):
        raise PermissionError(13, "Permission denied")

    monkeypatch.setattr(_io.os, "replace", refuse)
    with pytest.raises(InputError, match="Permission denied"):
        render(_small_document(), target)
    assert not target.exists()
    assert _leftovers(tmp_path) == []


def test_successful_write_replaces_and_cleans(tmp_path):
    target = tmp_path / "sub" / "report.xlsx"
    render(_small_document(), target)
    assert target.read_bytes()[:2] == b"PK"  # XLSX is a ZIP container (ECMA-376 Part 2)
    assert _leftovers(target.parent) == []


def test_unknown_format_is_an_input_error(tmp_path):
    with pytest.raises(InputError, match="unknown report file type.*\\.docx.*\\.html, \\.pdf, \\.xlsx"):
        render(_small_document(), tmp_path / "report.docx")
    with pytest.raises(InputError, match="unknown report format.*odt"):
        render(_small_document(), tmp_path / "report.html", format="odt")
