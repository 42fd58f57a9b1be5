"""Engine benchmark: realistic-model points per second, against a plain per-point Python loop of
the same model measured in the same run. Prints a table and ends with one JSON line.

    python tests/benchmarks/engine.py [--points N]
"""
from __future__ import annotations

import argparse
import json
import math
import time

import numpy as np

from sweep.engine import axis_values, design_blocks, evaluate_block
from sweep.study import parse_study

STUDY = """
[study]
circuit = "astable"
timer = "bipolar"
[design]
ra = {{ series = "E96", min = "1k", max = "{ra_max}" }}
rb = {{ series = "E96", min = "1k", max = "100k" }}
c = ["1n", "2.2n", "4.7n", "10n", "22n", "47n", "100n", "220n"]
[conditions]
vcc = {{ min = 5, max = 15, steps = 5 }}
temperature = {{ min = -40, max = 85, steps = 5 }}
[parts]
capacitor = "X7R"
[analysis]
monte_carlo = 0
"""


CHEB = [0.5 - 0.5 * math.cos((2 * i + 1) * math.pi / 6) for i in range(3)]
TO_MONO = np.linalg.inv(np.vander(CHEB, 3, increasing=True)).tolist()


def plain_point(st, ra, rb, c, vcc, t):
    """The realistic astable timing for one point, written as a plain Python function with the
    math module: the baseline a per-point loop would run (the same equations as the engine: a
    quadratic C(v) over the swing integrated against each phase's Thevenin source, the input
    currents, the propagation delay's run-on)."""
    tm, p = st.timer, st.parts
    cap = p.technology
    rf = 1 + p.resistor_tempco_per_k * (t - 25)
    ra, rb = ra * rf, rb * rf
    vup = tm.threshold_fraction * vcc
    vlo = vup / 2
    pts = cap.temp_points
    xs, ys = [q[0] for q in pts], [q[1] for q in pts]
    tf = 1 + float(np.interp(t, xs, ys)) if len(pts) > 1 else 1 + ys[0]
    k = cap.dc_bias_loss if p.dc_bias_loss is None else p.dc_bias_loss
    a, h = 0.25 * vup, 0.75 * vup
    vals = [c * tf * min(max(1 - k * ((a + h * x) / p.capacitor_voltage_v) ** 1.3, 0.05), 1.0)
            + p.stray_capacitance_f for x in CHEB]
    e = [sum(TO_MONO[m][i] * vals[i] for i in range(3)) for m in range(3)]

    def cap_at(v):
        x = (v - a) / h
        return e[0] + x * (e[1] + x * e[2])

    def phase_time(vinf, g, v0, v1):
        big = (vinf - a) / h
        p0 = e[0] + big * (e[1] + big * e[2])
        p1 = e[1] + 2 * e[2] * big
        u0, u1 = (vinf - v0) / h, (vinf - v1) / h
        return (p0 * math.log(u0 / u1) - p1 * (u0 - u1) + e[2] * (u0 * u0 - u1 * u1) / 2) / g

    def run_on(vinf, g, v1):
        c1 = cap_at(v1)
        v = vinf - (vinf - v1) * math.exp(-tpd * g / c1)
        x = (v1 - a) / h
        c_mid = c1 + 0.5 * (e[1] + 2 * e[2] * x) / h * (v - v1)
        return vinf - (vinf - v1) * math.exp(-tpd * g / c_mid)

    g_leak = 1 / min(10e9, 500 / c)
    trig = -tm.trigger_current_a if tm.trigger_current_sources else tm.trigger_current_a
    ib = tm.threshold_current_a + trig
    rs_c = ra + rb
    g_c = 1 / rs_c + g_leak
    vinf_c = (vcc / rs_c - ib) / g_c
    rsat, vsat = tm.saturation_ohm, tm.saturation_v
    vd = (vcc * rsat + vsat * ra) / (ra + rsat)
    rd = ra * rsat / (ra + rsat)
    rs_d = rb + rd
    g_d = 1 / rs_d + g_leak
    vinf_d = (vd / rs_d - ib) / g_d
    tpd = tm.propagation_delay_s
    vbot = run_on(vinf_d, g_d, vlo)
    th = phase_time(vinf_c, g_c, vbot, vup) + tpd
    vtop = run_on(vinf_c, g_c, vup)
    tl = phase_time(vinf_d, g_d, vtop, vlo) + tpd
    return 1 / (th + tl), th / (th + tl)


def measure(loop_points: int = 30_000, ode_points: int = 40) -> dict:
    """Engine points/s on a realistic astable sweep, a plain per-point loop of the same model and
    a per-point ODE simulation (scipy solve_ivp), all measured in this run."""
    st = parse_study(STUDY.format(ra_max="1M"), "bench.toml")
    n = st.n_points
    # engine: every block of the whole study, timed end to end
    t0 = time.perf_counter()
    f_sum = 0.0
    cond = axis_values(st.conditions, np.arange(st.n_conditions))
    for a, b in design_blocks(st):
        out = evaluate_block(st.case, axis_values(st.design, np.arange(a, b)), cond, with_spec=False)
        f_sum += float(np.nansum(out["frequency_hz"]))
    t_engine = time.perf_counter() - t0
    # plain loop over the first points, same model, same run
    m = min(loop_points, n)
    d_per = max(1, m // st.n_conditions)
    design = axis_values(st.design, np.arange(d_per))
    t0 = time.perf_counter()
    got = []
    for i in range(d_per):
        for j in range(st.n_conditions):
            got.append(plain_point(st, design["ra"][i], design["rb"][i], design["c"][i],
                                   cond["vcc"][j], cond["temperature"][j]))
    t_loop = time.perf_counter() - t0
    loop_points = d_per * st.n_conditions
    # the loop must compute the same numbers, or the ratio means nothing
    ref = evaluate_block(st.case, design, cond, with_spec=False)["frequency_hz"][:, 0, :].ravel()
    assert np.allclose([g[0] for g in got], ref, rtol=1e-9), "plain loop disagrees with the engine"
    eng_rate, loop_rate = n / t_engine, loop_points / t_loop
    ode_rate = _ode_rate(st, design, cond, ode_points)
    print(f"sweep: {st.n_designs:,} designs x {st.n_conditions} conditions = {n:,} points")
    print(f"engine      {eng_rate / 1e6:8.2f} M points/s  ({t_engine:.2f} s)")
    print(f"plain loop  {loop_rate / 1e6:8.3f} M points/s  ({loop_points:,} points, {t_loop:.2f} s)")
    print(f"ODE         {ode_rate:8.1f} points/s  ({ode_points} points)")
    print(f"ratio       {eng_rate / loop_rate:8.1f} x the plain loop, {eng_rate / ode_rate:,.0f} x the ODE")
    return {"engine_points_per_s": round(eng_rate), "loop_points_per_s": round(loop_rate),
            "engine_over_loop": round(eng_rate / loop_rate, 2), "ode_points_per_s": round(ode_rate, 1),
            "engine_over_ode": round(eng_rate / ode_rate), "points": n}


def _ode_rate(st, design, cond, count):
    """Points per second of the independent ODE simulation used by the reference tests."""
    import sys
    from pathlib import Path
    sys.path.insert(0, str(Path(__file__).resolve().parents[2]))
    from tests.reference.test_ode import network, simulate
    t0 = time.perf_counter()
    done = 0
    for i in range(count):
        j = i % st.n_conditions
        n = network("astable", st.timer, st.parts, st.load, vcc=float(cond["vcc"][j]),
                    temperature=float(cond["temperature"][j]), c=float(design["c"][i % len(design["c"])]),
                    ra=float(design["ra"][i % len(design["ra"])]), rb=float(design["rb"][i % len(design["rb"])]))
        simulate(n)
        done += 1
    return done / (time.perf_counter() - t0)


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--loop-points", type=int, default=30_000)
    args = ap.parse_args()
    print(json.dumps(measure(args.loop_points)))


if __name__ == "__main__":
    main()
