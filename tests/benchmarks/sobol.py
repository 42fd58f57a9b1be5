"""Sobol benchmark: a fresh interpreter that imports the generator and draws a Monte Carlo's
points, sweep.sobol against scipy.stats.qmc (the baseline), alternated in the same run. Both
must give the same array, or the ratio means nothing. Prints a table and one JSON line.

    python tests/benchmarks/sobol.py [--n 1000] [--d 15] [--repeats 5]
"""
from __future__ import annotations

import argparse
import json
import statistics
import subprocess
import sys
import time

OURS = "from sweep.sobol import sobol_points as f; x = f({n}, {d}, 1)"
BASE = ("import warnings; warnings.simplefilter('ignore')\n"
        "from scipy.stats import qmc; x = qmc.Sobol(d={d}, scramble=True, seed=1).random({n})")
TAIL = "\nimport hashlib, sys; sys.stdout.write(hashlib.sha256(x.tobytes()).hexdigest())"


def once(code: str) -> tuple[float, str]:
    t = time.perf_counter()
    r = subprocess.run([sys.executable, "-c", "import numpy\n" + code + TAIL],
                       capture_output=True, text=True, check=True)
    return time.perf_counter() - t, r.stdout


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--n", type=int, default=1000)
    ap.add_argument("--d", type=int, default=15)
    ap.add_argument("--repeats", type=int, default=5)
    a = ap.parse_args()
    ours, base = [], []
    for _ in range(a.repeats):
        t_b, h_b = once(BASE.format(n=a.n, d=a.d))
        t_o, h_o = once(OURS.format(n=a.n, d=a.d))
        assert h_o == h_b, "the two generators disagree"
        base.append(t_b)
        ours.append(t_o)
    mb, mo = statistics.median(base), statistics.median(ours)
    print(f"{'interpreter + numpy + import + draw':40s} {'median s':>9s}")
    print(f"{'scipy.stats.qmc (baseline)':40s} {mb:9.3f}")
    print(f"{'sweep.sobol':40s} {mo:9.3f}")
    print(f"ratio baseline / ours: {mb / mo:.2f}")
    print(json.dumps({"n": a.n, "d": a.d, "baseline_s": round(mb, 4), "ours_s": round(mo, 4),
                      "ratio": round(mb / mo, 2)}))


if __name__ == "__main__":
    main()
