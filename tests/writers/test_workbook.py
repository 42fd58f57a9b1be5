"""The XLSX workbook: layout, units, safety of text, empty cells for NaN, live Check formulas
recalculated by an independent spreadsheet program (LibreOffice, headless), the numbers as that
program shows them, the Result words, and what a printout holds."""
from __future__ import annotations

import csv
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
from scipy.integrate import solve_ivp

from sweep.reporting import circuit_text
from sweep.models import load_timer
from sweep.physics import Load, Parts, evaluate
from sweep.writers.workbook import (CAP_FORMAT, ENG_FORMAT, KM3_FORMAT, KM_FORMAT, PRINT_ROWS,
                                    SHEETS, write_workbook)
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
    for h in ("RA [Ω]", "RB [Ω]", "C [pF]", "Supply [V]", "Ambient [°C]", "Frequency [Hz]",
              "Supply current [A]", "Junction [°C]", "Flags"):
        assert h in points
    designs = _headers(wb["Designs"], 1)
    assert designs[:6] == ["Rank", "Design", "RA [Ω]", "RB [Ω]", "C [pF]", "Verdict"]
    for h in ("Frequency [Hz] worst-case min", "Frequency [Hz] worst-case max",
              "Frequency [Hz] nominal", "Frequency [Hz] Monte Carlo std. dev.", "Yield",
              "S/N [dB]", "Sensitivity to RA", "Sensitivity to C", "Feasible", "Flags",
              "Yield 95 % low", "Yield 95 % high", "Stalls at"):
        assert h in designs
    check = _headers(wb["Check"], 5)
    assert "Frequency [Hz] formula" in check and "Duty formula" in check


def test_frozen_panes_and_filters(book):
    rep, _, wb = book
    assert wb["Designs"].freeze_panes == "G2"     # rank, design, RA, RB, C, verdict
    assert wb["Points"].freeze_panes == "C3"      # note row + header; design, condition
    assert wb["Parts"].freeze_panes == "A2"
    assert wb["Check"].freeze_panes == "C6"
    assert wb["Study"].freeze_panes == "A3"
    n_d, n_p = len(rep.designs), len(rep.points)
    d_last = openpyxl.utils.get_column_letter(rep.designs.shape[1])
    assert wb["Designs"].auto_filter.ref == f"A1:{d_last}{n_d + 1}"
    last_col = openpyxl.utils.get_column_letter(rep.points.shape[1])
    assert wb["Points"].auto_filter.ref == f"A2:{last_col}{n_p + 2}"
    assert wb["Points"]["A1"].value == rep.points_note


def test_rows_follow_the_report(book):
    rep, _, wb = book
    ws = wb["Designs"]
    d = rep.designs
    got = [[c.value for c in row] for row in ws.iter_rows(min_row=2, max_col=5)]
    want = d[["rank", "design", "ra_ohm", "rb_ohm", "c_f"]].to_numpy()
    want[:, 4] *= 1e12                        # C is held in picofarads, shown with its prefix
    np.testing.assert_allclose(np.array(got, dtype=float), want.astype(float), rtol=1e-15)
    ws = wb["Points"]
    col = _headers(ws, 2).index("Frequency [Hz]") + 1
    got = np.array([ws.cell(r, col).value for r in range(3, 3 + len(rep.points))], dtype=float)
    # xlsxwriter stores 16 significant digits: equal to 1 part in 1e15
    np.testing.assert_allclose(got, rep.points["frequency_hz"].to_numpy(), rtol=1e-15)


def _with_every_verdict(rep):
    """The demo report with a design of every verdict word."""
    d = rep.designs.copy()
    words = ["pass", "low yield", "not sampled", "spec miss", "limit", "stalls"]
    d["verdict"] = [words[i % len(words)] for i in range(len(d))]
    d.loc[d["verdict"] == "stalls", "stalls_at"] = "stalls at 60 °C, 6 V with C at -10 %"
    d.loc[d["verdict"] == "stalls", "wc_margin"] = -np.inf
    d.loc[d["verdict"] == "pass", "wc_margin"] = np.inf      # a study without spec limits
    rep.designs = d
    return rep


def test_verdict_words_come_from_the_report_and_read_without_colour(tmp_path):
    rep = _with_every_verdict(make_report())
    path = tmp_path / "verdict.xlsx"
    write_workbook(path, rep)
    wb = openpyxl.load_workbook(path)
    ws = wb["Designs"]
    head = _headers(ws, 1)
    vc, yc, mc = (head.index(h) + 1 for h in ("Verdict", "Yield", "Worst-case margin"))
    seen = set()
    for i, (_, row) in enumerate(rep.designs.iterrows(), start=2):
        word = ws.cell(i, vc).value
        assert word == row["verdict"]                        # the analysis's word, not the writer's
        seen.add(word)
        failing = word in ("spec miss", "limit", "stalls")
        # grey-scale print: the kinds differ in type style, not only in hue
        cell, yield_cell = ws.cell(i, vc), ws.cell(i, yc)
        assert bool(yield_cell.font.italic) == failing
        assert bool(cell.font.bold) == failing
        assert bool(cell.font.italic) == (word != "pass")
        assert cell.fill.fgColor.rgb != "00000000"
        # an empty margin cell says why
        margin = ws.cell(i, mc).value
        if word == "stalls":
            assert margin == "stalls (see Stalls at)"
        elif word == "pass":
            assert margin == "no spec limit"
        else:
            assert isinstance(margin, float)
    assert seen == set(rep.verdicts)
    # every word is defined where a reader looks: the header's note and the Notes sheet
    comment = ws.cell(1, vc).comment
    notes = {r[0]: r[1] for r in wb["Notes"].iter_rows(min_row=2, max_col=2, values_only=True)}
    for word in seen:
        assert f"{word} = {rep.verdicts[word]}" in comment.text
        assert f"{word} = {rep.verdicts[word]}" in notes["Verdict"]


def test_number_formats_keep_true_numbers(book):
    # SI prefixes by thousands: common practice for engineering tables
    rep, _, wb = book
    ws = wb["Points"]
    h = _headers(ws, 2)
    ra, c, duty = (ws.cell(3, h.index(x) + 1) for x in ("RA [Ω]", "C [pF]", "Duty"))
    assert isinstance(ra.value, (int, float)) and ra.value >= 1000
    assert ra.number_format == KM_FORMAT.replace("0.00", "0.0#")
    assert isinstance(c.value, (int, float)) and c.value == pytest.approx(rep.points["c_f"].iloc[0] * 1e12)
    assert c.number_format == CAP_FORMAT
    assert duty.number_format.endswith("%")
    freq = ws.cell(3, h.index("Frequency [Hz]") + 1)
    assert freq.number_format == KM_FORMAT       # every frequency here is above 1 Hz
    tol = wb["Parts"].cell(2, 7)
    assert tol.value in (0.05, 0.1) and tol.number_format.endswith("%")


def _slow_report():
    """The demo report with every frequency divided by 100 (about 0.3 Hz to 7 Hz): nominal values
    below 1 Hz, while the Monte Carlo mean exists only for the top designs, all above 1 Hz."""
    rep = make_report()
    d = rep.designs.copy()
    for c in [c for c in d.columns if c.startswith("frequency_hz")]:
        d[c] = d[c] / 100
    d.loc[3:, "frequency_hz_mc_mean"] = np.nan
    d.loc[:2, "frequency_hz_mc_mean"] = np.maximum(d.loc[:2, "frequency_hz_mc_mean"], 1.5)
    rep.designs = d
    pts = rep.points.copy()
    pts["frequency_hz"] = pts["frequency_hz"] / 100
    rep.points = pts
    ck = rep.check.copy()
    for c in ("ideal_frequency_hz", "real_frequency_hz"):
        ck[c] = ck[c] / 100
    rep.check = ck
    rep.spec = [dataclasses.replace(rep.spec[0], lo=0.18, hi=0.22, target=0.2), rep.spec[1]]
    return rep


@pytest.mark.slow
def test_same_quantity_reads_the_same_way_on_every_sheet(tmp_path):
    rep = _slow_report()
    path = tmp_path / "slow.xlsx"
    write_workbook(path, rep)
    wb = openpyxl.load_workbook(path)
    d, pts, chk = wb["Designs"], wb["Points"], wb["Check"]
    dh, ph, ch = _headers(d, 1), _headers(pts, 2), _headers(chk, 5)
    formats = {}
    for h in dh:
        if h.startswith("Frequency [Hz]") and "std. dev." not in h:
            formats[f"Designs {h}"] = d.cell(2, dh.index(h) + 1).number_format
    formats["Points"] = pts.cell(3, ph.index("Frequency [Hz]") + 1).number_format
    for h in ("Frequency [Hz] formula", "Frequency [Hz] engine ideal",
              "Frequency [Hz] engine realistic"):
        formats[f"Check {h}"] = chk.cell(6, ch.index(h) + 1).number_format
    spec = [r for r in wb["Summary"].iter_rows() if r[0].value == "frequency"][0]
    formats["Summary spec"] = spec[2].number_format
    assert "Designs Frequency [Hz] Monte Carlo mean" in formats
    # one format for the quantity, and a plain three-decimal one, as every value is >= 0.1
    # [cp: plain numbers read best where they fit; engineering notation only where they do not]
    assert set(formats.values()) == {KM3_FORMAT}, formats
    # a quantity with values below 0.01 keeps engineering notation in every column
    sc = {d.cell(2, dh.index(h) + 1).number_format for h in dh if h.startswith("Supply current")
          and "std. dev." not in h}
    assert sc == {ENG_FORMAT}
    assert pts.cell(3, ph.index("Supply current [A]") + 1).number_format == ENG_FORMAT


def _as_shown(files: list[Path], tmp_path: Path) -> dict[str, list[list[str]]]:
    """Every sheet of every workbook as LibreOffice shows it (CSV, 'save cell contents as
    shown'), keyed '<file stem>-<sheet>'."""
    exe = _soffice()
    if exe is None:
        if os.environ.get("CI"):
            pytest.fail("LibreOffice (soffice) is not on PATH, and CI must run the rendering test")
        pytest.skip("LibreOffice (soffice) is not on PATH: number formats not rendered")
    out = tmp_path / "shown"
    out.mkdir()
    # CSV filter options: comma, double quote, UTF-8, ..., 9th token "as shown" = true,
    # 12th token -1 = every sheet to its own file [LibreOffice's documented CSV filter options]
    target = "csv:Text - txt - csv (StarCalc):44,34,76,1,,0,false,true,true,false,false,-1"
    cmd = [exe, f"-env:UserInstallation={(tmp_path / 'lo-csv').as_uri()}", "--headless",
           "--norestore", "--convert-to", target, "--outdir", str(out), *map(str, files)]
    proc = subprocess.run(cmd, capture_output=True, text=True, timeout=300, stdin=subprocess.DEVNULL)
    got = {p.stem: list(csv.reader(p.open(encoding="utf-8"))) for p in out.glob("*.csv")}
    assert got, f"LibreOffice failed: {proc.returncode} {proc.stdout} {proc.stderr}"
    return got


def _read_shown(text: str) -> tuple[float, float]:
    """(value, half of the last shown digit) of a number as displayed: '4.70 k', '1.2 M',
    '100.00E-9', '0.350'."""
    t = text.strip()
    if t.endswith("F"):                 # a capacitor: 470.0 nF, 2.2 µF, 100.0 pF
        t = t[:-1].strip()
        unit = {"p": 1e-12, "n": 1e-9, "µ": 1e-6}[t[-1]]
        mant = t[:-1].strip()
        return float(mant) * unit, 0.5 * 10.0 ** -len(mant.partition(".")[2]) * unit
    scale = {"k": 1e3, "M": 1e6}.get(t[-1:], 1.0)
    if scale != 1.0:
        t = t[:-1].strip()
    mant, _, exp = t.partition("E")
    decimals = len(mant.partition(".")[2])
    step = 0.5 * 10.0 ** -decimals * scale * (10.0 ** int(exp) if exp else 1.0)
    return float(t) * scale, step


@pytest.mark.slow
def test_numbers_render_as_plain_or_engineering_text(tmp_path):
    rep = _slow_report()
    pts = rep.points.copy()
    # tens of milliamperes (plain numbers) and one negative value: a conditional format's last
    # branch would drop its minus sign [LibreOffice and other spreadsheet programs alike]
    pts["output_current_a"] = 10 * pts["output_current_a"]
    pts.loc[0, "output_current_a"] = -pts.loc[0, "output_current_a"]
    rep.points = pts
    path = tmp_path / "shown.xlsx"
    write_workbook(path, rep)
    sheets = _as_shown([path], tmp_path)
    rows = sheets["shown-Points"]
    head = rows[1]
    col = {h: head.index(h) for h in head}
    freq = [r[col["Frequency [Hz]"]] for r in rows[2:]]
    # the review's complaint: 1.91 Hz must not read "1.91E+0"
    assert all(re.fullmatch(r"\d+\.\d{3}", t) for t in freq), freq[:5]
    assert all(re.fullmatch(r"\d+\.\d+ k|\d+\.\d+( M)?", r[col["RA [Ω]"]]) for r in rows[2:])
    # capacitors read like resistors, with a prefix: 470.0 nF, not 470.0E-9
    assert all(re.fullmatch(r"\d+\.\d+ [pnµ]F", r[col["C [pF]"]]) for r in rows[2:])
    # every shown number reads back as the true value, sign included, to its last digit
    names = {"Frequency [Hz]": "frequency_hz", "RA [Ω]": "ra_ohm", "RB [Ω]": "rb_ohm",
             "C [pF]": "c_f", "Supply current [A]": "supply_current_a",
             "Output current [A]": "output_current_a", "Period [s]": "period_s"}
    for h, name in names.items():
        for k, r in enumerate(rows[2:]):
            want = float(rep.points[name].iloc[k])
            got, step = _read_shown(r[col[h]])
            assert abs(got - want) <= step * 1.0001 + 1e-300, (h, k, r[col[h]], want)
    assert rows[2][col["Output current [A]"]].startswith("-")
    # the Designs sheet: the nominal and Monte Carlo mean columns read alike
    d = sheets["shown-Designs"]
    dh = d[0]
    nom, mean = dh.index("Frequency [Hz] nominal"), dh.index("Frequency [Hz] Monte Carlo mean")
    shown = [r[nom] for r in d[1:]] + [r[mean] for r in d[1:4]]
    assert all(re.fullmatch(r"\d+\.\d{3}", t) for t in shown), shown


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
          "astable-symmetric": ["r_ohm", "c_f"], "monostable": ["r_ohm", "c_f"],
          "missing-pulse": ["r_ohm", "c_f"], "bistable": []}
_MAIN = {"monostable": ["pulse_width_s"], "missing-pulse": ["timeout_s"]}


def _check_report(circuit: str, rows: list[dict]):
    """A report whose Check rows carry the engine's ideal and realistic figures for ``rows``."""
    rep = make_report()
    if circuit == "bistable":
        return dataclasses.replace(rep, circuit=circuit, circuit_text=circuit_text(circuit),
                                   part_columns=[], main_output=None,
                                   check=pd.DataFrame())
    df = pd.DataFrame(rows)
    outs = _MAIN.get(circuit, ["frequency_hz", "duty"])
    kw = {p.split("_")[0]: df[p].to_numpy() for p in _PARTS[circuit]}
    if circuit == "missing-pulse":
        kw["input_period"] = 0.1
    args = dict(vcc=df["vcc_v"].to_numpy(), temperature=25.0,
                control_voltage=df["control_voltage_v"].to_numpy(), **kw)
    timer = load_timer("cmos")
    ideal = evaluate(circuit, timer, Parts(), Load(), ideal=True, **args)
    real = evaluate(circuit, timer, Parts(), Load(), **args)
    check = pd.DataFrame({"rank": np.arange(1, len(df) + 1), "design": np.arange(11, 11 + len(df))})
    for col in [*_PARTS[circuit], "vcc_v", "control_voltage_v"]:
        check[col] = df[col].to_numpy()
    check["diode_drop_v"] = 0.0            # ideal mode drops the diode [the ideal mode: textbook formulas]
    for o in outs:
        check[f"ideal_{o}"] = ideal[o]
        check[f"real_{o}"] = real[o]
    return dataclasses.replace(rep, circuit=circuit, circuit_text=circuit_text(circuit),
                               part_columns=_PARTS[circuit],
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
    "missing-pulse": [dict(r_ohm=680e3, c_f=2.2e-6, vcc_v=12.0, control_voltage_v=NAN),
                      dict(r_ohm=680e3, c_f=2.2e-6, vcc_v=5.0, control_voltage_v=4.0)],
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


@pytest.mark.slow
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
    # the diode circuit with the drop a reader types into the blue Vd cell
    diode = _check_report("astable-diode", CASES["astable-diode"])
    diode.check["diode_drop_v"] = VD
    write_workbook(src / "diode-vd.xlsx", diode, cached_results=False)
    files.append(src / "diode-vd.xlsx")
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
        outs = _MAIN.get(rep.circuit, ["frequency_hz", "duty"])
        labels = {"frequency_hz": ("Frequency [Hz]", "Frequency"), "duty": ("Duty", "Duty"),
                  "pulse_width_s": ("Pulse width [s]", "Pulse width"),
                  "timeout_s": ("Timeout [s]", "Timeout")}
        for k in range(len(rep.check)):
            r = 6 + k
            for o in outs:
                fcol = head.index(f"{labels[o][0]} formula") + 1
                dcol = head.index(f"{labels[o][1]}: formula vs ideal") + 1
                assert str(wf.cell(r, fcol).value).startswith("="), "formula kept live"
                want = rep.check[f"ideal_{o}"].iloc[k]
                got = ws.cell(r, fcol).value
                # [book: textbook formulas, e.g. Horowitz & Hill, *The Art of Electronics*] evaluated by LibreOffice
                assert got == pytest.approx(want, rel=1e-9), (name, k, o, got, want)
                assert abs(ws.cell(r, dcol).value) < 1e-9
    _check_diode_drop_cell(diode, openpyxl.load_workbook(done["diode-vd.xlsx"], data_only=True))
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
    # the missing-pulse detector's timeout: ln 3 R C with the internal divider [book]
    ws = openpyxl.load_workbook(done["missing-pulse.xlsx"], data_only=True)["Check"]
    head = _headers(ws, 5)
    t = ws.cell(6, head.index("Timeout [s] formula") + 1).value
    assert t == pytest.approx(math.log(3) * 680e3 * 2.2e-6, rel=1e-12)


VD = 0.7     # a silicon diode's forward drop [cp: the figure every electronics text uses]


def _ode_period(ra, rb, c, vcc, vd, vc) -> tuple[float, float]:
    """(high time, low time) of the diode astable's RC network, simulated by scipy's ODE solver
    between the thresholds Vc/2 and Vc: C charges through RA and the diode towards VCC - Vd,
    and discharges through RB towards 0 V (the discharge pin) [book: the textbook network]."""
    def run(rhs, v0, target, direction, tau):
        def hit(t, y):
            return y[0] - target
        hit.terminal, hit.direction = True, direction
        sol = solve_ivp(rhs, (0.0, 20 * tau), [v0], events=hit, method="DOP853",
                        rtol=1e-12, atol=1e-14 * vcc)
        return float(sol.t_events[0][0])
    t_high = run(lambda t, y: [(vcc - vd - y[0]) / (ra * c)], vc / 2, vc, 1.0, ra * c)
    t_low = run(lambda t, y: [-y[0] / (rb * c)], vc, vc / 2, -1.0, rb * c)
    return t_high, t_low


def _check_diode_drop_cell(rep, wb) -> None:
    """With Vd = 0.7 V typed in, the live formulas follow the RC network with the drop; with the
    Shockley diode's drop at the timing current typed in, the drop explains most of the gap
    between the engine's ideal and realistic duty."""
    ws = wb["Check"]
    head = _headers(ws, 5)
    for k in range(len(rep.check)):
        row = rep.check.iloc[k]
        vcc = row["vcc_v"]
        vc = row["control_voltage_v"] if np.isfinite(row["control_voltage_v"]) else 2 / 3 * vcc
        th, tl = _ode_period(row["ra_ohm"], row["rb_ohm"], row["c_f"], vcc, VD, vc)
        got = {h: ws.cell(6 + k, head.index(h) + 1).value
               for h in ("High time [s] formula", "Frequency [Hz] formula", "Duty formula")}
        assert got["High time [s] formula"] == pytest.approx(th, rel=1e-8)
        assert got["Frequency [Hz] formula"] == pytest.approx(1 / (th + tl), rel=1e-8)
        assert got["Duty formula"] == pytest.approx(th / (th + tl), rel=1e-8)
        if not np.isfinite(row["control_voltage_v"]):
            # [book: the Shockley law, Vd = n Vt ln(I / Is + 1), at 25 C with the small-signal
            # silicon figures Is = 2.5 nA, n = 1.75 (from memory)] the drop at the charging
            # current in the middle of the swing makes most of the duty shift at 9 V
            i_mid = (vcc - 0.75 * vc - 0.45) / row["ra_ohm"]
            vd = 1.75 * 0.025693 * math.log(i_mid / 2.5e-9 + 1.0)
            th_d, tl_d = _ode_period(row["ra_ohm"], row["rb_ohm"], row["c_f"], vcc, vd, vc)
            gap = abs(row["real_duty"] - row["ideal_duty"])
            assert gap > 0.01
            assert abs(th_d / (th_d + tl_d) - row["real_duty"]) < 0.25 * gap


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
    wf = openpyxl.load_workbook(path)["Check"]
    ra = wf.cell(6, head.index("RA [Ω]") + 1)
    assert ra.value == 10e3 and ra.font.color.rgb.endswith("0000FF")
    # the diode drop is an input like the parts: 0 (the ideal case), blue, and the high-time
    # formula of its row really reads it
    for k in range(len(rep.check)):
        vd = wf.cell(6 + k, head.index("Diode drop [V]") + 1)
        assert vd.value == 0 and vd.font.color.rgb.endswith("0000FF")
        assert vd.fill.fgColor.rgb == ra.fill.fgColor.rgb
        high = wf.cell(6 + k, head.index("High time [s] formula") + 1).value
        assert re.search(rf"\b{vd.coordinate}\b", high), high
    # one line tells the reader what to type there
    hint = " ".join(str(wf.cell(r, 1).value or "") for r in range(1, 5))
    assert "0.7 V" in hint and "Vd" in hint


# --- printing -------------------------------------------------------------------------------
@pytest.fixture(scope="module")
def big_book(tmp_path_factory):
    """A workbook of 600 designs and 5,400 points: far more than anyone prints."""
    rep = make_report(n_designs=600)
    path = tmp_path_factory.mktemp("print") / "big.xlsx"
    write_workbook(path, rep)
    return rep, path, openpyxl.load_workbook(path)


def _area(ws) -> tuple[int, int]:
    """(last row, last column), 1-based, of a sheet's single print area."""
    ref = ws.print_area
    assert ref is not None, ws.title
    ref = ref[0] if isinstance(ref, (list, tuple)) else ref
    ref = str(ref).split("!")[-1].replace("$", "")
    _, last = ref.split(":")
    col, row = openpyxl.utils.cell.coordinate_from_string(last)
    return row, openpyxl.utils.column_index_from_string(col)


@pytest.mark.slow
def test_print_setup_keeps_the_big_tables_short(big_book):
    rep, _, wb = big_book
    for name in ("Summary", "Designs", "Points", "Parts", "Check", "Study", "Notes"):
        ws = wb[name]
        assert ws.page_setup.orientation == "landscape", name
        assert ws.sheet_properties.pageSetUpPr.fitToPage, name
        assert ws.page_setup.fitToHeight == 0, name        # as many pages down as it takes
        # Points and the Check sheet (18 columns here) print two pages wide, keys repeated
        wide = 2 if name in ("Points", "Check") else 1
        assert (ws.page_setup.fitToWidth or 1) == wide, name
    assert wb["Check"].print_title_cols.replace("$", "") == "A:B"
    for name in ("Summary", "Parts", "Check", "Study", "Notes"):
        assert not wb[name].print_area, name               # the whole sheet, one page wide
    # Designs: the key columns (not all of them) and the first PRINT_ROWS rows
    d = wb["Designs"]
    rows, cols = _area(d)
    assert rows == 1 + PRINT_ROWS and len(rep.designs) > PRINT_ROWS
    head = _headers(d, 1)
    assert 10 <= cols <= 16 < len(head)
    for h in ("Rank", "RA [Ω]", "C [pF]", "Verdict", "Yield", "Frequency [Hz] nominal"):
        assert head.index(h) < cols, h
    assert d.print_title_rows.replace("$", "") == "1:1"
    assert "designs.parquet" in d.oddHeader.left.text and f"{PRINT_ROWS} rows" in d.oddHeader.left.text
    assert "spec miss" in d.oddFooter.left.text and "low yield" in d.oddFooter.left.text
    # Points: every column, the first PRINT_ROWS rows, the key columns on every page
    p = wb["Points"]
    rows, cols = _area(p)
    assert rows == 2 + PRINT_ROWS and len(rep.points) > PRINT_ROWS
    assert cols == rep.points.shape[1]
    assert p.print_title_rows.replace("$", "") == "2:2"
    assert p.print_title_cols.replace("$", "") == "A:B"


@pytest.mark.slow
def test_big_workbook_prints_on_few_pages(big_book, tmp_path):
    # printed by an independent program: LibreOffice's PDF export honours the print setup
    _, path, _ = big_book
    exe = _soffice()
    if exe is None:
        if os.environ.get("CI"):
            pytest.fail("LibreOffice (soffice) is not on PATH, and CI must run the printing test")
        pytest.skip("LibreOffice (soffice) is not on PATH: printing not checked")
    cmd = [exe, f"-env:UserInstallation={(tmp_path / 'lo-pdf').as_uri()}", "--headless",
           "--norestore", "--convert-to", "pdf", "--outdir", str(tmp_path), str(path)]
    proc = subprocess.run(cmd, capture_output=True, text=True, timeout=300, stdin=subprocess.DEVNULL)
    pdf = tmp_path / "big.pdf"
    assert pdf.exists(), f"LibreOffice failed: {proc.returncode} {proc.stdout} {proc.stderr}"
    pages = len(re.findall(rb"/Type\s*/Page(?![s\w])", pdf.read_bytes()))
    # 200 designs at ~45 rows a page, 200 points rows twice (two pages wide) and a page or two
    # for each small sheet: about 25; the whole tables would take well over a hundred
    assert 8 <= pages <= 35, pages


def test_readable_headers_times_notes_and_control_pin(tmp_path):
    rep = make_report()
    long_note = "A long note about the scenario. " * 12
    rep.study_rows = rep.study_rows + [("study", "notes", f'"{long_note}"', "free text, copied")]
    d = rep.designs.copy()
    d["period_s_nom"] = 1 / d["frequency_hz_nom"]          # about 0.4 s: a plain format's range
    d["high_time_s_nom"] = 0.002 + 0 * d["frequency_hz_nom"]  # milliseconds: engineering's
    rep.designs = d
    path = tmp_path / "readable.xlsx"
    write_workbook(path, rep)
    wb = openpyxl.load_workbook(path)
    ws = wb["Designs"]
    # the header row is at most three lines tall (it was five)
    assert ws.row_dimensions[1].height <= 3 * 15
    # seconds show one way on a sheet: engineering notation, whatever their size
    fmts = {ws.cell(2, i).number_format for i in range(1, ws.max_column + 1)
            if "[s]" in str(ws.cell(1, i).value)}
    assert fmts == {ENG_FORMAT}
    # the Study sheet wraps a long note in a row tall enough for it
    st = wb["Study"]
    row = next(r for r in st.iter_rows(min_row=3) if r[1].value == "notes")
    assert row[2].alignment.wrap_text and st.row_dimensions[row[2].row].height > 15
    # every Check formula reads the control-pin cell (blank: the internal divider), never a
    # hard-coded 2/3 of the supply alone
    ch = wb["Check"]
    head = _headers(ch, 5)
    vc = openpyxl.utils.get_column_letter(head.index("Control pin [V] (blank: divider)") + 1)
    th = head.index("High time [s] formula") + 1
    for r in range(6, 6 + len(rep.check)):
        f = ch.cell(r, th).value
        assert f"ISBLANK({vc}{r})" in f and f"{vc}{r})" in f.replace(f"ISBLANK({vc}{r})", ""), f
