"""The XLSX workbook: seven sheets a colleague can open, filter, check and re-run.

Sheets, in order: Summary, Designs, Points, Parts, Check, Study, Notes. The writer lays out what
the :class:`sweep.report.Report` holds and computes nothing but cell positions, the cached
results of the Check formulas (the engine's own figures) and the display formats.

Number formats (the choice)
---------------------------
Every numeric cell holds a true number in base SI units (ohm, farad, second, hertz, ampere...),
so sorting, filtering, the Check formulas and any formula a reader adds work on plain values.
A spreadsheet number format can divide by thousands (the ``,`` scaling) but cannot multiply,
so SI prefixes are possible above one and impossible below it. A quantity of the registry format
"eng" therefore takes one of four formats, chosen from the finite non-zero values the workbook
holds of that quantity (nominal, min, max, worst case, Monte Carlo mean, Points, Check, spec) so
the same quantity reads the same way on every sheet and in every column:

* every value >= 1 (resistances, most frequencies): ``KM_FORMAT``,
  ``[>=1000000]0.00,," M";[>=1000]0.00," k";0.00``, shown as ``4.70 k``, ``1.20 M``, ``2.05``;
* every value >= 0.1 (slow frequencies, times of a second or so): ``KM3_FORMAT``, the same
  with a plain three-decimal branch below 1000: ``1.911``, ``0.350``, ``4.70 k``;
* every value >= 0.01 (tens of milliamperes): ``KM4_FORMAT``, four decimals, so the smallest
  value still shows three figures: ``0.0134``;
* any value below 0.01, or below zero (µA currents, milliseconds): engineering
  notation ``ENG_FORMAT`` = ``##0.00E+0``, whose exponent is always a multiple of three, so it
  maps one-to-one on the SI prefix: ``100.00E-9`` = 100 n, ``2.20E-6`` = 2.2 µ. (Negative values
  cannot use the conditional formats: their last branch drops the minus sign.)

Two exceptions. Seconds (every statistic of a time) always take ``ENG_FORMAT``, so one sheet
never shows a time two ways. Capacitor values, the one part below one in SI units, are held in
picofarads (header ``C [pF]``) so the thousands scaling can print their prefix like a
resistor's: ``CAP_FORMAT`` shows ``470.0 nF``, ``2.2 µF``, ``100.0 pF``; the Check formulas
multiply the C cell by 1E-12. The parquet files keep farads.

A Monte Carlo standard deviation is a spread, often far smaller than its quantity, so its column
takes the same rule from its own values. Part values (RA, RB, R, C: standard values of two or
three figures) use ``0.0#`` in place of ``0.00`` (``4.7 k``, ``100.0E-9``), so a part reads as it
is marked; computed figures keep a fixed number of decimals so a column lines up.

Scaled helper columns (``C [nF]``) were rejected: they double the tables, need a per-column
prefix that fits no sweep spanning several decades, and would break the Check formulas, which
reference SI cells. Ratios (duty, yield, tolerance) use ``0.0%``; the registry's "fixed1",
"fixed2" and "int" formats map to ``0.0``, ``0.00`` and ``0``. The Summary and Notes sheets
explain the exponent-to-prefix reading.

Printing
--------
Every sheet prints landscape, one page wide, its header row repeated. Designs prints its key
columns (rank, parts, result, yield, margins, the main output's nominal, min and max) and its
first ``PRINT_ROWS`` rows; Points prints its first ``PRINT_ROWS`` rows two pages wide with its
key columns repeated (one page would shrink ~25 columns to unreadable type). A page header says
so and where the full table is (on screen, and in the Parquet files beside the workbook).

Safety of text
--------------
User text (title, notes, summary, study values, flags...) is written as text cells only
(``write_string``, or in a table the same inline-string XML, escaped by the library's own
functions), in a workbook opened with ``strings_to_formulas``, ``strings_to_numbers`` and
``strings_to_urls`` all off, so no text ever becomes a formula, number or link. Text starting
with = + - @ tab or CR also gets the "quote prefix" cell style, so editing the cell later in a
spreadsheet program keeps it text. NaN and infinities become empty cells, never error values.
"""
from __future__ import annotations

import json
import math
import textwrap
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd
import xlsxwriter
import xlsxwriter.utility
from xlsxwriter.utility import xl_col_to_name, xl_rowcol_to_cell

from sweep.report import Report
from sweep.writers.atomic import atomic_path
from sweep.values import format_eng, symbol_unit
from sweep.variables import AXES, STATS, VARIABLES

__all__ = ["write_workbook", "column_header", "column_format", "eng_number_format",
           "SHEETS", "KM_FORMAT", "KM3_FORMAT", "KM4_FORMAT", "ENG_FORMAT", "CAP_FORMAT",
           "PRINT_ROWS", "DESIGNS_ROWS"]

SHEETS = ("Summary", "Designs", "Points", "Parts", "Check", "Study", "Notes")


def _km(plain: str, scaled: str = "0.00") -> str:
    """M above a million, k above a thousand, ``plain`` below (a conditional number format)."""
    return f'[>=1000000]{scaled},," M";[>=1000]{scaled}," k";{plain}'


KM_FORMAT = _km("0.00")        # every value >= 1:    2.05, 4.70 k, 1.20 M
KM3_FORMAT = _km("0.000")      # every value >= 0.1:  0.350, 1.911
KM4_FORMAT = _km("0.0000")     # every value >= 0.01: 0.0134 (three figures at the bottom)
ENG_FORMAT = "##0.00E+0"       # anything smaller, or negative: 100.00E-9
_PART_FORMAT = {KM_FORMAT: _km("0.0#", "0.0#"), KM3_FORMAT: _km("0.0##", "0.0#"),
                KM4_FORMAT: _km("0.0###", "0.0#"), ENG_FORMAT: "##0.0#E+0"}
_PLAIN_STEPS = ((1.0, KM_FORMAT), (0.1, KM3_FORMAT), (0.01, KM4_FORMAT))
#: capacitances are held in picofarads so a number format can print the prefix: 470.0 nF
CAP_SCALE = 1e12
CAP_FORMAT = '[>=1000000]0.0#,," µF";[>=1000]0.0#," nF";0.0#" pF"'
CAP_HEADER = "C [pF]"
PRINT_ROWS = 200            # data rows of Designs and Points in the default print area
#: rows of the Designs sheet, best-ranked first; designs.parquet holds every design. 10 000
#: rows of 56 columns write in about 1.1-1.4 s on a loaded 2-core machine, about half of it the
#: zip compression of the file [measured: tests/benchmarks/workbook_rows.py]
DESIGNS_ROWS = 10_000
_PART_COLUMNS = ("ra_ohm", "rb_ohm", "r_ohm", "c_f")
_FIXED = {"pct": "0.0%", "fixed1": "0.0", "fixed2": "0.00", "fixed3": "0.000", "int": "0"}

_BOOL_FORMAT = '"TRUE";"TRUE";"FALSE"'   # shows a boolean cell as a word in every program
_DANGER = ("=", "+", "-", "@", "\t", "\r")   # text a spreadsheet could read as a formula
_MAX_ROWS = 1_048_576                        # rows in one sheet [cp: the spreadsheet programs' limit]
_CHUNK = 20_000                              # rows converted to Python objects at a time

# colours: light fills that print as distinct greys; pass/fail also differ in text and style
_HEADER_FILL = "#D9D9D9"
_FAIL_FILL = "#F8CBAD"
_PASS_FILL = "#E2EFDA"
_FLAG_FILL = "#FCE4D6"
_INPUT_FILL = "#FFF2CC"
_INPUT_FONT = "#0000FF"        # blue inputs [cp: spreadsheet modelling practice]
_CAUTION_FILL = "#FFE699"

_SAFETY_LINE = ("Mains-powered loads, relays and other inductive loads (fit a flyback diode), "
                "batteries and hot parts can hurt people and start fires. timer-sweep checks "
                "timing and electrical limits only: follow local codes and licensed practice, "
                "and have such designs reviewed by a qualified person.")
_FORMAT_LINE = ("Cells hold plain SI values (ohm, second, hertz, ampere, watt), except capacitor "
                "values, held in picofarads (C [pF]) so they print with a prefix like resistors: "
                "470.0 nF, 2.2 µF; a formula using C multiplies by 1E-12. Times always show in "
                "engineering notation. Large values "
                "show as 4.7 k or 1.2 M, others as plain numbers (1.911) when every value of that "
                "quantity is 0.01 or more; smaller ones in engineering notation whose exponent "
                "names the prefix: E-3 = m (milli), E-6 = µ (micro), E-9 = n (nano), E-12 = p "
                "(pico); e.g. 100.0E-9 F = 100 nF. A quantity reads the same way on every sheet.")
_PRINT_LINE = (f"Every sheet prints one page wide but Points (two, its key columns repeated). "
               f"Designs prints its key columns and first {PRINT_ROWS} rows, Points its first "
               f"{PRINT_ROWS} rows; the full tables are "
               "on screen and in designs.parquet and points.parquet beside the workbook. To print "
               "more, change or clear the sheet's print area.")
_CHECK_NOTE = ("Change a part value or the control pin (blue cells; C in pF, a blank control pin "
               "is the internal divider, 2/3 of the supply) to see the formula move; the "
               "engine's figures stay as computed")


# --- headers and number formats ----------------------------------------------------------------
_SUFFIXES = STATS           # per-design figures: suffix and the word a header says
_SPECIAL = {"verdict": ("Verdict", "text"), "c_f": (CAP_HEADER, "cap")}


def _split(name: str):
    """(base variable, suffix word) of a per-design column, or (None, None)."""
    for suffix, word in _SUFFIXES:
        if name.endswith(suffix) and name[:-len(suffix)] in VARIABLES:
            return VARIABLES[name[:-len(suffix)]], word
    return None, None


def _part_label(key: str) -> str:
    col = AXES.get(key, (None,))[0]
    return VARIABLES[col].label if col in VARIABLES else key.upper()


def column_header(name: str) -> str:
    """What a person reads for a machine column: 'ra_ohm' -> 'RA [Ω]',
    'frequency_hz_wc_min' -> 'Frequency [Hz] worst-case min', 'sens_ra' -> 'Sensitivity to RA'."""
    if name in _SPECIAL:
        return _SPECIAL[name][0]
    if name in VARIABLES:
        return VARIABLES[name].header
    var, word = _split(name)
    if var is not None:
        return f"{var.header} {word}"
    if name.startswith("sens_"):
        return f"Sensitivity to {_part_label(name[5:])}"
    return name


def column_format(name: str) -> str:
    """Registry format kind of a machine column: eng, pct, fixed1, fixed2, fixed3, int, text, bool."""
    if name in _SPECIAL:
        return _SPECIAL[name][1]
    if name in VARIABLES:
        return VARIABLES[name].fmt
    var, _ = _split(name)
    if var is not None:
        return var.fmt
    if name.startswith("sens_"):
        return "fixed3"
    return "general"


def eng_number_format(values, part: bool = False) -> str:
    """The display format of an "eng" quantity (see the module docstring), from the smallest
    finite non-zero value: KM_FORMAT from 1, KM3_FORMAT from 0.1, KM4_FORMAT from 0.01, else
    (or with any negative value) ENG_FORMAT; ``part=True`` for part values (0.0# for 0.00)."""
    v = np.asarray(values, dtype=float).ravel()
    v = v[np.isfinite(v) & (v != 0)]
    lo = float(v.min()) if v.size else 1.0
    fmt = next((f for bound, f in _PLAIN_STEPS if lo >= bound), ENG_FORMAT)
    return _PART_FORMAT[fmt] if part else fmt


def _seconds(name: str) -> bool:
    """A column of seconds (any statistic of a time): every sheet shows them in engineering
    notation, one way, whatever their size."""
    for prefix in ("ideal_", "real_", "f:"):
        if name.startswith(prefix):
            name = name[len(prefix):]
    var = VARIABLES.get(name) or _split(name)[0]
    return var is not None and var.unit == "s"


def _quantity(name: str) -> str | None:
    """The "eng" quantity a column shows ('frequency_hz_wc_min' -> 'frequency_hz'), or None for
    a column that takes its own format (a Monte Carlo spread, a non-eng column)."""
    for prefix in ("ideal_", "real_", "f:"):     # the Check sheet's engine and formula columns
        if name.startswith(prefix):
            name = name[len(prefix):]
    if name in VARIABLES:
        base = name
    elif name.endswith("_mc_std"):
        return None
    else:
        var, _ = _split(name)
        base = var.name if var is not None else None
    return base if base is not None and VARIABLES[base].fmt == "eng" else None


def _quantity_formats(report: Report) -> dict[str, str]:
    """One display format per "eng" quantity, from every value of it the workbook shows."""
    values: dict[str, list[np.ndarray]] = {}
    shown = report.designs.head(DESIGNS_ROWS) if report.designs is not None else None
    for frame in (shown, report.points, report.check):
        if frame is None:
            continue
        for name in frame.columns:
            q = _quantity(str(name))
            if q is not None and pd.api.types.is_numeric_dtype(frame[name]):
                values.setdefault(q, []).append(
                    pd.to_numeric(frame[name], errors="coerce").to_numpy(float, na_value=np.nan))
    for s in report.spec:
        q = _quantity(s.column)
        if q is not None:
            values.setdefault(q, []).append(np.array([x for x in (s.lo, s.hi, s.target)
                                                      if x is not None], dtype=float))
    if report.check is not None and {"ideal_frequency_hz", "ideal_duty"} <= set(report.check):
        # the Check sheet's high/low-time helper columns show the engine's ideal times
        f = pd.to_numeric(report.check["ideal_frequency_hz"], errors="coerce").to_numpy(float)
        d = pd.to_numeric(report.check["ideal_duty"], errors="coerce").to_numpy(float)
        with np.errstate(all="ignore"):
            values.setdefault("high_time_s", []).append(d / f)
            values.setdefault("low_time_s", []).append((1 - d) / f)
    return {q: eng_number_format(np.concatenate(v)) for q, v in values.items()}


def _number_format(kind: str, values, name: str = "", plan: dict | None = None) -> str | None:
    """Format of a column of registry format ``kind``; ``plan`` maps quantities to formats."""
    if kind == "cap":
        return CAP_FORMAT
    if kind == "eng" and _seconds(name):
        return ENG_FORMAT
    if kind == "eng":
        q = _quantity(name)
        if plan and q in plan:
            fmt = plan[q]
            return _PART_FORMAT[fmt] if name in _PART_COLUMNS else fmt
        return eng_number_format(values, part=name in _PART_COLUMNS)
    return _FIXED.get(kind)


# --- formats and safe cells --------------------------------------------------------------------
class _Styles:
    """Formats made once per distinct property set (a workbook has a limited number)."""

    def __init__(self, wb: xlsxwriter.Workbook, plan: dict[str, str] | None = None):
        self.wb = wb
        self.plan = plan or {}          # display format of each "eng" quantity
        self._cache: dict[tuple, object] = {}

    def get(self, **props):
        props = {k: v for k, v in props.items() if v is not None}
        if not props:
            return None
        key = tuple(sorted(props.items()))
        if key not in self._cache:
            self._cache[key] = self.wb.add_format(props)
        return self._cache[key]

    def header(self):
        return self.get(bold=True, text_wrap=True, valign="top", bg_color=_HEADER_FILL, bottom=1)


def _text(ws, st: _Styles, row: int, col: int, text, **props) -> None:
    """Write user text as a string cell, never a formula; risky text gets the quote prefix."""
    s = "" if text is None else str(text)
    if s.startswith(_DANGER):
        props["quote_prefix"] = True
    ws.write_string(row, col, s, st.get(**props))


def _finite(value) -> float | None:
    try:
        f = float(value)
    except (TypeError, ValueError):
        return None
    return f if math.isfinite(f) else None


def _value(ws, st: _Styles, row: int, col: int, value, **props) -> None:
    """A single cell of any type: number (NaN/inf -> empty), bool, or text."""
    if value is None or (isinstance(value, float) and not math.isfinite(value)):
        ws.write_blank(row, col, None, st.get(**props))
    elif isinstance(value, (bool, np.bool_)):
        ws.write_boolean(row, col, bool(value), st.get(**props))
    elif isinstance(value, (int, float, np.integer, np.floating)):
        f = _finite(value)
        if f is None:
            ws.write_blank(row, col, None, st.get(**props))
        else:
            ws.write_number(row, col, f, st.get(**props))
    elif isinstance(value, (dict, list, tuple)):
        _text(ws, st, row, col, json.dumps(value, default=str), **props)
    else:
        _text(ws, st, row, col, value, **props)


def _lines(text: str, width: float) -> int:
    """Lines ``text`` takes when wrapped in a column ``width`` characters wide (an estimate)."""
    return max(1, len(textwrap.wrap(str(text), max(4, int(width) - 1))))


def _header_row(ws, st: _Styles, row: int, headers: list[str], widths: list[float]) -> None:
    """Bold wrapped headers in a row made tall enough for them (spreadsheet programs do not all
    fit row heights when they open a file)."""
    ws.set_row(row, 15 * max((_lines(h, w) for h, w in zip(headers, widths)), default=1))
    for c, h in enumerate(headers):
        _text(ws, st, row, c, h, bold=True, text_wrap=True, valign="top",
              bg_color=_HEADER_FILL, bottom=1)


def _width(header: str, kind: str, texts=None) -> float:
    """Column width: room for the values, and for the header in at most three lines."""
    longest_word = max((len(w) for w in header.split()), default=4)
    if kind == "text":
        n = max((len(t) for t in texts), default=0) if texts is not None else 12
        w = float(min(48, max(10, longest_word + 2, n + 2)))
    else:
        w = float(min(18, max(10, longest_word + 2)))
    while _lines(header, w) > 3 and w < 40:
        w += 1.0
    return w


def _note_row(ws, st: _Styles, row: int, text: str) -> None:
    """A line of explanation above a table (it overflows into the empty cells beside it)."""
    _text(ws, st, row, 0, text, italic=True)


# --- tables --------------------------------------------------------------------------------
@dataclass
class _Col:
    name: str
    header: str
    kind: str                  # "num", "bool" or "text"
    values: np.ndarray         # float64 / int64 / bool / object (str)
    num_format: str | None
    width: float
    text_props: dict | None = None   # style of a non-empty text cell
    value_props: dict | None = None  # style of a text cell by its text, in place of text_props
    fail_extra: dict | None = None   # added to the row's fail style in this column
    empty_text: np.ndarray | None = None  # text written where a number is missing: why

    def cell_props(self) -> dict:
        """Format of a number or boolean cell of this column."""
        if self.kind == "bool":
            return {"num_format": _BOOL_FORMAT, "align": "center"}
        return {"num_format": self.num_format}


def _columns(frame: pd.DataFrame, names: list[str], header=column_header,
             plan: dict | None = None) -> list[_Col]:
    cols = []
    for name in names:
        s = frame[name]
        kind_fmt = column_format(name)
        if pd.api.types.is_bool_dtype(s):
            cols.append(_Col(name, header(name), "bool", s.to_numpy(bool), None,
                             _width(header(name), "bool")))
        elif pd.api.types.is_numeric_dtype(s) and kind_fmt not in ("text",):
            if pd.api.types.is_integer_dtype(s) and not s.isna().any():
                v = s.to_numpy(np.int64)
            else:
                v = pd.to_numeric(s, errors="coerce").to_numpy(dtype=float, na_value=np.nan)
            if kind_fmt == "cap":
                v = v * CAP_SCALE
            cols.append(_Col(name, header(name), "num", v, _number_format(kind_fmt, v, name, plan),
                             _width(header(name), "num")))
        else:
            v = s.astype(object).where(s.notna(), "").astype(str).to_numpy(dtype=object)
            sample = v[:2000]
            cols.append(_Col(name, header(name), "text", v, None,
                             _width(header(name), "text", sample)))
    return cols


def _cell_objects(col: _Col, lo: int, hi: int) -> np.ndarray:
    """Python objects for rows lo:hi of a column, None where a number is not finite."""
    v = col.values[lo:hi]
    out = v.astype(object)
    if col.kind == "num" and v.dtype.kind == "f":
        out[~np.isfinite(v)] = None
    return out


class _TableFormats:
    """Every format a table's cells take, made once per column before any row is written (a
    per-cell style lookup was most of the Designs sheet's time [measured])."""

    def __init__(self, st: _Styles, cols: list[_Col], fail_props: dict):
        self.st = st
        self.fail = []            # per column: its format in a failing row
        self.text = []            # per column: {text value or None: format} of plain rows
        self.why = []             # per column: (plain, failing) format of the empty-cell reason
        for c in cols:
            base = (c.text_props or {}) if c.kind == "text" else c.cell_props()
            self.fail.append({**base, **fail_props, **(c.fail_extra or {})})
            self.text.append({None: c.text_props or {}, **(c.value_props or {})})
            why = {"italic": True, "align": "right"}
            self.why.append((why, {**why, **fail_props, **(c.fail_extra or {})}))
        self._made: dict = {}
        self.fail_format = [self.get(props) for props in self.fail]

    def get(self, props: dict, text=None):
        """The format of a cell with ``props``; text that a spreadsheet could read as a formula
        adds the quote prefix. One lookup per distinct (props, prefix) pair."""
        danger = isinstance(text, str) and text.startswith(_DANGER)
        key = (id(props), danger)
        if key not in self._made:
            self._made[key] = (props, self.st.get(**props, **({"quote_prefix": True} if danger
                                                              else {})))
        return self._made[key][1]


def _write_failing_row(ws, fm: _TableFormats, r: int, row: list) -> None:
    """A failing row: every cell with its column's failing format (made once)."""
    fmts = fm.fail_format
    for i, v in enumerate(row):
        if v is None:
            ws.write_blank(r, i, None, fmts[i])
        elif isinstance(v, str):
            ws.write_string(r, i, v, fm.get(fm.fail[i], v) if v.startswith(_DANGER) else fmts[i])
        elif isinstance(v, bool):
            ws.write_boolean(r, i, v, fmts[i])
        else:
            ws.write_number(r, i, v, fmts[i])


def _write_table(ws, st: _Styles, cols: list[_Col], first_row: int, fail=None,
                 fail_props: dict | None = None) -> int:
    """Header at first_row, data below; returns the last row written (0-based).

    Rows are written strictly in order (constant_memory). Plain cells take their column's
    format from ``set_column`` (text cells their own); rows where ``fail`` is true take each
    column's failing format. Every format is made once per column before the rows
    (``_TableFormats``). The rows go to the sheet as cell XML made a column at a time
    (``_rows_xml``); the per-cell calls below it write the same cells where that cannot be
    used: plain rows through ``write_row`` per run of numeric columns and ``write_string``,
    failing rows cell by cell."""
    for i, c in enumerate(cols):
        ws.set_column(i, i, c.width, st.get(**c.cell_props()))
    _header_row(ws, st, first_row, [c.header for c in cols], [c.width for c in cols])
    n = len(cols[0].values) if cols else 0
    n = min(n, _MAX_ROWS - first_row - 1)
    text_idx = [i for i, c in enumerate(cols) if c.kind == "text"]
    why_idx = [i for i, c in enumerate(cols) if c.empty_text is not None]
    runs, start = [], None
    for i, c in enumerate(cols + [None]):
        if c is not None and c.kind != "text":
            start = i if start is None else start
        elif start is not None:
            runs.append((start, i))
            start = None
    fm = _TableFormats(st, cols, fail_props or {})
    fast = _rows_xml_ok(ws, cols, n)
    for lo in range(0, n, _CHUNK):
        hi = min(n, lo + _CHUNK)
        block = np.empty((hi - lo, len(cols)), dtype=object)
        for i, c in enumerate(cols):
            block[:, i] = _cell_objects(c, lo, hi)
        fails = None if fail is None else np.asarray(fail[lo:hi], dtype=bool).tolist()
        r = first_row + 1 + lo
        if fast:
            _rows_xml(ws, fm, cols, block, fails, r, lo)
            continue
        rows = block.tolist()
        for k, row in enumerate(rows):
            failing = fails is not None and fails[k]
            if failing:
                _write_failing_row(ws, fm, r, row)
            else:
                for a, b in runs:
                    ws.write_row(r, a, row[a:b])
                for i in text_idx:
                    s = row[i]
                    if s:
                        texts = fm.text[i]
                        ws.write_string(r, i, s, fm.get(texts.get(s, texts[None]), s))
            for i in why_idx:
                if row[i] is None and cols[i].empty_text[lo + k]:
                    text = cols[i].empty_text[lo + k]
                    ws.write_string(r, i, text, fm.get(fm.why[i][failing], text))
            r += 1
    return first_row + n


# --- rows as cell XML --------------------------------------------------------------------------
# The spreadsheet library spends ~7 µs on each cell it is given one at a time (checks, a stored
# tuple, then the cell's XML): 4 s for the Designs sheet's 10 000 rows x 56 columns [measured].
# In its constant_memory mode it writes each finished row's XML straight to the sheet's row
# file, so a table's rows can go there as the same XML, made a column at a time. The cells are
# the ones the per-cell calls make, attribute for attribute (cell reference, style, type, value
# as ``.16G``, inline text escaped the library's own way); tests/writers/test_fast_rows.py
# checks that both ways give the same workbook cell by cell, and the per-cell calls remain for
# any worksheet where the library does not look as this expects.
_ROW_FILE_PARTS = ("fh", "previous_row", "table", "_write_single_row", "_check_dimensions",
                   "_escape_data", "_escape_control_characters", "xls_strmax")
#: the library's own test for text that keeps its leading or trailing spaces
_PRESERVE = getattr(xlsxwriter.utility, "_preserve_whitespace", None)


def _rows_xml_ok(ws, cols: list[_Col], n: int) -> bool:
    """The rows of this table can be written as cell XML (constant_memory, the library's
    row-file parts present, no text long enough to need the library's truncation)."""
    if not n or not getattr(ws, "constant_memory", False) or _PRESERVE is None or \
            not all(hasattr(ws, a) for a in _ROW_FILE_PARTS):
        return False
    half = ws.xls_strmax // 2
    for c in cols:
        for texts in ((c.values if c.kind == "text" else None), c.empty_text):
            if texts is not None and len(texts) and max(map(len, texts)) > half:
                return False
    return True


class _CellXml:
    """The XML of one table's cells, each distinct style attribute and text made once."""

    def __init__(self, ws):
        self.ws = ws
        self._text: dict[str, str] = {}
        self._first: dict[int, tuple[int, int, object]] = {}

    def use(self, fmt, row: int | None, col: int) -> None:
        """Note that a cell at (row, col) of this chunk takes ``fmt`` (no row: no cell does)."""
        if fmt is not None and row is not None:
            key = id(fmt)
            if key not in self._first or (row, col) < self._first[key][:2]:
                self._first[key] = (row, col, fmt)

    def used(self, fmt) -> bool:
        return id(fmt) in self._first

    def number_formats(self) -> None:
        """Number the formats used as the library does: in the order cells first use them, row
        by row (so the style table comes out as with per-cell calls)."""
        for _r, _c, fmt in sorted(self._first.values(), key=lambda t: t[:2]):
            fmt._get_xf_index()

    @staticmethod
    def s(fmt) -> str:
        """The style attribute of a cell of format ``fmt`` (none for no format)."""
        return "" if fmt is None else f' s="{fmt._get_xf_index()}"'

    def text(self, string: str) -> str:
        """What follows a text cell's attributes: the inline string as the library writes it."""
        out = self._text.get(string)
        if out is None:
            ws = self.ws
            t = ws._escape_control_characters(string)
            if t.startswith("<r>") and t.endswith("</r>"):
                out = f' t="inlineStr"><is>{t}</is></c>'
            else:
                keep = ' xml:space="preserve"' if _PRESERVE(t) else ""
                out = f' t="inlineStr"><is><t{keep}>{ws._escape_data(t)}</t></is></c>'
            self._text[string] = out
        return out


_ROW = "\x00"   # where a cell XML template takes its row number (escaped text never holds it)


def _first(mask: np.ndarray) -> int | None:
    hit = np.flatnonzero(mask)
    return int(hit[0]) if hit.size else None


def _rows_xml(ws, fm: _TableFormats, cols: list[_Col], block: np.ndarray, fails, r0: int,
              lo: int) -> None:
    """Rows r0.. (0-based) of a table as the library's cell XML, straight to the sheet's row
    file: the same cells, formats and order as the per-cell calls of ``_write_table``."""
    m = block.shape[0]
    xml = _CellXml(ws)
    fail = np.asarray(fails if fails is not None else np.zeros(m, bool), dtype=bool)
    failing = fail.tolist()
    plan = []   # per column: kind, index, values, plain format (text: cells), failing one, extras
    for i, c in enumerate(cols):
        vals = block[:, i].tolist()
        colfmt = ws.col_info[i].column_format if i in ws.col_info else None
        bad = fm.fail_format[i]
        why = {}
        if c.kind == "text":
            # the format of each (text, failing) pair, noted at the row that first has it
            texts, keys = fm.text[i], {}
            for k, (v, f) in enumerate(zip(vals, failing)):
                if (v, f) in keys:
                    continue
                if f:
                    fmt = fm.get(fm.fail[i], v) if v.startswith(_DANGER) else bad
                elif v:
                    fmt = fm.get(texts.get(v, texts[None]), v)
                    fmt = colfmt if fmt is None else fmt
                else:
                    keys[(v, f)] = None
                    continue
                keys[(v, f)] = (fmt,)       # a cell, with or without a format
                xml.use(fmt, k, i)
            plan.append((c.kind, i, vals, keys, None, why, None))
            continue
        v = c.values[lo:lo + m]                      # None where a number is not finite
        none = ~np.isfinite(v) if c.kind == "num" and v.dtype.kind == "f" else np.zeros(m, bool)
        if c.empty_text is not None:
            texts = c.empty_text[lo:lo + m]
            for k in np.flatnonzero(none & (texts != "")):
                fmt = fm.get(fm.why[i][failing[k]], texts[k])
                why[int(k)] = (fmt, texts[k])
                xml.use(fmt, int(k), i)
        taken = np.zeros(m, bool)
        taken[list(why)] = True
        xml.use(colfmt, _first(~fail & ~none), i)
        xml.use(bad, _first(fail & ~taken), i)
        plan.append((c.kind, i, vals, colfmt, bad, why, bool(none.any())))
    ws._write_single_row(r0)          # the row before (the header) goes out first, as it would
    xml.number_formats()
    # each row is one template (plain or failing) filled in one step: a column whose cells all
    # exist puts its format and value spec in the template, any other column its made cells
    parts: dict[bool, list[str]] = {False: [], True: []}
    args = []
    for kind, i, vals, plain, bad, why, gaps in plan:
        letter = xl_col_to_name(i)
        if kind == "text":
            made = {key: ("" if cell is None else
                          f'<c r="{letter}{_ROW}"{xml.s(cell[0])}{xml.text(key[0])}')
                    for key, cell in plain.items()}
            args.append([made[key] for key in zip(vals, failing)])
            parts[False].append("%s")
            parts[True].append("%s")
            continue
        # a format no cell takes gets no number (the library numbers only formats in use)
        plain, bad = (xml.s(f) if xml.used(f) else "" for f in (plain, bad))
        t = ' t="b"' if kind == "bool" else ""
        if not gaps:
            spec = "%d" if kind == "bool" else "%.16G"       # as the library writes the value
            parts[False].append(f'<c r="{letter}{_ROW}"{plain}{t}><v>{spec}</v></c>')
            parts[True].append(f'<c r="{letter}{_ROW}"{bad}{t}><v>{spec}</v></c>')
            args.append(vals)
            continue
        if kind == "bool":
            out = [f'<c r="{letter}{_ROW}"{bad if f else plain}{t}><v>{1 if v else 0}</v></c>'
                   if v is not None else (f'<c r="{letter}{_ROW}"{bad}/>' if f else "")
                   for v, f in zip(vals, failing)]
        else:
            out = [f'<c r="{letter}{_ROW}"{bad if f else plain}><v>{v:.16G}</v></c>'
                   if v is not None else (f'<c r="{letter}{_ROW}"{bad}/>' if f else "")
                   for v, f in zip(vals, failing)]
        for k, (fmt, text) in why.items():
            out[k] = f'<c r="{letter}{_ROW}"{xml.s(fmt)}{xml.text(text)}'
        args.append(out)
        parts[False].append("%s")
        parts[True].append("%s")
    template = {f: "".join(p) for f, p in parts.items()}
    rows = []
    last = None
    for r, f, values in zip(range(r0 + 1, r0 + 1 + m), failing, zip(*args)):
        body = template[f] % values
        if body:
            rows.append(f'<row r="{r}">{body.replace(_ROW, str(r))}</row>')
            last = r - 1
    if last is None:
        return
    ws.fh.write("".join(rows))
    ws._check_dimensions(last, len(cols) - 1)
    ws.previous_row = last

# --- sheets ------------------------------------------------------------------------------------
_SUMMARY_CHARS = 4 * 14 + 44   # columns B-F


def _wide_text(ws, st: _Styles, row: int, c0: int, c1: int, text, chars: float, **props) -> None:
    """Long text wrapped across the merged cells c0..c1 of a row made tall enough for it."""
    ws.set_row(row, 15 * _lines(text, chars))
    props.update(text_wrap=True, valign="top")
    ws.merge_range(row, c0, row, c1, None, st.get(**props))
    _text(ws, st, row, c0, text, **props)


def _page_setup(ws, header_row: int | None, last_col: int | None = None,
                last_row: int | None = None, header: str | None = None,
                footer: str | None = None, pages_wide: int = 1, repeat_cols: int = 0) -> None:
    """Print landscape, ``pages_wide`` pages wide, the header row (and the first ``repeat_cols``
    columns) repeated on every page; ``last_col`` and ``last_row`` (0-based) bound the default
    print area; ``header``/``footer`` print on every page (plain text, shortened to fit the
    spreadsheet's 255-character limit)."""
    ws.set_landscape()
    ws.set_margins(left=0.4, right=0.4, top=0.6, bottom=0.6)
    ws.fit_to_pages(pages_wide, 0)
    if header_row is not None:
        ws.repeat_rows(header_row)
    if repeat_cols:
        ws.repeat_columns(0, repeat_cols - 1)
    if last_col is not None or last_row is not None:
        ws.print_area(0, 0, last_row if last_row is not None else _MAX_ROWS - 1,
                      last_col if last_col is not None else 16_383)
    for text, setter in ((header, ws.set_header), (footer, ws.set_footer)):
        if text:
            body = text.replace("&", "&&")
            setter("&L&8" + (body if len(body) <= 245 else body[:242] + "..."))


def _summary(ws, st: _Styles, report: Report) -> None:
    ws.set_column(0, 0, 24)
    ws.set_column(1, 4, 14)
    ws.set_column(5, 5, 44)
    r = 0
    ws.set_row(r, 21)
    _text(ws, st, r, 0, report.title, bold=True, font_size=14)
    r += 1
    model = "ideal (textbook) model" if report.ideal else "realistic model"
    _text(ws, st, r, 0, f"{report.circuit} circuit, {report.timer_name}, {model}", italic=True)
    r += 2
    _text(ws, st, r, 0, "Result", bold=True, bottom=1)
    r += 1
    for label, text in report.summary:
        _text(ws, st, r, 0, label, bold=True, valign="top")
        _wide_text(ws, st, r, 1, 5, text, _SUMMARY_CHARS)
        r += 1
    r += 1
    if report.grades is not None and len(report.grades):
        r = _grades_block(ws, st, report, r)
    _text(ws, st, r, 0, "Cautions", bold=True, bottom=1)
    r += 1
    if report.cautions:
        for text in report.cautions:
            _text(ws, st, r, 0, "CAUTION", bold=True, bg_color=_CAUTION_FILL, border=1,
                  valign="top")
            _wide_text(ws, st, r, 1, 5, text, _SUMMARY_CHARS, bold=True)
            r += 1
    else:
        _text(ws, st, r, 1, "No caution raised for this study.")
        r += 1
    r += 1
    _text(ws, st, r, 0, "Spec", bold=True, bottom=1)
    r += 1
    if report.spec:
        heads = ["Key", "Quantity", "Min", "Max", "Target", "As text (blank: open)"]
        for c, h in enumerate(heads):
            _text(ws, st, r, c, h, bold=True, bg_color=_HEADER_FILL, bottom=1,
                  align="right" if 2 <= c <= 4 else None, indent=1 if c == 5 else None)
        r += 1
        for s in report.spec:
            var = VARIABLES.get(s.column)
            kind = var.fmt if var else "general"
            nums = [x for x in (s.lo, s.hi, s.target) if _finite(x) is not None]
            nf = _number_format(kind, nums, s.column, st.plan)
            _text(ws, st, r, 0, s.key)
            _text(ws, st, r, 1, column_header(s.column))
            for c, x in ((2, s.lo), (3, s.hi), (4, s.target)):
                _value(ws, st, r, c, None if x is None else float(x), num_format=nf)
            _text(ws, st, r, 5, _spec_text(s, var), indent=1)
            r += 1
    else:
        _text(ws, st, r, 1, "No [spec] limits in this study.")
        r += 1
    r += 1
    _text(ws, st, r, 0, "Run", bold=True, bottom=1)
    r += 1
    for key, value in (report.run_info or {}).items():
        _text(ws, st, r, 0, key, bold=True)
        _value(ws, st, r, 1, value, align="left")
        r += 1
    r += 1
    _text(ws, st, r, 0, "Numbers", bold=True, valign="top")
    _wide_text(ws, st, r, 1, 5, _FORMAT_LINE, _SUMMARY_CHARS, italic=True)
    _page_setup(ws, None)


def _grades_block(ws, st: _Styles, report: Report, r: int) -> int:
    """Yield against cost: the best design of each part grade, cheapest first."""
    _text(ws, st, r, 0, "Grades: yield against cost", bold=True, bottom=1)
    r += 1
    heads = ["Grade", "Cost index [cp]", "Best design", "Yield", "Yield 95 % low",
             "Reaches the target? Availability [cp]"]
    for c, h in enumerate(heads):
        _text(ws, st, r, c, h, bold=True, bg_color=_HEADER_FILL, bottom=1,
              align="right" if 1 <= c <= 4 else None, indent=1 if c == 5 else None)
    r += 1
    pct = _FIXED["pct"]
    for _, g in report.grades.iterrows():
        _text(ws, st, r, 0, str(g["grade_label"]), valign="top")
        _value(ws, st, r, 1, float(g["cost_index"]), num_format="0.00", valign="top")
        _value(ws, st, r, 2, int(g["design"]), num_format="0", valign="top")
        _value(ws, st, r, 3, _finite(g["yield"]), num_format=pct, valign="top")
        _value(ws, st, r, 4, _finite(g["yield_lo"]), num_format=pct, valign="top")
        words = ("yes" if g["reaches"] else f"no ({g['verdict']})") + \
            (f"; {g['notes']}" if g["notes"] else "")
        ws.set_row(r, 15 * _lines(words, 44))
        _text(ws, st, r, 5, words, text_wrap=True, valign="top", indent=1)
        r += 1
    _wide_text(ws, st, r, 0, 5, "Cost index: the timing parts' grade costs added up, each "
               "against the commonest grade (1.0); rough common-practice figures [cp] from the "
               "editable grade table sweep/models/grades.toml, not quotes. The pick is the "
               "cheapest grade whose best design's 95 % yield interval reaches the target, then "
               "the lowest supply current.", _SUMMARY_CHARS, italic=True)
    return r + 2


def _unit_for_eng(var) -> str:
    if var is None:
        return ""
    if var.fmt == "pct":
        return "%"
    return symbol_unit(var.unit)


def _spec_text(s, var) -> str:
    unit = _unit_for_eng(var)
    parts = []
    lo, hi = _finite(s.lo), _finite(s.hi)
    if lo is not None and hi is not None:
        parts.append(f"{format_eng(lo, unit)} to {format_eng(hi, unit)}")
    elif lo is not None:
        parts.append(f"at least {format_eng(lo, unit)}")
    elif hi is not None:
        parts.append(f"at most {format_eng(hi, unit)}")
    if _finite(s.target) is not None:
        parts.append(f"target {format_eng(float(s.target), unit)}")
    return ", ".join(parts)


def _verdict_note(report: Report) -> str:
    return "Verdict: " + "; ".join(f"{k} = {v}" for k, v in report.verdicts.items()) + "."


def _verdict_short(report: Report) -> str:
    return ("Verdict (one word per design, the same in every output): "
            + ", ".join(report.verdicts) + "; the Notes sheet says what each means.")


#: verdicts that fail outright (bold on the fail fill) and those that pass with a reservation
_FAILING = ("spec miss", "limit", "stalls")
_RESERVED = ("low yield", "not sampled")


def _margin_why(df: pd.DataFrame) -> np.ndarray:
    """Why a design's worst-case margin cell is empty: it stalls, or there is no spec limit."""
    n = len(df)
    stalls = (df["stalls_at"].fillna("").astype(str).to_numpy() if "stalls_at" in df
              else np.full(n, "", dtype=object))
    m = df["wc_margin"].to_numpy(float)
    return np.where(stalls != "", "stalls (see Stalls at)",
                    np.where(m == np.inf, "no spec limit",
                             np.where(np.isfinite(m), "", "no worst case"))).astype(object)


def _designs(ws, st: _Styles, report: Report) -> None:
    total = len(report.designs)
    df = report.designs.head(DESIGNS_ROWS).copy()
    capped = total > len(df)
    top = 1 if capped else 0       # a capped sheet says so in row 1, above its header
    if capped:
        _note_row(ws, st, 0, f"This sheet holds the {len(df):,} best-ranked of {total:,} designs "
                             f"(capped at {DESIGNS_ROWS:,} rows to keep the workbook quick to write "
                             "and open); designs.parquet beside the workbook holds every design.")
    keys = [c for c in ["rank", "design", *report.part_columns, "grade_label", "cost_index"]
            if c in df.columns]
    if "verdict" not in df:
        df["verdict"] = ""
    fail = np.isin(df["verdict"].to_numpy(), _FAILING)
    # the columns a reviewer reads first (and the printed ones): keys, result, the verdict
    # figures and the main output's nominal, min and max; then the rest as the report orders it
    main = report.main_output
    lead = [c for c in ("yield", "yield_lo", "yield_hi", "wc_margin", "stalls_at", "feasible",
                        "sn_db",
                        *((f"{main}_nom", f"{main}_min", f"{main}_max") if main else ()))
            if c in df.columns]
    rest = [c for c in df.columns if c not in keys + lead and c not in ("verdict", "flags")]
    names = keys + ["verdict"] + lead + rest + (["flags"] if "flags" in df.columns else [])
    cols = _columns(df, names, plan=st.plan)
    for c in cols:
        if c.name == "verdict":
            # words first (they read in grey-scale print); then type style: "pass" plain,
            # "spec miss" italic, the infeasible ones bold on the fail fill in an italic row
            c.width, c.fail_extra = 11.0, {"bold": True, "align": "center"}
            c.text_props = {"bg_color": _PASS_FILL, "align": "center"}
            c.value_props = {w: {"bg_color": _FLAG_FILL, "italic": True, "align": "center"}
                             for w in _RESERVED}
        elif c.name == "wc_margin":
            c.empty_text = _margin_why(df)
            c.width = max(c.width, 14.0)
    # the Verdict header's note (before its row is written: constant_memory keeps no past rows)
    ws.write_comment(top, len(keys), _verdict_note(report), {"x_scale": 3, "y_scale": 3})
    last = _write_table(ws, st, cols, top, fail=fail,
                        fail_props={"italic": True, "bg_color": _FAIL_FILL})
    ws.freeze_panes(top + 1, len(keys) + 1)
    ws.autofilter(top, 0, max(last, top), len(cols) - 1)
    n_print = len(keys) + 1 + len(lead) if len(lead) >= 3 else min(12, len(names))
    where = ("is on screen and in designs.parquet" if not capped else
             f"is in designs.parquet; this sheet holds the best {len(df):,}")
    _page_setup(ws, top, last_col=n_print - 1, last_row=min(last, top + PRINT_ROWS),
                header=(f"Designs, printed: the first {n_print} columns"
                        + (f" and {PRINT_ROWS} rows" if len(df) > PRINT_ROWS else "")
                        + f". The full table ({total:,} design{'' if total == 1 else 's'}, "
                        f"{len(cols)} columns) {where}."),
                footer=_verdict_short(report))


def _points(ws, st: _Styles, report: Report) -> None:
    df = report.points
    names = list(df.columns)
    cols = _columns(df, names, plan=st.plan)
    for c in cols:
        if c.name == "flags":
            c.text_props = {"bg_color": _FLAG_FILL, "italic": True}
    total = len(df)
    note = report.points_note
    if total > _MAX_ROWS - 2:
        note += f" (this sheet holds the first {_MAX_ROWS - 2} rows, its limit)"
    _note_row(ws, st, 0, note)
    last = _write_table(ws, st, cols, 1)
    keys = 0                       # the leading key columns stay in view when scrolling right
    while keys < min(3, len(names)) and names[keys] in ("rank", "design", "condition"):
        keys += 1
    ws.freeze_panes(2, keys)
    if cols:
        ws.autofilter(1, 0, max(last, 1), len(cols) - 1)
    rows = max(last - 1, 0)
    # two pages wide, the key columns repeated: one page would shrink ~25 columns to ~5 pt type
    _page_setup(ws, 1, last_row=min(last, 1 + PRINT_ROWS), last_col=max(len(cols) - 1, 0),
                pages_wide=2, repeat_cols=keys,
                header=(f"Points, printed: the first {min(rows, PRINT_ROWS):,} of {rows:,} rows. "
                        "Every row is on screen; the note in cell A1 says where the full sweep "
                        "is.") if rows > PRINT_ROWS else None)


def _parts(ws, st: _Styles, report: Report) -> None:
    heads = {"rank": "Rank", "design": "Design", "verdict": "Verdict", "ref": "Ref.", "value_text": "Value",
             "rkm": "RKM code", "series": "Series", "tolerance": "Tolerance",
             "technology": "Technology", "rating": "Rating (margin)", "note": "Note",
             "role": "Role", "quantity": "Qty"}
    df = report.parts
    names = [n for n in heads if n in df.columns]
    if "tolerance" in names:
        df = df.assign(tolerance=pd.to_numeric(df["tolerance"], errors="coerce"))
    fmt_kind = {"rank": "int", "design": "int", "tolerance": "pct", "quantity": "int"}
    cols = []
    for c in _columns(df, names, header=lambda n: heads[n]):
        if c.kind == "num":
            c.num_format = _FIXED.get(fmt_kind.get(c.name, ""), c.num_format)
        cols.append(c)
    last = _write_table(ws, st, cols, 0)
    ws.freeze_panes(1, 0)
    if cols:
        ws.autofilter(0, 0, max(last, 0), len(cols) - 1)
    _page_setup(ws, 0)


def _check_formulas(templates: dict[str, str], ref: dict) -> dict[str, str]:
    """Live formulas (without '=') for one Check row from the circuit's templates. ref maps
    ra/rb/r/c/vcc/vc/vd/th/tl to cells; the C cell holds picofarads. Every formula reads the
    control-pin cell: blank means the internal divider, 2/3 of the supply [book]."""
    vcc = ref["vcc"]
    cells = {"RA": ref.get("ra"), "RB": ref.get("rb"), "R": ref.get("r"), "VCC": vcc,
             "VD": ref.get("vd"), "TH": ref.get("th"), "TL": ref.get("tl"),
             "C": f"({ref['c']}*1E-12)",
             "VC": f"IF(ISBLANK({ref['vc']}),2/3*{vcc},{ref['vc']})"}
    return {out: t.format(**cells) for out, t in templates.items()}


def _check(ws, st: _Styles, report: Report, cached: bool) -> None:
    circuit, chk, about = report.circuit, report.check, report.circuit_text
    outputs = list(about.main_outputs)
    if not about.timed or report.main_output is None:
        _note_row(ws, st, 0, "Bistable (set/reset latch): there is no timing, so there is no "
                             "formula to check.")
        ws.set_column(0, 0, 90)
        return
    notes = [(_CHECK_NOTE, {}),
             (f"Textbook formulas, {circuit} [book]: {about.textbook}", {}),
             ("Engine ideal: every non-ideality off (the textbook case); engine realistic: the "
              "full model at this supply; formula vs ideal = formula / ideal - 1.", {})]
    if about.check_hint:
        notes.append((about.check_hint, {"bold": True}))
    if chk is None or len(chk) == 0:
        for r, (text, props) in enumerate(notes):
            _text(ws, st, r, 0, text, italic=True, **props)
        _text(ws, st, 4, 0, "No design to check.")
        return
    n = len(chk)
    parts = [c for c in report.part_columns if c in chk.columns]

    def col(name: str, default: float = np.nan) -> np.ndarray:
        if name not in chk.columns:
            return np.full(n, default, float)
        return pd.to_numeric(chk[name], errors="coerce").to_numpy(dtype=float, na_value=np.nan)

    helpers = "high_time_s" in about.check
    # layout: inputs, then (helpers), then per output: formula, ideal, realistic, difference
    layout = [("rank", "Rank", "int", "key"), ("design", "Design", "int", "key")]
    if "verdict" in chk.columns:
        layout.append(("verdict", "Verdict", "text", "key"))
    layout += [(p, column_header(p), column_format(p), "input") for p in parts]
    layout += [("vcc_v", column_header("vcc_v"), "fixed2", "input"),
               ("control_voltage_v", column_header("control_voltage_v") + " (blank: divider)",
                "fixed2", "input")]
    if "diode_drop_v" in about.check_inputs:
        layout.append(("diode_drop_v", "Diode drop [V]", "fixed2", "input"))
    if helpers:
        layout += [("f:high_time_s", "High time [s] formula", "eng", "formula"),
                   ("f:low_time_s", "Low time [s] formula", "eng", "formula")]
    for out in outputs:
        h = column_header(out)
        kind = VARIABLES[out].fmt
        layout += [(f"f:{out}", f"{h} formula", kind, "formula"),
                   (f"ideal_{out}", f"{h} engine ideal", kind, "engine"),
                   (f"real_{out}", f"{h} engine realistic", kind, "engine"),
                   (f"d:{out}", f"{VARIABLES[out].label}: formula vs ideal", "diff", "diff")]
    pos = {name: i for i, (name, *_rest) in enumerate(layout)}
    ideal = {o: col(f"ideal_{o}") for o in outputs}
    values = {name: col(name, 0.0 if name == "diode_drop_v" else np.nan) for name, *_r in layout
              if not name.startswith(("f:", "d:"))}
    if "c_f" in values:
        values["c_f"] = values["c_f"] * CAP_SCALE
    if "verdict" in values:
        values["verdict"] = chk["verdict"].fillna("").astype(str).to_numpy(dtype=object)
    if "frequency_hz" in ideal:   # engine's own high/low times, as cached helper results
        f, d = ideal["frequency_hz"], ideal.get("duty", np.full(n, np.nan))
        ideal["high_time_s"], ideal["low_time_s"] = d / f, (1 - d) / f
    fmts = {}
    for name, head, kind, role in layout:
        data = values.get(name, ideal.get(name[2:], np.array([])))
        nf = "0.000%" if kind == "diff" else _number_format(kind, data, name, st.plan)
        props = {"num_format": nf, "border": 1, "border_color": "#BFBFBF"}
        if role == "input":
            props.update(font_color=_INPUT_FONT, bg_color=_INPUT_FILL)
        elif role == "engine":
            props.update(font_color="#404040")
        elif role == "formula":
            props.update(bold=True)
        fmts[name] = props
    # narrow key columns and headers wrapped by word keep the sheet readable printed one page wide
    widths = [(10.0 if name == "verdict" else 8.0) if role == "key"
              else max(11.0, min(15.0, max(len(w) for w in h.split()) + 2))
              for name, h, _k, role in layout]
    for i, w in enumerate(widths):
        ws.set_column(i, i, w)
    # the notes wrap within the table's width, so they do not widen the printed page
    for r, (text, props) in enumerate(notes):
        _wide_text(ws, st, r, 0, len(layout) - 1, text, sum(widths), italic=True, **props)
    hr = 4
    _header_row(ws, st, hr, [h for _, h, *_ in layout], widths)
    for k in range(n):
        r = hr + 1 + k
        cell = {name: xl_rowcol_to_cell(r, pos[name]) for name in pos}
        ref = {"ra": cell.get("ra_ohm"), "rb": cell.get("rb_ohm"), "r": cell.get("r_ohm"),
               "c": cell.get("c_f"), "vcc": cell["vcc_v"], "vc": cell["control_voltage_v"],
               "vd": cell.get("diode_drop_v"), "th": cell.get("f:high_time_s"),
               "tl": cell.get("f:low_time_s")}
        formulas = _check_formulas(about.check, ref)
        for name, head, kind, role in layout:
            c = pos[name]
            if role in ("key", "input", "engine"):
                v = values[name][k]
                _value(ws, st, r, c, v, **fmts[name])
            elif role == "formula":
                out = name[2:]
                cached_v = _finite(ideal[out][k]) if cached else 0
                ws.write_formula(r, c, "=" + formulas[out], st.get(**fmts[name]),
                                 0 if cached_v is None else cached_v)
            else:
                out = name[2:]
                fc, ic = cell[f"f:{out}"], cell[f"ideal_{out}"]
                ws.write_formula(r, c, f"={fc}/{ic}-1", st.get(**fmts[name]), 0)
    ws.freeze_panes(hr + 1, 2)
    # more than ten columns print two pages wide, rank and design repeated, so the type stays
    # readable (18 columns on one landscape page print too small)
    wide = len(layout) > 10
    _page_setup(ws, hr, pages_wide=2 if wide else 1, repeat_cols=2 if wide else 0)


def _study(ws, st: _Styles, report: Report, file_name: str) -> None:
    """Row 1 a note, row 2 the header, data from row 3, columns A-D (the reader relies on it)."""
    ws.set_column(0, 0, 14)
    ws.set_column(1, 1, 22)
    ws.set_column(2, 2, 40, st.get(num_format="@"))
    ws.set_column(3, 3, 70)
    _text(ws, st, 0, 0, "Edit the Value column (TOML text), save, then re-run with: "
          f"timer-sweep run {file_name}", italic=True)
    for c, h in enumerate(("Section", "Key", "Value (TOML)", "Meaning")):
        _text(ws, st, 1, c, h, bold=True, bg_color=_HEADER_FILL, bottom=1)
    for i, (section, key, value, meaning) in enumerate(report.study_rows):
        r = 2 + i
        ws.set_row(r, 15 * max(_lines(value, 40), _lines(meaning, 70)))
        _text(ws, st, r, 0, section, valign="top")
        _text(ws, st, r, 1, key, valign="top")
        _text(ws, st, r, 2, value, num_format="@", text_wrap=True, valign="top")
        _text(ws, st, r, 3, meaning, text_wrap=True, valign="top")
    ws.freeze_panes(2, 0)
    _page_setup(ws, 1)


def _designs_cap_line(report: Report) -> str:
    """What the Notes sheet adds when the Designs sheet is capped, else nothing."""
    total = len(report.designs)
    if total <= DESIGNS_ROWS:
        return ""
    return (f" The Designs sheet holds the {DESIGNS_ROWS:,} best-ranked of {total:,} designs; "
            "designs.parquet holds every design.")


def _notes(ws, st: _Styles, report: Report) -> None:
    ws.set_column(0, 0, 20)
    ws.set_column(1, 1, 110)
    for c, h in enumerate(("Topic", "Text")):
        _text(ws, st, 0, c, h, bold=True, bg_color=_HEADER_FILL, bottom=1)
    rows = [(t, x, {}) for t, x in report.notes]
    rows += [("Caution", x, {"bold": True}) for x in report.cautions]
    rows += [("Number formats", _FORMAT_LINE, {}),
             ("Verdict", _verdict_note(report)[len("Verdict: "):], {}),
             ("Printing", _PRINT_LINE + _designs_cap_line(report), {}),
             ("Safety", _SAFETY_LINE, {"bold": True})]
    for i, (topic, text, props) in enumerate(rows):
        r = 1 + i
        ws.set_row(r, 15 * max(_lines(text, 110), _lines(topic, 20)))
        _text(ws, st, r, 0, topic, bold=True, valign="top", text_wrap=True)
        _text(ws, st, r, 1, text, text_wrap=True, valign="top", **props)
    ws.freeze_panes(1, 0)
    _page_setup(ws, 0)


# --- the workbook --------------------------------------------------------------------------
def write_workbook(path: Path, report: Report, *, cached_results: bool = True) -> None:
    """Write ``report`` as an XLSX workbook at ``path``, atomically.

    The workbook is written to a temporary file in the same folder and renamed onto ``path``;
    on any error the temporary file is removed and ``path`` is left as it was.
    ``cached_results=False`` stores 0 as the cached result of every Check formula (for tests that
    prove a spreadsheet program really recalculated)."""
    path = Path(path)
    with atomic_path(path) as tmp:
        wb = xlsxwriter.Workbook(str(tmp), {"constant_memory": True, "strings_to_formulas": False,
                                            "strings_to_numbers": False, "strings_to_urls": False,
                                            "nan_inf_to_errors": False})
        st = _Styles(wb, _quantity_formats(report))
        sheets = {name: wb.add_worksheet(name) for name in SHEETS}
        _summary(sheets["Summary"], st, report)
        _designs(sheets["Designs"], st, report)
        _points(sheets["Points"], st, report)
        _parts(sheets["Parts"], st, report)
        _check(sheets["Check"], st, report, cached_results)
        _study(sheets["Study"], st, report, path.name)
        _notes(sheets["Notes"], st, report)
        sheets["Summary"].activate()
        wb.close()


def cell_seconds(table: pd.DataFrame) -> float | None:
    """Seconds per cell this machine takes to write `table` as a sheet of the workbook (a
    sample the run-time estimate scales up); None where the sample cannot be written."""
    import tempfile
    import time

    from xlsxwriter.exceptions import XlsxWriterException
    try:
        with tempfile.TemporaryDirectory() as tmp:
            wb = xlsxwriter.Workbook(str(Path(tmp) / "sample.xlsx"), {"constant_memory": True})
            ws = wb.add_worksheet("Points")
            t0 = time.perf_counter()
            _write_table(ws, _Styles(wb), _columns(table, list(table.columns)), 0)
            wb.close()
            return max(time.perf_counter() - t0, 1e-6) / max(table.size, 1)
    except (OSError, XlsxWriterException):
        return None
