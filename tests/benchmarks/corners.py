"""Worst-case corners benchmark: each design's worst case (its extremes over every corner and
condition, and where it first stalls) taken three ways from the same designs in the same run
(alternating, medians):

- factored: every spread on an axis of its own on the numpy model, reduced by numpy (what the
  analysis runs where the kernel does not fold);
- folded: every corner in full on the compiled kernel, each design's extremes folded in tile by
  tile (what it runs for the circuits in analysis.FOLDED_CORNERS on big sweeps);
- and, as the baseline, every corner written out in full on the numpy model, the evaluation
  alone (the way before the corners were factored, its reductions not counted).

Figures are corner evaluations per second: designs x corners x conditions over the time. Each
way runs as many designs as one of the analysis's blocks holds for it (engine.ANALYSIS_CHUNK,
analysis.FOLDED_CHUNK where the corners are folded), unless --designs says. Ends with one JSON line.

    python tests/benchmarks/corners.py [--designs N] [--repeats K]

`figures()` returns the same figures as a dict, for a suite script.
"""
from __future__ import annotations

import argparse
import json
import statistics
import sys
import time
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parents[1]))

from sweep import analysis                             # noqa: E402
from sweep.case import axis_values                     # noqa: E402
from sweep.engine import ANALYSIS_CHUNK, _one_corner_axis, evaluate_block  # noqa: E402
from sweep.spreads import worst_case_corners           # noqa: E402
from sweep.study import load_study, parse_study        # noqa: E402

#: an invented plain astable over many conditions (the big sweep's shape)
ASTABLE = """
[study]
circuit = "astable"
timer = "bipolar"
[design]
ra = { series = "E96", min = "1k", max = "100k" }
rb = { series = "E96", min = "1k", max = "1M" }
c = ["1n", "10n", "100n", "1u"]
[conditions]
vcc = { min = 5, max = 15, steps = 10 }
temperature = { min = -40, max = 85, steps = 10 }
[parts]
capacitor = "X7R"
[load]
resistance = "1k"
"""


def _case(study, designs: int | None, repeats: int) -> dict:
    cond = axis_values(study.conditions, np.arange(study.n_conditions))
    corners = worst_case_corners(study, cond, False)
    per = study.n_conditions * (1 + corners.count)
    # each way at the block size the analysis gives it (pipeline.analyse), unless --designs says
    size = {"factored": ANALYSIS_CHUNK, "folded": analysis.FOLDED_CHUNK, "full_numpy": ANALYSIS_CHUNK}
    count = {k: min(study.n_designs, designs or max(1, v // per)) for k, v in size.items()}
    design = {k: axis_values(study.design, np.arange(n)) for k, n in count.items()}
    full = _one_corner_axis(corners.variation)
    outs = analysis.summary_outputs(study)
    runs = {"factored": lambda d: analysis._worst_case(study, d, cond, corners, outs, False),
            "folded": lambda d: analysis._folded_worst_case(study, d, cond, corners, outs, False),
            "full_numpy": lambda d: evaluate_block(study.case, d, cond, variation=full,
                                                   with_spec=False, compiled=False)}
    for k, f in runs.items():         # warm up (the kernel compiles or loads its cache once)
        f(design[k])
    times = {k: [] for k in runs}
    for _ in range(repeats):
        for k, f in runs.items():
            t0 = time.perf_counter()
            f(design[k])
            times[k].append(time.perf_counter() - t0)
    n = {k: c * corners.count * study.n_conditions for k, c in count.items()}
    return ({k: n[k] / statistics.median(v) for k, v in times.items()}
            | {"evaluations": n["factored"], "folded_evaluations": n["folded"]})


def figures(designs: int | None = None, repeats: int = 5) -> dict:
    out = {}
    studies = {"astable_diode": load_study(HERE.parents[1] / "studies" / "bike-light.toml"),
               "astable": parse_study(ASTABLE, "astable.toml")}
    for name, study in studies.items():
        r = _case(study, designs, repeats)
        print(f"worst-case corners, {name} (blocks of {r['evaluations']:,} corner evaluations, "
              f"{r['folded_evaluations']:,} folded): factored "
              f"{r['factored'] / 1e6:.1f} M/s, folded in the kernel {r['folded'] / 1e6:.1f} M/s; "
              f"every corner in full on numpy {r['full_numpy'] / 1e6:.1f} M/s (evaluation alone): "
              f"folded {r['folded'] / r['factored']:.2f}x factored, "
              f"factored {r['factored'] / r['full_numpy']:.1f}x full")
        out.update({f"corners_{name}_factored_per_s": round(r["factored"]),
                    f"corners_{name}_folded_per_s": round(r["folded"]),
                    f"corners_{name}_full_numpy_per_s": round(r["full_numpy"])})
    return out


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--designs", type=int, default=None)
    ap.add_argument("--repeats", type=int, default=5)
    a = ap.parse_args()
    print(json.dumps(figures(a.designs, a.repeats)))


if __name__ == "__main__":
    main()
