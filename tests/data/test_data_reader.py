"""The fast XLSX scan gives exactly what openpyxl's own reader gives.

Reference: openpyxl (general-purpose library) read-only ``iter_rows(values_only=True)``
on the same workbook.
"""

from __future__ import annotations

import datetime
import io

import openpyxl

from data_factory import build_campaign
from speciakin.data import write_campaign
from speciakin.data.reader import fast_sheet_rows


def _norm(rows):
    out = []
    for r in rows:
        r = list(r)
        while r and r[-1] is None:
            r.pop()
        out.append(tuple(float(v) if isinstance(v, int) and not isinstance(v, bool) else v for v in r))
    while out and not out[-1]:
        out.pop()
    return out


def test_fast_scan_matches_openpyxl(tmp_path):
    path = tmp_path / "c.xlsx"
    write_campaign(build_campaign(), path)
    wb = openpyxl.load_workbook(path)
    ws = wb["Runs"]
    ws["J3"] = "text with <angle> & ampersand"
    ws["K5"] = True
    ws["L6"] = "=1+2"
    wb.save(path)
    ro = openpyxl.load_workbook(io.BytesIO(path.read_bytes()), read_only=True, data_only=True)
    for ws in ro.worksheets:
        fast = fast_sheet_rows(ws)
        assert fast is not None, ws.title
        assert _norm(fast) == _norm(ws.iter_rows(values_only=True)), ws.title


def test_date_cells_fall_back_to_openpyxl(tmp_path):
    path = tmp_path / "d.xlsx"
    wb = openpyxl.Workbook()
    wb.active.append(["time [min]"])
    wb.active.append([datetime.time(0, 30)])
    wb.save(path)
    ro = openpyxl.load_workbook(path, read_only=True, data_only=True)
    assert fast_sheet_rows(ro.active) is None
