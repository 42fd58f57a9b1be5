"""Engine benchmark: realistic-model points per second, against a plain per-point Python loop of
the same model measured in the same run. Prints a table and ends with one JSON line.

    python tests/benchmarks/engine.py [--loop-points N]

The loop computes every output the engine returns for this study's circuit (timing, supply
current and power, the output stage, the discharge figures, the resistor's power, the junction
temperature and the flag mask) and must agree with the engine on each of them, or the ratio
means nothing.
"""
from __future__ import annotations

import argparse
import json
import math
import time

import numpy as np

from sweep.engine import axis_values, design_blocks, evaluate_block
from sweep.physics import kernel
from sweep.physics.model import FLAG_BITS
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

#: what the plain loop returns per point, in this order, then the flag mask
LOOP_OUTPUTS = ("high_time_s", "low_time_s", "period_s", "frequency_hz", "duty",
                "supply_current_a", "power_w", "output_high_v", "output_low_v", "output_current_a",
                "discharge_peak_a", "discharge_dump_s", "ra_power_w", "junction_temp_c",
                "wave_v_start_v", "wave_v_top_v", "wave_vinf_high_v", "wave_vinf_low_v")

CHEB = [0.5 - 0.5 * math.cos((2 * i + 1) * math.pi / 6) for i in range(3)]
TO_MONO = np.linalg.inv(np.vander(CHEB, 3, increasing=True)).tolist()


def _interp(x, xs, ys):
    """Linear interpolation through (xs, ys), held flat outside: plain Python."""
    if x <= xs[0]:
        return ys[0]
    for k in range(1, len(xs)):
        if x < xs[k]:
            return ys[k - 1] + (ys[k] - ys[k - 1]) * (x - xs[k - 1]) / (xs[k] - xs[k - 1])
    return ys[-1]


def _drop(xs, ys, i):
    """A stage's drop [V] at load current i [A] on the curve through (xs, ys): linear between the
    points, extended along the last segment."""
    if len(xs) == 1:
        return ys[0]
    if i > xs[-1]:
        return ys[-1] + (ys[-1] - ys[-2]) / (xs[-1] - xs[-2]) * (i - xs[-1])
    return _interp(i, xs, ys)


def _ln(x):
    """Natural log, NaN below zero and -inf at zero as numpy gives (a stalled phase)."""
    return math.log(x) if x > 0.0 else (-math.inf if x == 0.0 else math.nan)


def plain_model(st):
    """A plain per-point Python function of the realistic astable, written with the math module:
    the baseline a per-point loop would run. Study constants (timer, parts) are read once here;
    everything that depends on a point is computed per point. The same equations as the engine
    (sweep/physics: model.py, circuits/astable.py and _astable.py, nodes.py, network.py,
    output.py, parts.py, where each carries its source): a quadratic C(v) over the swing
    integrated against each phase's Thevenin source, the input currents, the propagation
    delay's run-on, the discharge network, the output stage without a load, the quiescent
    current, the chip's power and the limit flags.

    Returns point(ra, rb, c, vcc, t) -> (the LOOP_OUTPUTS values..., flag mask)."""
    tm, p = st.timer, st.parts
    if st.circuit != "astable" or math.isfinite(st.load.resistance_ohm):
        raise ValueError("the plain loop covers the astable without a load")
    cap = p.technology
    tc = p.resistor_tempco_per_k
    frac = tm.threshold_fraction
    t_xs, t_ys = [q[0] for q in cap.temp_points], [q[1] for q in cap.temp_points]
    loss = cap.dc_bias_loss if p.dc_bias_loss is None else p.dc_bias_loss
    if cap.leakage != "insulation":
        raise ValueError("the plain loop covers ceramic and film capacitors (insulation leakage)")
    v_rated, stray = p.capacitor_voltage_v, p.stray_capacitance_f
    fracs = [0.25 + 0.75 * x for x in CHEB]          # the fit runs from Vc/4 to Vc
    trig = -tm.trigger_current_a if tm.trigger_current_sources else tm.trigger_current_a
    i_draw = tm.threshold_current_a + trig
    rsat, vsat = tm.saturation_ohm, tm.saturation_v
    tpd = tm.propagation_delay_s
    i_surge = tm.surge_current_a
    q_pts = tm.quiescent_points
    q_slope = (q_pts[-1][1] - q_pts[0][1]) / (q_pts[-1][0] - q_pts[0][0]) if len(q_pts) > 1 else 0.0
    q_xs, q_ys = [q[0] for q in q_pts], [q[1] for q in q_pts]
    src = [q[0] for q in tm.source_drop_points], [q[1] for q in tm.source_drop_points]
    snk = [q[0] for q in tm.sink_drop_points], [q[1] for q in tm.sink_drop_points]
    bit = FLAG_BITS

    def quiescent(vcc, high):
        if len(q_pts) == 1:
            i = q_ys[0]
        elif vcc < q_xs[0]:
            i = q_ys[0] + q_slope * (vcc - q_xs[0])
        elif vcc > q_xs[-1]:
            i = q_ys[-1] + q_slope * (vcc - q_xs[-1])
        else:
            i = _interp(vcc, q_xs, q_ys)
        if high:
            i += tm.quiescent_high_delta_a
        return max(i, 0.0)

    def point(ra, rb, c, vcc, t):
        rf = 1.0 + tc * (t - 25.0)
        ra_t, rb_t = ra * rf, rb * rf
        v_up = frac * vcc
        v_lo = 0.5 * v_up
        # output stage, no load: the open levels, no current
        shift = tm.source_drop_tempco_v_per_k * (t - 25.0)
        v_high = vcc - max(_drop(*src, 0.0) + shift, 0.0)
        v_low = _drop(*snk, 0.0)
        i_high = i_low = 0.0
        iq_h, iq_l = quiescent(vcc, True), quiescent(vcc, False)
        # the timing node: C(v) = scale S((v - a) / h) + stray
        scale = c * (1.0 + (_interp(t, t_xs, t_ys) if len(t_xs) > 1 else t_ys[0]))
        a, h = 0.25 * v_up, 0.75 * v_up
        if loss == 0.0:
            s0, s1, s2 = 1.0, 0.0, 0.0
        else:
            ratio = (max(v_up, 0.0) / v_rated) ** 1.3
            vals = [min(max(1.0 - loss * ratio * f ** 1.3, 0.05), 1.0) for f in fracs]
            s0, s1, s2 = (TO_MONO[m][0] * vals[0] + TO_MONO[m][1] * vals[1] + TO_MONO[m][2] * vals[2]
                          for m in range(3))
        g_leak = 1.0 / min(10e9, 500.0 / c)

        def cap_at(v):
            x = (v - a) / h
            return scale * (s0 + x * (s1 + x * s2)) + stray

        def run_on(vinf, g, v1, c1, dc1):
            v_est = vinf - (vinf - v1) * math.exp(-tpd * g / c1)
            c_mid = c1 + 0.5 * dc1 * (v_est - v1)
            return vinf - (vinf - v1) * math.exp(-tpd * g / c_mid)

        def phase(vinf, g, v0, v1, c1, dc1):
            """(time with the delay, end voltage, integral of v dt, charge) of a linear phase."""
            log = _ln((vinf - v0) / (vinf - v1))
            big = (vinf - a) / h
            p1 = s1 + 2.0 * s2 * big
            p0 = s0 + big * (s1 + big * s2)
            u0, u1 = (vinf - v0) / h, (vinf - v1) / h
            d1 = u0 - u1
            d2 = d1 * (u0 + u1)
            d3 = d1 * (u0 * u0 + u0 * u1 + u1 * u1)
            tt = (scale * (p0 * log - p1 * d1 + s2 * 0.5 * d2) + stray * log) / g
            q = scale * h * (p0 * d1 - p1 * 0.5 * d2 + s2 * d3 / 3.0) + stray * (v1 - v0)
            v_end = run_on(vinf, g, v1, c1, dc1)
            vt = vinf * tt - q / g + 0.5 * (v1 + v_end) * tpd
            return tt + tpd, v_end, vt, q + c1 * (v_end - v1)

        # (C, dC/dv) at Vc/2 (x = 1/3 of the fit) and at Vc (x = 1)
        c_lo = scale * (s0 + (s1 + s2 / 3.0) / 3.0) + stray
        dc_lo = scale * (s1 + 2.0 * s2 / 3.0) / h
        c_up = scale * (s0 + s1 + s2) + stray
        dc_up = scale * (s1 + 2.0 * s2) / h
        # low phase source: the discharge node D (RA from VCC, transistor V0 + R I) through RB
        v_d = (vcc * rsat + vsat * ra_t) / (ra_t + rsat)
        r_d = ra_t * rsat / (ra_t + rsat)
        den = rsat * rb_t + ra_t * rb_t + ra_t * rsat
        a_d = (vcc * rsat * rb_t + vsat * ra_t * rb_t) / den
        b_d = ra_t * rsat / den
        rs_d = rb_t + r_d
        g_d = 1.0 / rs_d + g_leak
        vinf_d = (v_d / rs_d - i_draw) / g_d
        # high phase source: VCC through RA + RB
        rs_c = ra_t + rb_t
        g_c = 1.0 / rs_c + g_leak
        vinf_c = (vcc / rs_c - i_draw) / g_c
        v_bot = run_on(vinf_d, g_d, v_lo, c_lo, dc_lo)
        h_time, v_top, h_vt, h_q = phase(vinf_c, g_c, v_bot, v_up, c_up, dc_up)
        l_time, _, l_vt, _ = phase(vinf_d, g_d, v_top, v_lo, c_lo, dc_lo)
        stalls = vinf_c <= v_up or vinf_d >= v_lo
        t_h = math.nan if stalls else h_time
        t_l = math.nan if stalls else l_time
        period = t_h + t_l
        i_start = (vcc - v_bot) / rs_c
        q_h = h_q + g_leak * h_vt + i_draw * h_time
        vm_l = l_vt / l_time
        vd_mean = a_d + b_d * vm_l
        i_ra_l = (vcc - vd_mean) / ra_t
        vd_top = a_d + b_d * v_top
        peak = (vcc - vd_top) / ra_t + (v_top - vd_top) / rb_t
        dis_peak = peak if peak != peak else min(peak, i_surge)      # NaN stays NaN
        vd_bot = a_d + b_d * v_bot
        steady = (vcc - vd_bot) / ra_t + (v_bot - vd_bot) / rb_t
        p_ra = max((vcc - vd_bot) ** 2 / ra_t, i_start * i_start * ra_t)
        p_dis_l = vd_mean * (i_ra_l + (vm_l - vd_mean) / rb_t)
        i_h = iq_h + q_h / h_time + i_high
        i_l = iq_l + i_ra_l + i_low
        supply = (t_h * i_h + t_l * i_l) / period
        p_chip_h = vcc * iq_h + (vcc - v_high) * i_high
        p_chip_l = vcc * iq_l + v_low * i_low + p_dis_l
        p_chip = (t_h * p_chip_h + t_l * p_chip_l) / period
        # the discharge transistor's turn-on surge through RB
        c_mean = cap_at(0.5 * (v_lo + v_top))
        energy = 0.5 * c_mean * (v_top * v_top - v_lo * v_lo)
        r_eff = max(rsat, v_top / i_surge - rb_t)
        e_tr = energy * r_eff / (r_eff + rb_t)
        r_loop = rsat + rb_t
        v_knee = min(v_top, i_surge * r_loop)
        dump = c_mean * (v_top - v_knee) / i_surge + c_mean * r_loop * math.log(
            max(v_knee / (0.1 * v_top), 1.0))
        tj = t + tm.theta_ja_c_per_w * p_chip
        freq = 1.0 / period
        i_out = max(i_high, i_low)
        m = 0
        if vcc < tm.min_v:
            m |= bit["supply-below-min"]
        if vcc > tm.max_v:
            m |= bit["supply-above-max"]
        if vcc > tm.abs_max_v:
            m |= bit["supply-above-abs-max"]
        if t < tm.ambient_min_c or t > tm.ambient_max_c:
            m |= bit["temperature-out-of-range"]
        if i_high > tm.source_max_a or i_low > tm.sink_max_a:
            m |= bit["output-current-over-limit"]
        if tj > tm.tj_max_c:
            m |= bit["junction-too-hot"]
        if ra < tm.min_resistance_ohm:
            m |= bit["resistor-too-small"]
        if tm.threshold_current_max_a > 0 and ra + rb > (
                tm.resistance_derating * (vcc - v_up) / tm.threshold_current_max_a):
            m |= bit["resistance-too-large"]
        if c < tm.min_capacitance_f:
            m |= bit["capacitor-too-small"]
        if steady > tm.discharge_max_a or e_tr > tm.surge_energy_max_j:
            m |= bit["discharge-current-over-limit"]
        if p_ra > p.resistor_power_w:
            m |= bit["resistor-overpowered"]
        if stalls:
            m |= bit["timing-stalls"]
        if freq > tm.max_frequency_hz:
            m |= bit["frequency-too-high"]
        return (t_h, t_l, period, freq, t_h / period, supply, vcc * supply, v_high, v_low, i_out,
                dis_peak, dump, p_ra, tj, v_bot, v_top, vinf_c, vinf_d, m)

    return point


def measure(loop_points: int = 30_000, ode_points: int = 40) -> dict:
    """Engine points/s on a realistic astable sweep, a plain per-point loop of the same model and
    a per-point ODE simulation (scipy solve_ivp), all measured in this run."""
    st = parse_study(STUDY.format(ra_max="1M"), "bench.toml")
    n = st.n_points
    case = st.case
    compiled = kernel.wanted(case.circuit, case.timer, case.parts, case.load, case.ideal, case.points)
    # engine: every block of the whole study, timed end to end
    t0 = time.perf_counter()
    f_sum = 0.0
    cond = axis_values(st.conditions, np.arange(st.n_conditions))
    for a, b in design_blocks(st):
        out = evaluate_block(case, axis_values(st.design, np.arange(a, b)), cond, with_spec=False)
        f_sum += float(np.nansum(out["frequency_hz"]))
    t_engine = time.perf_counter() - t0
    # plain loop over designs drawn across the whole study (every condition of each), same
    # model, same run, every output
    d_per = max(1, min(loop_points, n) // st.n_conditions)
    picks = np.sort(np.random.default_rng(12).choice(st.n_designs, d_per, replace=False))
    picks[0] = 0                    # the smallest parts: the highest frequency and currents
    design = axis_values(st.design, np.unique(picks))
    d_per = len(design["ra"])
    point = plain_model(st)
    ras, rbs, cs = (design[k].tolist() for k in ("ra", "rb", "c"))
    vccs, temps = cond["vcc"].tolist(), cond["temperature"].tolist()
    t0 = time.perf_counter()
    got = []
    for i in range(d_per):
        ra, rb, c = ras[i], rbs[i], cs[i]
        for j in range(st.n_conditions):
            got.append(point(ra, rb, c, vccs[j], temps[j]))
    t_loop = time.perf_counter() - t0
    loop_points = d_per * st.n_conditions
    worst, flagged = _agreement(case, design, cond, got)
    edge_worst, edge_flagged = _edge_agreement(case, point)
    worst = max(worst, edge_worst)
    eng_rate, loop_rate = n / t_engine, loop_points / t_loop
    ode_rate = _ode_rate(st, design, cond, ode_points)
    kind = "compiled kernel" if compiled else "numpy model"
    print(f"sweep: {st.n_designs:,} designs x {st.n_conditions} conditions = {n:,} points")
    print(f"engine      {eng_rate / 1e6:8.2f} M points/s  ({t_engine:.2f} s, {kind})")
    print(f"plain loop  {loop_rate / 1e6:8.3f} M points/s  ({loop_points:,} points, {t_loop:.2f} s, "
          f"{len(LOOP_OUTPUTS)} outputs and the flag mask)")
    print(f"agreement   largest relative difference {worst[0]:.1e} ({worst[1]}), flag masks "
          f"identical; sample: {flagged}; edge grid: {edge_flagged}")
    print(f"ODE         {ode_rate:8.1f} points/s  ({ode_points} points)")
    print(f"ratio       {eng_rate / loop_rate:8.1f} x the plain loop, {eng_rate / ode_rate:,.0f} x the ODE")
    return {"engine_points_per_s": round(eng_rate), "engine": kind,
            "loop_points_per_s": round(loop_rate), "loop_outputs": len(LOOP_OUTPUTS) + 1,
            "engine_over_loop": round(eng_rate / loop_rate, 2),
            "loop_max_rel_diff": float(f"{worst[0]:.3g}"), "ode_points_per_s": round(ode_rate, 1),
            "engine_over_ode": round(eng_rate / ode_rate), "points": n}


#: parts and conditions beyond the study's ranges, where the other limits trip: checked, not timed
EDGE_DESIGN = {"ra": [100.0, 1e3, 1e6], "rb": [10.0, 100.0, 2.2e6], "c": [47e-12, 1e-9, 10e-6]}
EDGE_CONDITIONS = {"vcc": [3.0, 9.0, 17.0, 20.0], "temperature": [-55.0, 25.0, 125.0]}


def _edge_agreement(case, point):
    """_agreement on every combination of EDGE_DESIGN and EDGE_CONDITIONS."""
    d = [a.ravel() for a in np.meshgrid(*EDGE_DESIGN.values(), indexing="ij")]
    k = [a.ravel() for a in np.meshgrid(*EDGE_CONDITIONS.values(), indexing="ij")]
    design, cond = dict(zip(EDGE_DESIGN, d)), dict(zip(EDGE_CONDITIONS, k))
    got = [point(ra, rb, c, vcc, t) for ra, rb, c in zip(*(x.tolist() for x in d))
           for vcc, t in zip(*(x.tolist() for x in k))]
    return _agreement(case, design, cond, got)


def _agreement(case, design, cond, got):
    """Check the loop against the engine on every output it computes (relative 1e-9, NaN where
    the engine has NaN) and on the flag mask (identical), and that every engine output the loop
    leaves out is NaN for this circuit (not applicable). Returns ((largest relative difference,
    its output), a note on the flags set in the sample)."""
    ref = evaluate_block(case, design, cond, with_spec=False)
    cols = list(zip(*got))
    worst = (0.0, LOOP_OUTPUTS[0])
    for name, col in zip(LOOP_OUTPUTS, cols):
        mine = np.array(col)
        eng = np.asarray(ref[name], dtype=float)[:, 0, :].ravel()
        same_nan = np.isnan(mine) == np.isnan(eng)
        assert same_nan.all(), f"plain loop and engine disagree on where {name} is NaN"
        ok = ~np.isnan(eng)
        with np.errstate(all="ignore"):
            rel = np.abs(mine[ok] - eng[ok]) / np.maximum(np.abs(eng[ok]), np.finfo(float).tiny)
        rel = np.where(mine[ok] == eng[ok], 0.0, rel)
        big = float(rel.max()) if rel.size else 0.0
        assert big <= 1e-9, f"plain loop disagrees with the engine on {name}: relative {big:.2e}"
        if big >= worst[0]:
            worst = (big, name)
    masks = np.array(cols[-1], dtype=np.uint32)
    eng_masks = np.asarray(ref["flag_mask"])[:, 0, :].ravel()
    assert np.array_equal(masks, eng_masks), "plain loop and engine disagree on the flag masks"
    rest = [k for k in ref if k not in LOOP_OUTPUTS and k != "flag_mask"]
    for k in rest:
        assert np.isnan(np.asarray(ref[k], dtype=float)).all(), f"the plain loop leaves out {k}"
    seen = sorted({name for name, b in FLAG_BITS.items() if np.any(masks & b)})
    note = f"{int(np.count_nonzero(masks))} points flagged: {', '.join(seen) or 'none'}"
    return worst, note


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
