"""Rows per second of the workbook's Designs and Points sheets, beside pandas' openpyxl writer.

Run: python tests/benchmarks/workbook_rows.py [points_rows] [designs_rows] [pandas_rows]

Points: ``points_rows`` x 15 columns shaped like a sweep. Designs: the ranked designs of the
example study studies/bike-light.toml (every per-design column the pipeline writes), repeated
to ``designs_rows`` rows, with its own mix of passing and failing designs (failing rows are
styled). Each is written through write_workbook; the time of the other sheets of the same small
report, measured alone, is taken off. The baseline, a smaller sample written by
pandas.DataFrame.to_excel(engine="openpyxl"), runs in the same process. Prints one line per
writer, then one JSON line of named figures. Not collected by pytest.
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

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

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


def designs_frame(n: int) -> pd.DataFrame:
    """The example study's ranked designs (every column the pipeline gives the Designs sheet),
    repeated to n rows, renumbered."""
    from sweep.analysis import Options
    from sweep.pipeline import analyse, ranked_designs
    from sweep.study import load_study
    st = load_study(ROOT / "studies" / "bike-light.toml")
    with tempfile.TemporaryDirectory() as tmp:
        an = analyse(st, Options(), Path(tmp))
        d = ranked_designs(st, an).drop(columns=["flag_mask"])
    d = pd.concat([d] * (n // len(d) + 1), ignore_index=True).head(n)
    d["rank"] = np.arange(1, n + 1)
    d["design"] = np.arange(1, n + 1)
    return d


def _time_write(path: Path, report) -> float:
    t0 = time.perf_counter()
    write_workbook(path, report)
    return time.perf_counter() - t0


def main() -> None:
    n = int(sys.argv[1]) if len(sys.argv) > 1 else 100_000
    n_d = int(sys.argv[2]) if len(sys.argv) > 2 else 10_000
    n_pd = int(sys.argv[3]) if len(sys.argv) > 3 else 10_000
    print(json.dumps(measure(n, n_pd, n_d)))


def measure(n: int = 100_000, n_pd: int = 10_000, n_designs: int = 10_000) -> dict:
    base = make_report()
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        # the other sheets of the small report, timed alone, are taken off each figure
        rest_s = _time_write(tmp / "small.xlsx", dataclasses.replace(base, points=base.points.head(1)))

        pts = points_frame(n)
        rep = dataclasses.replace(base, points=pts, points_total=n, points_note=f"All {n} points.")
        ours_s = _time_write(tmp / "ours.xlsx", rep)
        ours_rows_s = n / max(ours_s - rest_s, 1e-9)
        size_mb = (tmp / "ours.xlsx").stat().st_size / 1e6

        designs = designs_frame(n_designs)
        failing = int(designs["verdict"].isin(["spec miss", "limit", "stalls"]).sum())
        rep = dataclasses.replace(base, designs=designs, points=base.points.head(1),
                                  part_columns=["ra_ohm", "rb_ohm", "c_f"])
        from sweep.writers import workbook
        shown = min(n_designs, getattr(workbook, "DESIGNS_ROWS", n_designs))
        d_s = _time_write(tmp / "designs.xlsx", rep)
        d_rows_s = shown / max(d_s - rest_s, 1e-9)

        sample = points_frame(n_pd, seed=2)
        t0 = time.perf_counter()
        sample.to_excel(tmp / "pandas.xlsx", engine="openpyxl", index=False)
        pd_s = time.perf_counter() - t0
        pd_rows_s = n_pd / pd_s
    print(f"workbook Points sheet: {n} rows x {pts.shape[1]} cols in {ours_s:.2f} s "
          f"(other sheets {rest_s:.2f} s): {ours_rows_s:,.0f} rows/s, file {size_mb:.1f} MB")
    print(f"workbook Designs sheet: {shown} rows x {designs.shape[1]} cols ({failing} of "
          f"{n_designs} failing, styled) in {d_s:.2f} s: {d_rows_s:,.0f} rows/s, "
          f"{d_s / shown * 1e4:.2f} s per 10 000 rows")
    print(f"pandas to_excel(openpyxl): {n_pd} rows x {sample.shape[1]} cols in {pd_s:.2f} s: "
          f"{pd_rows_s:,.0f} rows/s")
    print(f"ratio, Points sheet over pandas: {ours_rows_s / pd_rows_s:.1f}x")
    return {"rows": n, "columns": int(pts.shape[1]), "workbook_s": round(ours_s, 3),
            "workbook_rows_per_s": round(ours_rows_s), "pandas_rows": n_pd,
            "designs_rows": shown, "designs_columns": int(designs.shape[1]),
            "designs_failing_rows": failing, "designs_s": round(d_s, 3),
            "designs_rows_per_s": round(d_rows_s),
            "pandas_openpyxl_s": round(pd_s, 3),
            "pandas_openpyxl_rows_per_s": round(pd_rows_s),
            "ratio": round(ours_rows_s / pd_rows_s, 2), "file_mb": round(size_mb, 2)}


if __name__ == "__main__":
    main()
