"""Monte Carlo draws benchmark: a fresh interpreter that imports what the draws need and draws a
Monte Carlo's builds, ours against scipy's (the baseline), alternated in the same run. Each pair
must give the same array, or the ratio means nothing. Three pairs:

- points: sweep.sobol against scipy.stats.qmc.Sobol (n x d points);
- deviates: mc_draws' two steps (Sobol points clipped, then the normal inverse) with
  sweep.normal.ndtri against scipy.special.ndtri (n x d points);
- mc_draws: the function itself on a study (its own dimension count), with scipy.special.ndtri
  put in place of sweep.normal's for the baseline.

Prints a table and one JSON line.

    python tests/benchmarks/sobol.py [--n 1000] [--d 15] [--repeats 5] [--study studies/bike-light.toml]
"""
from __future__ import annotations

import argparse
import json
import statistics
import subprocess
import sys
import time

POINTS = {
    "base": ("import warnings; warnings.simplefilter('ignore')\n"
             "from scipy.stats import qmc; x = qmc.Sobol(d={d}, scramble=True, seed=1).random({n})"),
    "ours": "from sweep.sobol import sobol_points as f; x = f({n}, {d}, 1)",
}
STEPS = ("from sweep.sobol import sobol_points\n"
         "u = numpy.clip(sobol_points({n}, {d}, 1).T, 1e-12, 1 - 1e-12); x = ndtri(u)")
DEVIATES = {
    "base": "from scipy.special import ndtri\n" + STEPS,
    "ours": "from sweep.normal import ndtri\n" + STEPS,
}
DRAWS = ("from sweep.study import load_study\nfrom sweep.analysis import mc_draws\n"
         "z = mc_draws(load_study({study!r}), {n}); x = numpy.stack(list(z.values()))")
MC_DRAWS = {
    "base": "import scipy.special, sweep.normal; sweep.normal.ndtri = scipy.special.ndtri\n" + DRAWS,
    "ours": DRAWS,
}
CASES = {"points": POINTS, "deviates": DEVIATES, "mc_draws": MC_DRAWS}
LABELS = {
    "points": ("scipy.stats.qmc (baseline)", "sweep.sobol"),
    "deviates": ("sweep.sobol + scipy.special.ndtri", "sweep.sobol + sweep.normal.ndtri"),
    "mc_draws": ("mc_draws, scipy.special.ndtri", "mc_draws, sweep.normal.ndtri"),
}
TAIL = ("\nimport hashlib, sys; sys.stdout.write(str(x.shape) + ' ' "
        "+ hashlib.sha256(x.tobytes()).hexdigest())")


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
    ap.add_argument("--study", default="studies/bike-light.toml")
    a = ap.parse_args()
    times = {(c, w): [] for c in CASES for w in ("base", "ours")}
    shapes = {}
    for _ in range(a.repeats):
        for case, code in CASES.items():
            t_b, h_b = once(code["base"].format(n=a.n, d=a.d, study=a.study))
            t_o, h_o = once(code["ours"].format(n=a.n, d=a.d, study=a.study))
            assert h_o == h_b, f"{case}: ours and the baseline disagree"
            times[case, "base"].append(t_b)
            times[case, "ours"].append(t_o)
            shapes[case] = h_o.rsplit(" ", 1)[0].replace(" ", "")
    med = {k: statistics.median(v) for k, v in times.items()}
    print(f"{'interpreter + numpy + import + draw':44s} {'shape':>11s} {'median s':>9s} {'ratio':>6s}")
    figures = {"n": a.n, "d": a.d, "study": a.study}
    for case in CASES:
        mb, mo = med[case, "base"], med[case, "ours"]
        base_label, ours_label = LABELS[case]
        print(f"{base_label:44s} {shapes[case]:>11s} {mb:9.3f}")
        print(f"{ours_label:44s} {shapes[case]:>11s} {mo:9.3f} {mb / mo:6.2f}")
        figures[case] = {"baseline_s": round(mb, 4), "ours_s": round(mo, 4),
                         "ratio": round(mb / mo, 2)}
    print("ratio: baseline / ours, medians of alternated runs")
    print(json.dumps(figures))


if __name__ == "__main__":
    main()
