"""The XLSX workbook: layout, units, safety of text, empty cells for NaN, and live Check formulas
recalculated by an independent spreadsheet program (LibreOffice, headless)."""
from __future__ import annotations

import dataclasses
import math
import os
import re
import shutil
import subprocess
import zipfile
from pathlib import Path

import numpy as np
import openpyxl
import pandas as pd
import pytest

from sweep.models import load_timer
from sweep.physics import Load, Parts, evaluate
from sweep.writers.workbook import ENG_FORMAT, KM_FORMAT, SHEETS, write_workbook
from tests.fake_report import make_report

HOSTILE_TITLE = '=HYPERLINK("http://x","y")'
HOSTILE_TEXTS = ["+1+1", "@SUM(A1)", "-2+3", "\t=1+1", "=cmd|' /C calc'!A0"]
ERRORS = ("#VALUE!", "#NAME?", "#DIV/0!", "#REF!", "#NUM!", "#N/A", "#NULL!")


def _hostile_report():
    rep = make_report(title=HOSTILE_TITLE)
    rep.notes = rep.notes + [(t, t) for t in HOSTILE_TEXTS]
    rep.summary = rep.summary + [("Verdict", "-2+3"), ("=label", "@SUM(A1)")]
    rep.study_rows = rep.study_rows + [("conditions", "temperature", "{ min = -10, max = 40 }",
                                        "=not a formula"), ("parts", "note", "", "")]
    return rep


@pytest.fixture(scope="module")
def book(tmp_path_factory):
    rep = _hostile_report()
    path = tmp_path_factory.mktemp("wb") / "demo.xlsx"
    write_workbook(path, rep)
    return rep, path, openpyxl.load_workbook(path)


def _headers(ws, row):
    return [c.value for c in ws[row]]


def test_sheet_names_in_order(book):
    _, _, wb = book
    assert wb.sheetnames == ["Summary", "Designs", "Points", "Parts", "Check", "Study", "Notes"]
    assert tuple(wb.sheetnames) == SHEETS


def test_headers_carry_units_and_registry_labels(book):
    _, _, wb = book
    points = _headers(wb["Points"], 2)
    for h in ("RA [Ω]", "RB [Ω]", "C [F]", "Supply [V]", "Ambient [°C]", "Frequency [Hz]",
              "Supply current [A]", "Junction [°C]", "Flags"):
        assert h in points
    designs = _headers(wb["Designs"], 1)
    assert designs[:6] == ["Rank", "Design", "RA [Ω]", "RB [Ω]", "C [F]", "Result"]
    for h in ("Frequency [Hz] worst-case min", "Frequency [Hz] worst-case max",
              "Frequency [Hz] nominal", "Frequency [Hz] Monte Carlo std. dev.", "Yield",
              "S/N [dB]", "Sensitivity to RA", "Sensitivity to C", "Feasible", "Flags"):
        assert h in designs
    check = _headers(wb["Check"], 5)
    assert "Frequency [Hz] formula" in check and "Duty formula" in check


def test_frozen_panes_and_filters(book):
    rep, _, wb = book
    assert wb["Designs"].freeze_panes == "G2"     # rank, design, RA, RB, C, result
    assert wb["Points"].freeze_panes == "C3"      # note row + header; design, condition
    assert wb["Parts"].freeze_panes == "A2"
    assert wb["Check"].freeze_panes == "C6"
    assert wb["Study"].freeze_panes == "A3"
    n_d, n_p = len(rep.designs), len(rep.points)
    d_last = openpyxl.utils.get_column_letter(rep.designs.shape[1] + 1)   # + the Result column
    assert wb["Designs"].auto_filter.ref == f"A1:{d_last}{n_d + 1}"
    last_col = openpyxl.utils.get_column_letter(rep.points.shape[1])
    assert wb["Points"].auto_filter.ref == f"A2:{last_col}{n_p + 2}"
    assert wb["Points"]["A1"].value == rep.points_note


def test_rows_follow_the_report(book):
    rep, _, wb = book
    ws = wb["Designs"]
    d = rep.designs
    got = [[c.value for c in row] for row in ws.iter_rows(min_row=2, max_col=5)]
    want = d[["rank", "design", "ra_ohm", "rb_ohm", "c_f"]].to_numpy().tolist()
    assert got == want
    ws = wb["Points"]
    col = _headers(ws, 2).index("Frequency [Hz]") + 1
    got = np.array([ws.cell(r, col).value for r in range(3, 3 + len(rep.points))], dtype=float)
    # xlsxwriter stores 16 significant digits: equal to 1 part in 1e15
    np.testing.assert_allclose(got, rep.points["frequency_hz"].to_numpy(), rtol=1e-15)


def test_pass_fail_reads_without_colour(book):
    rep, _, wb = book
    ws = wb["Designs"]
    d = rep.designs
    bad = (~d["feasible"]) | (d["flags"] != "")
    assert bad.any() and (~bad).any()
    for i, is_bad in enumerate(bad, start=2):
        result, yield_cell = ws.cell(i, 6), ws.cell(i, 17)
        assert result.value == ("fail" if is_bad else "pass")
        # grey-scale print: failing rows differ in type style, not only in hue
        assert bool(yield_cell.font.italic) == bool(is_bad)
        assert bool(result.font.bold) == bool(is_bad)
        assert result.fill.fgColor.rgb != "00000000"


def test_number_formats_keep_true_numbers(book):
    # SI prefixes by thousands: common practice for engineering tables
    _, _, wb = book
    ws = wb["Points"]
    h = _headers(ws, 2)
    ra, c, duty = (ws.cell(3, h.index(x) + 1) for x in ("RA [Ω]", "C [F]", "Duty"))
    assert isinstance(ra.value, (int, float)) and ra.value >= 1000
    assert ra.number_format == KM_FORMAT.replace("0.00", "0.0#")
    assert isinstance(c.value, float) and c.value < 1e-6
    assert c.number_format == ENG_FORMAT.replace("0.00", "0.0#")
    assert duty.number_format.endswith("%")
    freq = ws.cell(3, h.index("Frequency [Hz]") + 1)
    assert freq.number_format == KM_FORMAT       # every frequency here is above 1 Hz
    tol = wb["Parts"].cell(2, 7)
    assert tol.value in (0.05, 0.1) and tol.number_format.endswith("%")


def test_study_sheet_round_trips(book):
    rep, _, wb = book
    ws = wb["Study"]
    assert _headers(ws, 2)[:4] == ["Section", "Key", "Value (TOML)", "Meaning"]
    rows = [tuple("" if v is None else v for v in r)
            for r in ws.iter_rows(min_row=3, max_col=4, values_only=True)]
    assert rows == [tuple(r) for r in rep.study_rows]
    for row in ws.iter_rows(min_row=3, min_col=3, max_col=3):
        assert row[0].data_type == "s" and row[0].number_format == "@"


def test_user_text_is_never_a_formula(book):
    _, path, wb = book
    title = wb["Summary"]["A1"]
    assert title.value == HOSTILE_TITLE and title.data_type == "s"
    notes = {r[0].value: r[1] for r in wb["Notes"].iter_rows(min_row=2, max_col=2)}
    for t in HOSTILE_TEXTS:
        assert notes[t].value == t and notes[t].data_type == "s"
    found = [c for ws in wb for row in ws.iter_rows() for c in row
             if isinstance(c.value, str) and c.value in ("-2+3", "@SUM(A1)", "=label")]
    assert found and all(c.data_type == "s" for c in found)
    # the only formulas in the file are the Check sheet's
    for ws in wb:
        if ws.title != "Check":
            assert not any(c.data_type == "f" for row in ws.iter_rows() for c in row), ws.title
    with zipfile.ZipFile(path) as z:
        xml = "".join(z.read(n).decode("utf-8") for n in z.namelist() if n.endswith(".xml"))
    assert "<f>HYPERLINK" not in xml and "<f>SUM" not in xml


def test_nan_and_inf_write_empty_cells(tmp_path):
    rep = make_report()
    pts = rep.points.copy()
    pts.loc[0, "frequency_hz"] = np.nan
    pts.loc[1, "frequency_hz"] = np.inf
    pts.loc[2, "frequency_hz"] = -np.inf
    rep.points = pts
    d = rep.designs.copy()
    d.loc[0, "yield"] = np.inf
    rep.designs = d
    ck = rep.check.copy()
    ck.loc[ck.index[0], "real_frequency_hz"] = np.nan
    rep.check = ck
    rep.run_info = {**rep.run_info, "elapsed_s": float("nan")}
    path = tmp_path / "nan.xlsx"
    write_workbook(path, rep)
    wb = openpyxl.load_workbook(path)
    ws = wb["Points"]
    col = _headers(ws, 2).index("Frequency [Hz]") + 1
    assert [ws.cell(r, col).value for r in (3, 4, 5)] == [None, None, None]
    assert ws.cell(6, col).value == pytest.approx(rep.points["frequency_hz"][3])
    assert wb["Designs"].cell(2, _headers(wb["Designs"], 1).index("Yield") + 1).value is None
    chk = wb["Check"]
    assert chk.cell(6, _headers(chk, 5).index("Frequency [Hz] engine realistic") + 1).value is None
    # the spec's open side (-inf) is an empty cell too
    spec = [r for r in wb["Summary"].iter_rows(values_only=True) if r[0] == "duty"][0]
    assert spec[2] is None and spec[3] == pytest.approx(0.7)
    with zipfile.ZipFile(path) as z:
        xml = "".join(z.read(n).decode("utf-8") for n in z.namelist() if n.endswith(".xml"))
    assert 't="e"' not in xml and "#NUM!" not in xml
    assert not re.search(r"<v>[^<]*(?:inf|nan)", xml, flags=re.IGNORECASE)


def test_write_is_atomic(tmp_path):
    path = tmp_path / "out.xlsx"
    path.write_bytes(b"old contents")
    bad = make_report()
    bad.points = None                      # the writer fails half-way through
    with pytest.raises(Exception):
        write_workbook(path, bad)
    assert path.read_bytes() == b"old contents"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["out.xlsx"]
    write_workbook(path, make_report())
    assert zipfile.is_zipfile(path)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["out.xlsx"]


# --- live formulas, recalculated by LibreOffice -------------------------------------------------
_PARTS = {"astable": ["ra_ohm", "rb_ohm", "c_f"], "astable-diode": ["ra_ohm", "rb_ohm", "c_f"],
          "astable-symmetric": ["r_ohm", "c_f"], "monostable": ["r_ohm", "c_f"], "bistable": []}


def _check_report(circuit: str, rows: list[dict]):
    """A report whose Check rows carry the engine's ideal and realistic figures for ``rows``."""
    rep = make_report()
    if circuit == "bistable":
        return dataclasses.replace(rep, circuit=circuit, part_columns=[], main_output=None,
                                   check=pd.DataFrame())
    df = pd.DataFrame(rows)
    outs = ["pulse_width_s"] if circuit == "monostable" else ["frequency_hz", "duty"]
    kw = {p.split("_")[0]: df[p].to_numpy() for p in _PARTS[circuit]}
    args = dict(vcc=df["vcc_v"].to_numpy(), temperature=25.0,
                control_voltage=df["control_voltage_v"].to_numpy(), **kw)
    timer = load_timer("cmos")
    ideal = evaluate(circuit, timer, Parts(), Load(), ideal=True, **args)
    real = evaluate(circuit, timer, Parts(), Load(), **args)
    check = pd.DataFrame({"rank": np.arange(1, len(df) + 1), "design": np.arange(11, 11 + len(df))})
    for col in [*_PARTS[circuit], "vcc_v", "control_voltage_v"]:
        check[col] = df[col].to_numpy()
    check["diode_drop_v"] = 0.0            # ideal mode drops the diode [DOMAIN.md section 9]
    for o in outs:
        check[f"ideal_{o}"] = ideal[o]
        check[f"real_{o}"] = real[o]
    return dataclasses.replace(rep, circuit=circuit, part_columns=_PARTS[circuit],
                               main_output=outs[0], check=check)


NAN = float("nan")
CASES = {
    "astable": [dict(ra_ohm=1e3, rb_ohm=10e3, c_f=100e-9, vcc_v=9.0, control_voltage_v=NAN),
                dict(ra_ohm=4.7e3, rb_ohm=47e3, c_f=2.2e-6, vcc_v=5.0, control_voltage_v=NAN)],
    "astable-vc": [dict(ra_ohm=2.2e3, rb_ohm=22e3, c_f=470e-9, vcc_v=12.0, control_voltage_v=NAN),
                   dict(ra_ohm=2.2e3, rb_ohm=22e3, c_f=470e-9, vcc_v=12.0, control_voltage_v=6.0)],
    "astable-diode": [dict(ra_ohm=10e3, rb_ohm=47e3, c_f=1e-6, vcc_v=9.0, control_voltage_v=NAN),
                      dict(ra_ohm=10e3, rb_ohm=47e3, c_f=1e-6, vcc_v=9.0, control_voltage_v=7.0)],
    "astable-symmetric": [dict(r_ohm=10e3, c_f=10e-9, vcc_v=5.0, control_voltage_v=NAN),
                          dict(r_ohm=10e3, c_f=10e-9, vcc_v=5.0, control_voltage_v=2.5)],
    "monostable": [dict(r_ohm=100e3, c_f=10e-6, vcc_v=12.0, control_voltage_v=NAN),
                   dict(r_ohm=100e3, c_f=10e-6, vcc_v=12.0, control_voltage_v=10.0)],
    "bistable": [],
}


def _soffice() -> str | None:
    return shutil.which("soffice") or shutil.which("libreoffice")


_XCU = """<?xml version="1.0" encoding="UTF-8"?>
<oor:items xmlns:oor="http://openoffice.org/2001/registry"
           xmlns:xs="http://www.w3.org/2001/XMLSchema"
           xmlns:xsi="http://www.w3.org/2001/XMLSchema-instance">
  <item oor:path="/org.openoffice.Office.Calc/Formula/Load">
    <prop oor:name="OOXMLRecalcMode" oor:op="fuse"><value>0</value></prop>
  </item>
  <item oor:path="/org.openoffice.Office.Calc/Formula/Load">
    <prop oor:name="ODFRecalcMode" oor:op="fuse"><value>0</value></prop>
  </item>
</oor:items>
"""


def _recalculate(files: list[Path], tmp_path: Path) -> dict[str, Path]:
    """Open each workbook in LibreOffice with 'always recalculate' and save it again as xlsx."""
    exe = _soffice()
    if exe is None:
        if os.environ.get("CI"):
            pytest.fail("LibreOffice (soffice) is not on PATH, and CI must run the recalculation test")
        pytest.skip("LibreOffice (soffice) is not on PATH: live-formula recalculation not checked")
    profile = tmp_path / "lo-profile"
    (profile / "user").mkdir(parents=True)
    (profile / "user" / "registrymodifications.xcu").write_text(_XCU, encoding="utf-8")
    out = tmp_path / "recalculated"
    out.mkdir()
    cmd = [exe, f"-env:UserInstallation={profile.as_uri()}", "--headless", "--norestore",
           "--convert-to", "xlsx", "--outdir", str(out), *map(str, files)]
    proc = subprocess.run(cmd, capture_output=True, text=True, timeout=300, stdin=subprocess.DEVNULL)
    got = {p.name: p for p in out.glob("*.xlsx")}
    assert len(got) == len(files), f"LibreOffice failed: {proc.returncode} {proc.stdout} {proc.stderr}"
    return got


def test_check_formulas_recalculate_to_engine_ideal(tmp_path):
    src = tmp_path / "src"
    src.mkdir()
    reports, files = {}, []
    for name, rows in CASES.items():
        circuit = "astable" if name == "astable-vc" else name
        reports[name] = _check_report(circuit, rows)
        path = src / f"{name}.xlsx"
        # cached results deliberately 0: only a real recalculation gives the right figures
        write_workbook(path, reports[name], cached_results=False)
        files.append(path)
    done = _recalculate(files, tmp_path)

    for name, rep in reports.items():
        values = openpyxl.load_workbook(done[f"{name}.xlsx"], data_only=True)
        formulas = openpyxl.load_workbook(done[f"{name}.xlsx"])
        # no error value anywhere, in any sheet
        for ws in values:
            for row in ws.iter_rows():
                for c in row:
                    v = c.value
                    assert c.data_type != "e", (name, ws.title, c.coordinate, v)
                    if isinstance(v, str):
                        assert v not in ERRORS and not v.startswith("Err:"), (name, c.coordinate)
        if rep.circuit == "bistable":
            assert "no timing" in values["Check"]["A1"].value
            continue
        ws, wf = values["Check"], formulas["Check"]
        head = _headers(ws, 5)
        outs = ["pulse_width_s"] if rep.circuit == "monostable" else ["frequency_hz", "duty"]
        labels = {"frequency_hz": ("Frequency [Hz]", "Frequency"), "duty": ("Duty", "Duty"),
                  "pulse_width_s": ("Pulse width [s]", "Pulse width")}
        for k in range(len(rep.check)):
            r = 6 + k
            for o in outs:
                fcol = head.index(f"{labels[o][0]} formula") + 1
                dcol = head.index(f"{labels[o][1]}: formula vs ideal") + 1
                assert str(wf.cell(r, fcol).value).startswith("="), "formula kept live"
                want = rep.check[f"ideal_{o}"].iloc[k]
                got = ws.cell(r, fcol).value
                # [book: textbook formulas, DOMAIN.md section 2] evaluated by LibreOffice
                assert got == pytest.approx(want, rel=1e-9), (name, k, o, got, want)
                assert abs(ws.cell(r, dcol).value) < 1e-9
    # outside facts beside the engine: the rules of thumb printed in every 555 text [book]
    ws = openpyxl.load_workbook(done["astable.xlsx"], data_only=True)["Check"]
    head = _headers(ws, 5)
    f = ws.cell(6, head.index("Frequency [Hz] formula") + 1).value
    assert f == pytest.approx(1.44 / ((1e3 + 2 * 10e3) * 100e-9), rel=2e-3)   # f ~ 1.44/((RA+2RB)C)
    d = ws.cell(6, head.index("Duty formula") + 1).value
    assert d == pytest.approx(11e3 / 21e3, rel=1e-9)                         # (RA+RB)/(RA+2RB)
    ws = openpyxl.load_workbook(done["monostable.xlsx"], data_only=True)["Check"]
    head = _headers(ws, 5)
    t = ws.cell(6, head.index("Pulse width [s] formula") + 1).value
    assert t == pytest.approx(1.1 * 100e3 * 10e-6, rel=2e-3)                 # t ~ 1.1 RC, 0.13 % high
    assert t == pytest.approx(math.log(3) * 100e3 * 10e-6, rel=1e-12)


def test_check_cached_results_are_the_engine_figures(tmp_path):
    rep = _check_report("astable-diode", CASES["astable-diode"])
    path = tmp_path / "cached.xlsx"
    write_workbook(path, rep)
    ws = openpyxl.load_workbook(path, data_only=True)["Check"]
    head = _headers(ws, 5)
    assert "High time [s] formula" in head and "Diode drop [V]" in head
    for k in range(len(rep.check)):
        got = ws.cell(6 + k, head.index("Frequency [Hz] formula") + 1).value
        assert got == pytest.approx(rep.check["ideal_frequency_hz"].iloc[k], rel=1e-15)
    # the blue input cells are the part values, as plain numbers
    ra = openpyxl.load_workbook(path)["Check"].cell(6, head.index("RA [Ω]") + 1)
    assert ra.value == 10e3 and ra.font.color.rgb.endswith("0000FF")
