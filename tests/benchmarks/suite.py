"""All of timer-sweep's benchmarks in one command; every figure is measured in this run, beside
its baseline. Ends with one JSON line of named figures.

    python tests/benchmarks/suite.py [--quick]

--quick uses a 1e7-point sweep for the memory and worker figures instead of 1e8 (minutes less).
--only-writers prints the workbook, end-to-end and command figures alone.
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

import corners as corners_bench        # noqa: E402
import engine as engine_bench          # noqa: E402
import kernel as kernel_bench          # noqa: E402
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


def monte_carlo_rate(rounds: int = 3) -> dict:
    """Monte Carlo evaluations per second, the check against the spec included, three ways on
    the same designs (alternating, medians): folded inside the compiled kernel (what a big sweep
    runs); the kernel writing the grid and numpy summing it (the way before the folds); the
    numpy model alone (the baseline)."""
    from sweep import analysis
    from sweep.physics import kernel
    st = parse_study(BIG.format(points="", ra_max="100k").replace("monte_carlo = 200", "monte_carlo = 1000"),
                     "mc.toml")
    designs = np.arange(1, 201)
    real = analysis.can_fold
    ways = {"folded": (real, "1"), "grid": (lambda *a, **k: False, "1"),
            "numpy": (lambda *a, **k: False, "0")}
    times = {k: [] for k in ways}
    saved = os.environ.get(kernel.ENV)
    for warm in [True] + [False] * rounds:
        for k, (fold, env) in ways.items():
            analysis.can_fold = fold
            os.environ[kernel.ENV] = env
            t0 = time.perf_counter()
            monte_carlo_block(st, designs[:5] if warm else designs)
            if not warm:
                times[k].append(time.perf_counter() - t0)
    analysis.can_fold = real
    if saved is None:
        os.environ.pop(kernel.ENV)
    else:
        os.environ[kernel.ENV] = saved
    evals = len(designs) * st.monte_carlo * st.n_conditions
    rate = {k: evals / float(np.median(v)) for k, v in times.items()}
    print(f"Monte Carlo {rate['folded'] / 1e6:8.2f} M evaluations/s folded in the kernel; "
          f"{rate['grid'] / 1e6:.2f} M with the kernel's grid summed by numpy; "
          f"{rate['numpy'] / 1e6:.2f} M on the numpy model: {rate['folded'] / rate['numpy']:.1f}x "
          f"the numpy model ({evals:,} evaluations, spec check included; target 20 M)")
    return {"mc_evaluations_per_s": round(rate["folded"]),
            "mc_grid_evaluations_per_s": round(rate["grid"]),
            "mc_numpy_evaluations_per_s": round(rate["numpy"]), "mc_evaluations": evals}


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


def _median_alternating(commands: dict[str, list[str]], rounds: int = 5, cwd: Path | None = None) -> dict:
    """Median wall time (s) of each command, run in turns (one of each per round), so a load
    that comes and goes on a shared machine weighs on every command alike."""
    times = {k: [] for k in commands}
    for _ in range(rounds):
        for k, cmd in commands.items():
            t0 = time.perf_counter()
            subprocess.run(cmd, check=True, capture_output=True, cwd=cwd)
            times[k].append(time.perf_counter() - t0)
    return {k: float(np.median(v)) for k, v in times.items()}


def end_to_end(rounds: int = 5) -> dict:
    """The example study end to end through the command line (analysis, workbook, page, tables),
    beside `python -c "import numpy, pandas"`, medians of `rounds` alternations; the commands that
    need no analysis beside the same baseline."""
    root = HERE.parents[1]
    with tempfile.TemporaryDirectory() as tmp:
        run = [sys.executable, "-m", "sweep", "run", str(root / "studies" / "bike-light.toml"),
               "--quiet", "--out", str(Path(tmp) / "bike-light")]
        cmds = {"import numpy, pandas": [sys.executable, "-c", "import numpy, pandas"],
                "bike-light run": run,
                "--help": [sys.executable, "-m", "sweep", "--help"],
                "point": [sys.executable, "-m", "sweep", "point", "--ra", "10k", "--rb", "47k",
                          "--c", "100n", "--vcc", "9", "--json"],
                "new": [sys.executable, "-m", "sweep", "new", "astable", "--force", "--out",
                        str(Path(tmp) / "a.toml")],
                "check": [sys.executable, "-m", "sweep", "check",
                          str(root / "studies" / "bike-light.toml")]}
        med = _median_alternating(cmds, rounds, cwd=root)
        points = json.loads((Path(tmp) / "bike-light" / "run.json").read_text())["points"]
    base = med["import numpy, pandas"]
    ratio = med["bike-light run"] / base
    print(f"bike-light end to end {med['bike-light run']:.2f} s ({points:,} points, "
          f"{points / med['bike-light run']:,.0f} points/s) against import numpy, pandas "
          f"{base:.2f} s: {ratio:.1f}x (target 2.5x; medians of {rounds} alternations)")
    for k in ("--help", "point", "new", "check"):
        print(f"timer-sweep {k}: {med[k]:.2f} s ({med[k] / base:.1f}x the import of numpy, pandas)")
    return {"import_numpy_pandas_s": round(base, 3), "bike_light_s": round(med["bike-light run"], 3),
            "bike_light_points": points, "bike_light_over_import": round(ratio, 2),
            **{f"command_{k.strip('-')}_s": round(med[k], 3) for k in ("--help", "point", "new", "check")}}


def million_points() -> dict:
    """The example study with finer resistor series and a fourth capacitor (about 1e6 points),
    end to end through the command line, workbook and page included."""
    root = HERE.parents[1]
    text = (root / "studies" / "bike-light.toml").read_text(encoding="utf-8")
    text = (text.replace('ra = { series = "E12"', 'ra = { series = "E96"')
                .replace('rb = { series = "E12"', 'rb = { series = "E96"')
                .replace('c  = ["470n", "1u", "2.2u"]', 'c  = ["470n", "1u", "2.2u", "4.7u"]'))
    with tempfile.TemporaryDirectory() as tmp:
        study = Path(tmp) / "bike-light-1e6.toml"
        study.write_text(text, encoding="utf-8")
        out = Path(tmp) / "out"
        t0 = time.perf_counter()
        subprocess.run([sys.executable, "-m", "sweep", "run", str(study), "--quiet", "--yes",
                        "--out", str(out)], check=True)
        total = time.perf_counter() - t0
        info = json.loads((out / "run.json").read_text())
    n = info["points"]
    print(f"1e6 study end to end: {n:,} points in {total:.1f} s = {n / total:,.0f} points/s "
          f"(analysis {info['seconds_analysis']:.1f} s; target 500,000 points/s)")
    return {"e2e_1e6_points": n, "e2e_1e6_s": round(total, 2),
            "e2e_1e6_points_per_s": round(n / total),
            "e2e_1e6_analysis_s": info["seconds_analysis"]}


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--quick", action="store_true")
    ap.add_argument("--only-writers", action="store_true")
    args = ap.parse_args()
    figures = {}
    if args.only_writers:
        wb = workbook_rows.measure(100_000, 10_000)
        figures.update({"workbook_rows_per_s": wb["workbook_rows_per_s"],
                        "workbook_designs_rows_per_s": wb["designs_rows_per_s"]})
        figures.update(end_to_end())
        figures.update(million_points())
        print(json.dumps(figures))
        return
    figures.update(engine_bench.measure())
    kf = kernel_bench.figures()
    kernel_bench.report(kf)
    figures.update({k if k.startswith(("kernel", "diode", "big_block", "first_call"))
                    else f"kernel_bench_{k}": v for k, v in kf.items()})
    figures.update(corners_bench.figures())
    figures.update(monte_carlo_rate())
    wb = workbook_rows.measure(100_000, 10_000)
    figures.update({"workbook_rows_per_s": wb["workbook_rows_per_s"],
                    "workbook_designs_rows_per_s": wb["designs_rows_per_s"],
                    "workbook_over_pandas_openpyxl": wb["ratio"]})
    figures.update(end_to_end())
    figures.update(million_points())
    figures.update(big_runs(args.quick))
    figures["cpu_count"] = os.cpu_count()
    print(json.dumps(figures))


if __name__ == "__main__":
    main()
