"""Rows per second of the workbook's Points sheet, beside pandas' openpyxl writer.

Run: /work/venv/bin/python tests/benchmarks/workbook_rows.py [rows] [pandas_rows]
Writes ``rows`` x 15 columns through write_workbook (the Points sheet dominates the time) and a
smaller sample through pandas.DataFrame.to_excel(engine="openpyxl"), scaled to rows/s. Prints
one line per writer, then one JSON line of named figures. Not collected by pytest.
"""
from __future__ import annotations

import dataclasses
import json
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import pandas as pd

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from sweep.writers.workbook import write_workbook  # noqa: E402
from tests.fake_report import make_report  # noqa: E402


def points_frame(n: int, seed: int = 1) -> pd.DataFrame:
    """n rows x 15 columns shaped like a sweep (invented values, realistic magnitudes)."""
    rng = np.random.default_rng(seed)
    ra = rng.choice([1e3, 2.2e3, 4.7e3, 10e3, 22e3, 47e3], n)
    rb = rng.choice([10e3, 22e3, 47e3, 100e3], n)
    c = rng.choice([100e-9, 220e-9, 470e-9, 1e-6], n)
    vcc = rng.choice([5.0, 9.0, 12.0], n)
    th = np.log(2) * (ra + rb) * c
    tl = np.log(2) * rb * c
    f = 1 / (th + tl)
    flags = np.where(f > 500, "frequency-too-high", "")
    return pd.DataFrame({
        "design": np.arange(n) // 9 + 1, "condition": np.arange(n) % 9 + 1,
        "ra_ohm": ra, "rb_ohm": rb, "c_f": c, "vcc_v": vcc,
        "temperature_c": rng.choice([-10.0, 25.0, 40.0], n),
        "high_time_s": th, "low_time_s": tl, "period_s": th + tl, "frequency_hz": f,
        "duty": th / (th + tl), "supply_current_a": rng.uniform(1e-3, 1e-2, n),
        "flags": flags, "ok": flags == ""})


def main() -> None:
    n = int(sys.argv[1]) if len(sys.argv) > 1 else 100_000
    n_pd = int(sys.argv[2]) if len(sys.argv) > 2 else 10_000
    print(json.dumps(measure(n, n_pd)))


def measure(n: int = 100_000, n_pd: int = 10_000) -> dict:
    base = make_report()
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        pts = points_frame(n)
        rep = dataclasses.replace(base, points=pts, points_total=n, points_note=f"All {n} points.")
        t0 = time.perf_counter()
        write_workbook(tmp / "ours.xlsx", rep)
        ours_s = time.perf_counter() - t0
        # the other sheets of the small report, timed alone, are taken off
        small = dataclasses.replace(base, points=pts.head(1))
        t0 = time.perf_counter()
        write_workbook(tmp / "small.xlsx", small)
        rest_s = time.perf_counter() - t0
        ours_rows_s = n / max(ours_s - rest_s, 1e-9)

        sample = points_frame(n_pd, seed=2)
        t0 = time.perf_counter()
        sample.to_excel(tmp / "pandas.xlsx", engine="openpyxl", index=False)
        pd_s = time.perf_counter() - t0
        pd_rows_s = n_pd / pd_s
        size_mb = (tmp / "ours.xlsx").stat().st_size / 1e6
    print(f"workbook Points writer: {n} rows x {pts.shape[1]} cols in {ours_s:.2f} s "
          f"(other sheets {rest_s:.2f} s): {ours_rows_s:,.0f} rows/s, file {size_mb:.1f} MB")
    print(f"pandas to_excel(openpyxl): {n_pd} rows in {pd_s:.2f} s: {pd_rows_s:,.0f} rows/s")
    print(f"ratio: {ours_rows_s / pd_rows_s:.1f}x")
    return ({"rows": n, "columns": int(pts.shape[1]), "workbook_s": round(ours_s, 3),
                      "workbook_rows_per_s": round(ours_rows_s), "pandas_rows": n_pd,
                      "pandas_openpyxl_s": round(pd_s, 3),
                      "pandas_openpyxl_rows_per_s": round(pd_rows_s),
                      "ratio": round(ours_rows_s / pd_rows_s, 2), "file_mb": round(size_mb, 2)})


if __name__ == "__main__":
    main()
