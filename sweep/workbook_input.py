"""Read the Study sheet of a timer-sweep workbook back into study text, safely.

Workbooks from strangers are untrusted: defusedxml guards the XML parser (entity expansion and
external entities), and the zip container is checked for size, member count and compression
ratio before openpyxl opens it.
"""
from __future__ import annotations

import io
import zipfile
from pathlib import Path

from .errors import InputError
from .files import read_bytes_limited
from .tomltext import rows_to_toml

MAX_FILE = 50 * 2**20            # bytes on disk
MAX_UNPACKED = 200 * 2**20       # bytes once unzipped
MAX_RATIO = 200                  # unpacked / packed, beyond which it is a decompression bomb
MAX_MEMBERS = 2000
MAX_SHEETS = 64
MAX_ROWS = 2000


def _guard(path: Path) -> io.BytesIO:
    """The workbook's bytes in memory, once the file and its zip container pass every check."""
    fname = str(path)
    data = read_bytes_limited(path, MAX_FILE, "a workbook")
    path = io.BytesIO(data)
    if not zipfile.is_zipfile(path):
        raise InputError(fname, "", "not a workbook (an .xlsx file is a zip container)")
    try:
        with zipfile.ZipFile(path) as z:
            infos = z.infolist()
            if len(infos) > MAX_MEMBERS:
                raise InputError(fname, "", f"workbook has {len(infos)} parts; the limit is {MAX_MEMBERS}")
            unpacked = sum(i.file_size for i in infos)
            packed = max(1, sum(i.compress_size for i in infos))
            if unpacked > MAX_UNPACKED or unpacked / packed > MAX_RATIO and unpacked > 10 * 2**20:
                raise InputError(fname, "", "workbook unpacks to "
                                 f"{unpacked / 2**20:.0f} MiB (ratio {unpacked / packed:.0f}:1): refused "
                                 "as a possible decompression bomb")
            if "[Content_Types].xml" not in z.namelist():
                raise InputError(fname, "", "not a workbook: no [Content_Types].xml inside the zip")
            bad = z.testzip()
            if bad:
                raise InputError(fname, "", f"corrupt workbook: part {bad} fails its checksum")
    except zipfile.BadZipFile as e:
        raise InputError(fname, "", f"corrupt workbook: {e}") from None
    path.seek(0)
    return path


def read_study_sheet(path: Path) -> tuple[str, dict[int, int]]:
    """The Study sheet (row 1 a note, row 2 the header, rows from 3: section, key, value) as TOML,
    with a map from each TOML line to its sheet row."""
    from openpyxl import load_workbook
    from openpyxl.xml import DEFUSEDXML
    if not DEFUSEDXML:      # openpyxl parses through defusedxml whenever it is installed
        raise InputError(str(path), "", "refusing to read a workbook without defusedxml installed")

    data = _guard(path)
    fname = str(path)
    try:
        wb = load_workbook(data, read_only=True, data_only=True)
    except Exception as e:  # noqa: BLE001 - any parser failure is a bad file, not our bug
        raise InputError(fname, "", f"cannot read the workbook: {type(e).__name__}: {e}") from None
    try:
        if len(wb.sheetnames) > MAX_SHEETS:
            raise InputError(fname, "", f"{len(wb.sheetnames)} sheets; the limit is {MAX_SHEETS}")
        if "Study" not in wb.sheetnames:
            raise InputError(fname, "Study", "no Study sheet: only workbooks written by timer-sweep "
                             "can be run again")
        ws = wb["Study"]
        rows, numbers = [], []
        for i, row in enumerate(ws.iter_rows(min_row=3, max_col=3, values_only=True), start=3):
            if i > MAX_ROWS:
                raise InputError(fname, "Study", f"more than {MAX_ROWS} rows")
            if not row or all(v is None or str(v).strip() == "" for v in row):
                continue
            section, key, value = (("" if v is None else str(v)).strip() for v in (list(row) + [None] * 3)[:3])
            if not section or not key or not value:
                raise InputError(fname, f"Study!A{i}", "each row needs a section, a key and a value")
            rows.append((section, key, value))
            numbers.append(i)
    finally:
        wb.close()
    if not rows:
        raise InputError(fname, "Study", "the Study sheet holds no rows")
    return rows_to_toml(rows, numbers)
