"""The Designs sheet's cap, and the formats made once per column (the fast table writer)."""
from __future__ import annotations

import dataclasses

import openpyxl
import pytest

from sweep.writers import workbook
from sweep.writers.workbook import write_workbook
from tests.fake_report import make_report


def test_designs_sheet_capped_says_so(tmp_path, monkeypatch):
    monkeypatch.setattr(workbook, "DESIGNS_ROWS", 5)
    rep = make_report(n_designs=12)
    write_workbook(tmp_path / "w.xlsx", rep)
    ws = openpyxl.load_workbook(tmp_path / "w.xlsx")["Designs"]
    note = ws["A1"].value
    assert "5 best-ranked of 12 designs" in note and "designs.parquet" in note
    assert ws["A2"].value == "Rank"                      # the header moves below the note
    ranks = [ws.cell(r, 1).value for r in range(3, ws.max_row + 1)]
    assert ranks == [1, 2, 3, 4, 5]                      # the best five, best first
    assert ws.freeze_panes.endswith("3") and ws.auto_filter.ref.startswith("A2:")
    assert "designs.parquet" in ws.oddHeader.left.text


def test_designs_sheet_uncapped_has_no_note(tmp_path):
    rep = make_report(n_designs=12)
    write_workbook(tmp_path / "w.xlsx", rep)
    ws = openpyxl.load_workbook(tmp_path / "w.xlsx")["Designs"]
    assert ws["A1"].value == "Rank" and ws.max_row == 13


def test_failing_rows_keep_number_format_and_fill(tmp_path):
    """A failing row's cells take the fail fill and italic type and keep their column's number
    format; a passing row's cells keep the plain column format (one format per column)."""
    rep = make_report(n_designs=12)
    write_workbook(tmp_path / "w.xlsx", rep)
    ws = openpyxl.load_workbook(tmp_path / "w.xlsx")["Designs"]
    heads = [c.value for c in ws[1]]
    col = heads.index("RA [Ω]") + 1
    verdicts = {r: ws.cell(r, heads.index("Verdict") + 1).value for r in range(2, ws.max_row + 1)}
    fail_rows = [r for r, v in verdicts.items() if v == "spec miss"]
    ok_rows = [r for r, v in verdicts.items() if v == "pass"]
    assert fail_rows and ok_rows
    f, p = ws.cell(fail_rows[0], col), ws.cell(ok_rows[0], col)
    assert f.number_format == p.number_format != "General"
    assert f.font.i and not p.font.i
    assert f.fill.fgColor.rgb.endswith(workbook._FAIL_FILL[1:]) and p.fill.fill_type is None


@pytest.mark.parametrize("text", ["=1+1", "+cmd", "@x"])
def test_failing_row_text_stays_text(tmp_path, text):
    """Text a spreadsheet could read as a formula keeps the quote prefix in a failing row."""
    rep = make_report(n_designs=12)
    d = rep.designs.copy()
    d["flags"] = d["flags"].where(d["verdict"] != "spec miss", text)
    write_workbook(tmp_path / "w.xlsx", dataclasses.replace(rep, designs=d))
    ws = openpyxl.load_workbook(tmp_path / "w.xlsx")["Designs"]
    heads = [c.value for c in ws[1]]
    cells = [ws.cell(r, heads.index("Flags") + 1) for r in range(2, ws.max_row + 1)]
    hit = [c for c in cells if c.value == text]
    assert hit and all(c.data_type == "s" and c.quotePrefix for c in hit)


def test_notes_say_designs_capped(tmp_path, monkeypatch):
    monkeypatch.setattr(workbook, "DESIGNS_ROWS", 5)
    write_workbook(tmp_path / "w.xlsx", make_report(n_designs=12))
    ws = openpyxl.load_workbook(tmp_path / "w.xlsx")["Notes"]
    printing = next(ws.cell(r, 2).value for r in range(1, ws.max_row + 1)
                    if ws.cell(r, 1).value == "Printing")
    assert "5 best-ranked of 12 designs" in printing and "designs.parquet" in printing
