"""Compiled-kernel benchmark: the realistic X7R astable through `sweep.physics.kernel.evaluate`
against the numpy model `sweep.physics.model.evaluate` on the same blocks in the same run
(alternating, medians), the same for the astable with a diode across RB (its Shockley diode, and
a fixed drop), and the time a fresh process takes for its first compiled call, with an empty
cache (compiling) and with the cache filled (loading). Ends with one JSON line.

    python tests/benchmarks/kernel.py [--points N] [--diode-points N] [--repeats K]

`figures()` returns the same figures as a dict, for a suite script.
"""
from __future__ import annotations

import argparse
import json
import os
import statistics
import subprocess
import sys
import tempfile
import time

import numpy as np

from sweep.engine import DEFAULT_CHUNK
from sweep.models import load_timer
from sweep.physics import Load, Parts, kernel, model

#: an invented realistic sweep: E24-like designs over supply and temperature
N_CONDITIONS = 40
FIRST_CALL = """
import time
t0 = time.perf_counter()
import numpy as np
from sweep.models import load_timer
from sweep.physics import Load, Parts, kernel
kernel.evaluate("astable", load_timer("bipolar"), Parts(capacitor="X7R"), Load(), ra=np.array([1e4]),
                rb=np.array([4.7e4]), c=np.array([1e-7]), vcc=np.array([9.0]), temperature=np.array([25.0]))
print(time.perf_counter() - t0)
"""
BASE = """
import time
t0 = time.perf_counter()
import numpy as np
from sweep.models import load_timer
from sweep.physics import Load, Parts, model
model.evaluate("astable", load_timer("bipolar"), Parts(capacitor="X7R"), Load(), ra=np.array([1e4]),
               rb=np.array([4.7e4]), c=np.array([1e-7]), vcc=np.array([9.0]), temperature=np.array([25.0]))
print(time.perf_counter() - t0)
"""


def blocks(points: int, chunk: int = DEFAULT_CHUNK):
    """Design blocks of the engine's chunk size (or chunk points): (ra, rb, c) as (d, 1, 1)
    and the conditions (vcc, temperature) as (1, 1, c)."""
    rng = np.random.default_rng(12)
    n_designs = max(1, points // N_CONDITIONS)
    ra = 10.0 ** rng.uniform(3, 6, n_designs)
    rb = 10.0 ** rng.uniform(3, 6, n_designs)
    c = 10.0 ** rng.uniform(-9, -5, n_designs)
    vcc = np.repeat(np.linspace(5.0, 15.0, 8), 5)[None, None, :]
    temperature = np.tile(np.linspace(-40.0, 85.0, 5), 8)[None, None, :]
    step = max(1, chunk // N_CONDITIONS)
    return [dict(ra=ra[s:s + step, None, None], rb=rb[s:s + step, None, None],
                 c=c[s:s + step, None, None], vcc=vcc, temperature=temperature)
            for s in range(0, n_designs, step)], n_designs * N_CONDITIONS


def sweep_time(fn, parts_list, circuit: str = "astable", parts: Parts | None = None) -> float:
    timer, load = load_timer("bipolar"), Load()
    parts = Parts(capacitor="X7R") if parts is None else parts
    t0 = time.perf_counter()
    for kw in parts_list:
        fn(circuit, timer, parts, load, **kw)
    return time.perf_counter() - t0


def rates(work, n: int, repeats: int, circuit: str = "astable", parts: Parts | None = None):
    """Kernel and numpy-model points/s on the same blocks, alternating, medians."""
    k_times, m_times = [], []
    for _ in range(repeats):
        k_times.append(sweep_time(kernel.evaluate, work, circuit, parts))
        m_times.append(sweep_time(model.evaluate, work, circuit, parts))
    return n / statistics.median(k_times), n / statistics.median(m_times)


def first_call_s(code: str, cache_dir: str) -> float:
    env = dict(os.environ, NUMBA_CACHE_DIR=cache_dir)
    done = subprocess.run([sys.executable, "-c", code], env=env, capture_output=True, text=True,
                          check=True)
    return float(done.stdout.strip().splitlines()[-1])


def figures(points: int = 10_000_000, repeats: int = 5, diode_points: int = 2_000_000) -> dict:
    """Kernel and numpy-model points/s (medians of alternating runs), their ratio, the same for
    astable-diode (Shockley and fixed drop, diode_points points), and the first call's time in a
    fresh process: compiling (empty cache), loading the cache, and the numpy model's first call
    for comparison."""
    with tempfile.TemporaryDirectory() as cache:
        compile_s = first_call_s(FIRST_CALL, cache)
        load_s = statistics.median(first_call_s(FIRST_CALL, cache) for _ in range(3))
        numpy_first_s = statistics.median(first_call_s(BASE, cache) for _ in range(3))
    work, n = blocks(points)
    sweep_time(kernel.evaluate, work[:2])                   # this process's own first call
    k_rate, m_rate = rates(work, n, repeats)
    # the same sweep in blocks 8x the engine's: the kernel's fixed cost per call (the
    # condition-level numpy work, the input pool) spread over more points
    big, _ = blocks(points, 8 * DEFAULT_CHUNK)
    kb_rate, mb_rate = rates(big, n, repeats)
    # astable-diode: the Shockley diode (the default) and a fixed 0.7 V drop
    dwork, dn = blocks(diode_points)
    diode = {}
    for key, parts in (("diode", Parts(capacitor="X7R")),
                       ("diode_drop", Parts(capacitor="X7R", diode_drop_v=0.7))):
        sweep_time(kernel.evaluate, dwork[:2], "astable-diode", parts)
        k, m = rates(dwork, dn, repeats, "astable-diode", parts)
        diode.update({f"{key}_kernel_mpts_s": k / 1e6, f"{key}_numpy_mpts_s": m / 1e6,
                      f"{key}_ratio": k / m})
    return dict(points=n, kernel_mpts_s=k_rate / 1e6, numpy_mpts_s=m_rate / 1e6,
                ratio=k_rate / m_rate, big_block_kernel_mpts_s=kb_rate / 1e6,
                big_block_numpy_mpts_s=mb_rate / 1e6, big_block_ratio=kb_rate / mb_rate,
                first_call_compile_s=compile_s,
                first_call_cached_s=load_s, numpy_first_call_s=numpy_first_s,
                diode_points=dn, **diode)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--points", type=int, default=10_000_000)
    ap.add_argument("--diode-points", type=int, default=2_000_000)
    ap.add_argument("--repeats", type=int, default=5)
    a = ap.parse_args()
    f = figures(a.points, a.repeats, a.diode_points)
    report(f)
    print(json.dumps(f))


def report(f: dict) -> None:
    """Print the figures of `figures()` as lines of text."""
    print(f"realistic X7R astable, {f['points']:.3g} points in blocks of {DEFAULT_CHUNK}")
    print(f"  kernel      {f['kernel_mpts_s']:8.1f} M points/s")
    print(f"  numpy model {f['numpy_mpts_s']:8.1f} M points/s   (same run, medians)")
    print(f"  ratio       {f['ratio']:8.1f} x   (target >= 5x and >= 40 M points/s)")
    print(f"  in blocks of {8 * DEFAULT_CHUNK}: kernel {f['big_block_kernel_mpts_s']:.1f}, numpy "
          f"{f['big_block_numpy_mpts_s']:.1f} M points/s, ratio {f['big_block_ratio']:.1f} x")
    for key, what in (("diode", "Shockley diode"), ("diode_drop", "fixed 0.7 V drop")):
        print(f"realistic X7R astable-diode, {what}, {f['diode_points']:.3g} points: kernel "
              f"{f[key + '_kernel_mpts_s']:.1f}, numpy model {f[key + '_numpy_mpts_s']:.1f} "
              f"M points/s (same run), ratio {f[key + '_ratio']:.1f} x")
    print(f"  first call in a fresh process: {f['first_call_compile_s']:.2f} s compiling, "
          f"{f['first_call_cached_s']:.2f} s from the cache, numpy model "
          f"{f['numpy_first_call_s']:.2f} s")


if __name__ == "__main__":
    main()
