"""All of timer-sweep's benchmarks in one command; every figure is measured in this run, beside
its baseline. Ends with one JSON line of named figures.

    python tests/benchmarks/suite.py [--quick]

--quick uses a 1e7-point sweep for the memory and worker figures instead of 1e8 (minutes less).
"""
from __future__ import annotations

import argparse
import json
import os
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))
sys.path.insert(0, str(HERE.parents[1]))

import engine as engine_bench          # noqa: E402
import workbook_rows                   # noqa: E402
from sweep.analysis import monte_carlo_block  # noqa: E402
from sweep.study import parse_study    # noqa: E402

BIG = """# benchmark study: {points} points
[study]
title = "benchmark sweep"
circuit = "astable"
timer = "bipolar"
[design]
ra = {{ series = "E96", min = "1k", max = "{ra_max}" }}
rb = {{ series = "E96", min = "1k", max = "1M" }}
c = ["1n", "2.2n", "4.7n", "10n", "22n", "47n", "100n", "220n", "470n", "1u", "2.2u", "4.7u"]
[conditions]
vcc = {{ min = 5, max = 15, steps = 10 }}
temperature = {{ min = -40, max = 85, steps = 10 }}
[spec]
frequency = {{ target = "1kHz", tolerance = "5%" }}
[analysis]
monte_carlo = 200
"""


def monte_carlo_rate() -> dict:
    """Monte Carlo evaluations per second, the check against the spec included."""
    st = parse_study(BIG.format(points="", ra_max="100k").replace("monte_carlo = 200", "monte_carlo = 1000"),
                     "mc.toml")
    designs = np.arange(1, 201)
    monte_carlo_block(st, designs[:5])                   # warm up
    t0 = time.perf_counter()
    monte_carlo_block(st, designs)
    dt = time.perf_counter() - t0
    evals = len(designs) * st.monte_carlo * st.n_conditions
    print(f"Monte Carlo {evals / dt / 1e6:8.2f} M evaluations/s ({evals:,} in {dt:.2f} s, spec check included)")
    return {"mc_evaluations_per_s": round(evals / dt), "mc_evaluations": evals}


def big_runs(quick: bool) -> dict:
    """A 1e8-point sweep (1e7 with --quick) run by the CLI in a subprocess: peak resident memory
    of the 1-worker run, then the speed-up of 2 workers over 1."""
    ra_max = "31.6k" if quick else "1M"
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        study = tmp / "big.toml"
        study.write_text(BIG.format(points="", ra_max=ra_max), encoding="utf-8")
        st = parse_study(study.read_text(), str(study))
        cmd = [sys.executable, "-m", "sweep", "run", str(study), "--quiet", "--yes"]
        times, analysis = {}, {}
        for workers in (1, 2):
            out = tmp / f"out{workers}"
            t0 = time.perf_counter()
            subprocess.run(cmd + ["--out", str(out), "--workers", str(workers)], check=True)
            times[workers] = time.perf_counter() - t0
            analysis[workers] = json.loads((out / "run.json").read_text())["seconds_analysis"]
            if workers == 1:
                peak_mib = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss / 1024
    n = st.n_points
    print(f"sweep of {n:,} points: 1 worker {times[1]:.0f} s (analysis {analysis[1]:.0f} s), "
          f"2 workers {times[2]:.0f} s (analysis {analysis[2]:.0f} s)")
    print(f"peak resident memory, 1 worker: {peak_mib:,.0f} MiB")
    print(f"speed-up of 2 workers: {times[1] / times[2]:.2f}x whole run, "
          f"{analysis[1] / analysis[2]:.2f}x analysis")
    return {"big_points": n, "big_peak_rss_mib": round(peak_mib),
            "big_seconds_1_worker": round(times[1], 1), "big_seconds_2_workers": round(times[2], 1),
            "speedup_2_workers": round(times[1] / times[2], 2),
            "speedup_2_workers_analysis": round(analysis[1] / analysis[2], 2)}


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--quick", action="store_true")
    args = ap.parse_args()
    figures = {}
    figures.update(engine_bench.measure())
    figures.update(monte_carlo_rate())
    wb = workbook_rows.measure(100_000, 10_000)
    figures.update({"workbook_rows_per_s": wb["workbook_rows_per_s"],
                    "workbook_over_pandas_openpyxl": wb["ratio"]})
    figures.update(big_runs(args.quick))
    figures["cpu_count"] = os.cpu_count()
    print(json.dumps(figures))


if __name__ == "__main__":
    main()
