"""The table rows written as cell XML give the workbook the spreadsheet library's own per-cell
calls give: the reference here is xlsxwriter's public write_* path, read back with openpyxl and
compared as bytes of the sheet's XML."""
from __future__ import annotations

import dataclasses
import zipfile

import numpy as np
import openpyxl
import pandas as pd
import pytest
import xlsxwriter

from sweep.writers import workbook
from sweep.writers.workbook import write_workbook
from tests.fake_report import make_report

# text the library treats specially: XML characters, control characters and its own _xHHHH_
# escape, leading/trailing spaces, formula-like starts, its rich-string form, empty text
ODD_TEXTS = ["a & b < c > d \"q\"", "tab\there", "bell\x07", "_x0041_", " lead", "trail ",
             "=1+1", "+cmd", "@x", "-2", "<r>x</r>", "", "µF 4.7 kΩ", "line\nbreak"]


def _frame(n: int = 40) -> tuple[pd.DataFrame, np.ndarray]:
    rng = np.random.default_rng(5)
    x = rng.uniform(-1e6, 1e6, n)
    x[::7] = np.nan
    x[3], x[4] = np.inf, -np.inf
    m = rng.uniform(0, 1, n)
    m[5::6] = np.nan
    frame = pd.DataFrame({
        "rank": np.arange(1, n + 1),                                       # int
        "ra_ohm": rng.choice([1e3, 4.7e3, 1e6], n),                        # part (eng)
        "c_f": rng.choice([1e-9, 4.7e-6], n),                              # picofarads
        "verdict": [ODD_TEXTS[k % len(ODD_TEXTS)] for k in range(n)],      # text
        "frequency_hz_nom": x,                                             # NaN and inf
        "wc_margin": m,                                                    # empty: reason
        "feasible": rng.uniform(0, 1, n) > 0.5,                            # bool
        "big": np.full(n, 12345678901234567890, dtype=np.uint64).astype(float),
        "flags": [ODD_TEXTS[(3 * k) % len(ODD_TEXTS)] for k in range(n)],
    })
    fail = rng.uniform(0, 1, n) > 0.6
    return frame, fail


def _sheet(tmp_path, name: str, frame: pd.DataFrame, fail, fast: bool, monkeypatch) -> bytes:
    monkeypatch.setattr(workbook, "_CHUNK", 9)        # several chunks, one of them short
    if not fast:
        monkeypatch.setattr(workbook, "_rows_xml_ok", lambda *a: False)
    path = tmp_path / f"{name}.xlsx"
    wb = xlsxwriter.Workbook(str(path), {"constant_memory": True, "strings_to_numbers": False,
                                         "strings_to_formulas": False, "strings_to_urls": False})
    ws = wb.add_worksheet("T")
    st = workbook._Styles(wb)
    cols = workbook._columns(frame, list(frame.columns))
    for c in cols:
        if c.name == "verdict":
            c.text_props = {"bg_color": "#E2EFDA"}
            c.value_props = {"-2": {"italic": True}}
            c.fail_extra = {"bold": True}
        if c.name == "wc_margin":
            c.empty_text = np.where(np.arange(len(frame)) % 2 == 0, "no spec limit", "")
            c.empty_text = c.empty_text.astype(object)
    workbook._write_table(ws, st, cols, 1, fail=fail,
                          fail_props={"italic": True, "bg_color": "#F8CBAD"})
    wb.close()
    with zipfile.ZipFile(path) as z:
        return z.read("xl/worksheets/sheet1.xml") + z.read("xl/styles.xml")


def _cells(path):
    ws = openpyxl.load_workbook(path)["T"]
    return [(c.coordinate, c.value, c.data_type, c.number_format, c.font.b, c.font.i,
             c.fill.fgColor.rgb, c.fill.fill_type, c.alignment.horizontal, c.quotePrefix)
            for row in ws.iter_rows() for c in row]


def test_rows_as_xml_match_the_per_cell_calls(tmp_path, monkeypatch):
    frame, fail = _frame()
    fast = _sheet(tmp_path, "fast", frame, fail, True, monkeypatch)
    with monkeypatch.context() as m:
        slow = _sheet(tmp_path, "slow", frame, fail, False, m)
    assert fast == slow
    cells = _cells(tmp_path / "fast.xlsx")
    assert cells == _cells(tmp_path / "slow.xlsx")
    # and the content is there: a failing row's cells carry the fail fill, a plain one's not
    ws = openpyxl.load_workbook(tmp_path / "fast.xlsx")["T"]
    r_fail, r_ok = 3 + int(np.flatnonzero(fail)[0]), 3 + int(np.flatnonzero(~fail)[0])
    assert ws.cell(r_fail, 1).fill.fgColor.rgb.endswith("F8CBAD") and ws.cell(r_fail, 1).font.i
    assert ws.cell(r_ok, 1).fill.fill_type is None and not ws.cell(r_ok, 1).font.i
    texts = {ws.cell(r, 4).value for r in range(3, ws.max_row + 1)}
    assert {"a & b < c > d \"q\"", " lead", "trail ", "µF 4.7 kΩ", "=1+1"} <= texts


def test_an_empty_row_writes_nothing_either_way(tmp_path, monkeypatch):
    frame = pd.DataFrame({"a": [1.0, np.nan, 3.0], "b": [2.0, np.nan, np.nan]})
    fast = _sheet(tmp_path, "fast", frame, None, True, monkeypatch)
    with monkeypatch.context() as m:
        slow = _sheet(tmp_path, "slow", frame, None, False, m)
    assert fast == slow
    ws = openpyxl.load_workbook(tmp_path / "fast.xlsx")["T"]
    assert [ws.cell(r, 1).value for r in (3, 4, 5)] == [1, None, 3]


@pytest.mark.parametrize("n_designs", [12, 300])
def test_whole_workbook_is_the_same_either_way(tmp_path, monkeypatch, n_designs):
    rep = make_report(n_designs=n_designs)
    d = rep.designs.copy()
    d["flags"] = [ODD_TEXTS[k % len(ODD_TEXTS)] for k in range(len(d))]
    rep = dataclasses.replace(rep, designs=d)
    (tmp_path / "fast").mkdir()
    (tmp_path / "slow").mkdir()
    write_workbook(tmp_path / "fast" / "w.xlsx", rep)     # one name: the Study sheet cites it
    with monkeypatch.context() as m:
        m.setattr(workbook, "_rows_xml_ok", lambda *a: False)
        write_workbook(tmp_path / "slow" / "w.xlsx", rep)
    with zipfile.ZipFile(tmp_path / "fast" / "w.xlsx") as a, \
            zipfile.ZipFile(tmp_path / "slow" / "w.xlsx") as b:
        names = [n for n in a.namelist() if n != "docProps/core.xml"]   # core.xml: the time
        assert names == [n for n in b.namelist() if n != "docProps/core.xml"]
        for n in names:
            assert a.read(n) == b.read(n), n
