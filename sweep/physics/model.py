"""The realistic 555 model: one pure, broadcasting numpy function per job.

Every input is an array (or scalar) in SI units; all arrays broadcast against each other, so the
engine can pass a design axis and a condition axis with different shapes and never loop in
Python. Equations and sources are in DOMAIN.md; the tags are repeated beside each formula.

The timing node is linear in every element the model has (Thevenin sources, saturation as
V0 + R I, leakage as a conductance, bias as a constant current), so each phase is one exponential
towards V_inf with time constant tau, and the RC law gives its length exactly [book].
"""
from __future__ import annotations

import numpy as np

from .parts import (Load, Parts, capacitance_temperature_factor, dc_bias_factor,
                    leakage_conductance_s, resistor_at)
from .timer import TimerModel

CIRCUITS = ("astable", "astable-diode", "astable-symmetric", "monostable", "bistable")
ASTABLES = ("astable", "astable-diode", "astable-symmetric")

#: which timing parts each circuit needs
CIRCUIT_PARTS = {
    "astable": ("ra", "rb", "c"),
    "astable-diode": ("ra", "rb", "c"),
    "astable-symmetric": ("r", "c"),
    "monostable": ("r", "c"),
    "bistable": (),
}

# bit of each flag in the mask (order of sweep.variables.FLAGS)
FLAG_BITS = {name: 1 << i for i, name in enumerate([
    "supply-below-min", "supply-above-max", "supply-above-abs-max", "temperature-out-of-range",
    "resistor-too-small", "resistance-too-large", "capacitor-too-small", "frequency-too-high",
    "output-current-over-limit", "discharge-current-over-limit", "resistor-overpowered",
    "junction-too-hot", "timing-stalls", "spec-miss"])}


def rc_time_s(tau_s, v_inf_v, v_start_v, v_end_v):
    """Time for an RC node to go from v_start to v_end towards v_inf:
    t = tau ln((V_inf - V1) / (V_inf - V2)) [book: RC law]. The caller masks points where
    v_end is never reached (they give NaN or a negative time here)."""
    return tau_s * np.log((v_inf_v - v_start_v) / (v_inf_v - v_end_v))


def mean_between_v(tau_s, v_inf_v, v_start_v, v_end_v, t_s):
    """Mean node voltage over a segment of V(t) = V_inf + (V0 - V_inf) exp(-t/tau) that goes from
    v_start to v_end in t_s: V_inf + tau (V0 - V1) / t, the integral of the RC law [derived]."""
    return v_inf_v + tau_s * (v_start_v - v_end_v) / t_s


def thevenin_with_sat(vcc_v, r_pull_ohm, v_sat_v, r_sat_ohm):
    """Node held by a discharge transistor (V_sat0 + R_sat I) against a pull-up r_pull to VCC:
    returns (V_th, R_th) [derived]. Exact also for R_sat = 0."""
    v = (vcc_v * r_sat_ohm + v_sat_v * r_pull_ohm) / (r_pull_ohm + r_sat_ohm)
    r = r_pull_ohm * r_sat_ohm / (r_pull_ohm + r_sat_ohm)
    return v, r


def node_source(v_src_v, r_src_ohm, g_leak_s, i_bias_a, c_f):
    """A source v_src behind r_src charging C that also leaks g_leak to ground and loses i_bias
    into the comparator inputs: returns (V_inf [V], tau [s]) [book: Thevenin]."""
    g = 1.0 / r_src_ohm + g_leak_s
    v_inf = (v_src_v / r_src_ohm - i_bias_a) / g
    return v_inf, c_f / g


def output_stage(timer: TimerModel, load: Load, vcc_v):
    """Output voltages and load currents in each state [derived: load line against a linear
    output stage V = V0 + R I, DOMAIN.md section 8]. Returns (v_high, v_low, i_high, i_low)."""
    vcc = np.asarray(vcc_v, dtype=float)
    zero = np.zeros_like(vcc)
    v_oh0 = vcc - timer.high_drop_v
    v_ol0 = timer.low_drop_v + zero
    rl = load.resistance_ohm
    if not np.isfinite(rl):
        return v_oh0, v_ol0, zero, zero
    vf = load.forward_voltage_v
    if load.to == "ground":
        i_h = np.maximum((v_oh0 - vf) / (rl + timer.high_ohm), 0.0)
        return v_oh0 - timer.high_ohm * i_h, v_ol0, i_h, zero
    i_l = np.maximum((vcc - vf - v_ol0) / (rl + timer.low_ohm), 0.0)
    return v_oh0, v_ol0 + timer.low_ohm * i_l, zero, i_l


def output_resistance(timer: TimerModel, load: Load, i_high_a, i_low_a):
    """Thevenin resistance of the output seen by a timing resistor, in each state: the stage's
    own resistance, with a conducting load (resistor, LED as a fixed drop) in parallel
    [derived: Thevenin]. Returns (r_high, r_low) in ohms."""
    rl = load.resistance_ohm
    if not np.isfinite(rl):
        return timer.high_ohm, timer.low_ohm
    par_h = timer.high_ohm * rl / (timer.high_ohm + rl)
    par_l = timer.low_ohm * rl / (timer.low_ohm + rl)
    r_h = np.where(np.asarray(i_high_a) > 0, par_h, timer.high_ohm)
    r_l = np.where(np.asarray(i_low_a) > 0, par_l, timer.low_ohm)
    return r_h, r_l


def evaluate(circuit: str, timer: TimerModel, parts: Parts, load: Load, *, vcc, temperature,
             c=np.nan, ra=np.nan, rb=np.nan, r=np.nan, control_voltage=np.nan,
             ideal: bool = False) -> dict[str, np.ndarray]:
    """Evaluate every point of a broadcast grid.

    Parameters (SI units; arrays broadcast): vcc [V], temperature [°C], c [F] nominal at 25 °C,
    ra, rb, r [Ω] nominal at 25 °C, control_voltage [V] (NaN: internal divider).
    Returns a dict of arrays: the output columns of sweep.variables.OUTPUTS and 'flag_mask'
    (bits of FLAG_BITS, spec-miss excluded: that needs the study's [spec]).
    """
    if circuit not in CIRCUITS:
        raise ValueError(f"unknown circuit {circuit!r}")
    if ideal:
        timer, parts = timer.idealised(), parts.idealised()
    cap = parts.technology
    vcc = np.asarray(vcc, dtype=float)
    t_amb = np.asarray(temperature, dtype=float)
    cv = np.asarray(control_voltage, dtype=float)
    tc = parts.resistor_tempco_per_k
    ra_t, rb_t, r_t = (resistor_at(np.asarray(x, dtype=float), t_amb, tc) for x in (ra, rb, r))

    # thresholds: upper = control voltage, lower = half of it [book]
    v_up = np.where(np.isnan(cv), timer.threshold_fraction * vcc, cv)
    v_lo_th = 0.5 * v_up
    v_oh, v_ol, i_load_h, i_load_l = output_stage(timer, load, vcc)
    iq_l = timer.quiescent_a(vcc, output_high=False)
    iq_h = timer.quiescent_a(vcc, output_high=True)
    tpd = timer.propagation_delay_s
    out: dict[str, np.ndarray] = {}

    timed = circuit != "bistable"
    if timed:
        c_nom = np.asarray(c, dtype=float)
        # DC bias taken at the mean node voltage: 3/4 Vc between Vc/2 and Vc in an astable,
        # Vc/2 on the monostable's ramp from 0 [derived; DOMAIN.md section 3]
        v_mean_cap = (0.5 if circuit == "monostable" else 0.75) * v_up
        k_bias = 0.0 if ideal else parts.dc_bias_loss
        c_eff = (c_nom * (1.0 if ideal else capacitance_temperature_factor(cap, t_amb))
                 * dc_bias_factor(cap, v_mean_cap, parts.capacitor_voltage_v, k_bias)
                 + parts.stray_capacitance_f)
        g_leak = 0.0 if ideal else leakage_conductance_s(cap, c_nom, parts.capacitor_voltage_v, t_amb)
        i_b = timer.threshold_current_a   # net input current drawn from the timing node [ds-bip]

    if circuit in ("astable", "astable-diode"):
        v_d, r_d = thevenin_with_sat(vcc, ra_t, timer.saturation_v, timer.saturation_ohm)
        vs_d, rs_d = v_d, rb_t + r_d                             # discharge through RB [book]
    elif circuit == "astable-symmetric":
        r_out_h, r_out_l = output_resistance(timer, load, i_load_h, i_load_l)
        vs_d, rs_d = v_ol, r_t + r_out_l                         # output low sinks R [derived]
    # the charge phase runs in up to two segments: segment 1 while the capacitor is below v_sw,
    # then segment 2 [derived]. Only the diode circuit has two: RB sits across the diode, so the
    # diode conducts while (VCC - V) RB / (RA + RB) >= Vd, i.e. below v_sw = VCC - Vd (RA+RB)/RB;
    # above it the capacitor charges through RA + RB towards VCC.
    if circuit == "astable":
        seg1 = seg2 = (vcc, ra_t + rb_t)                          # through RA + RB [book]
        v_sw = -np.inf
    elif circuit == "astable-diode":
        vd = parts.diode_drop_v
        seg1 = (vcc - vd, ra_t)                                  # RA and the conducting diode
        seg2 = (vcc, ra_t + rb_t)                                # diode off: RA + RB
        v_sw = vcc - vd * (ra_t + rb_t) / rb_t
    elif circuit == "astable-symmetric":
        seg1 = seg2 = (v_oh, r_t + r_out_h)                      # output high drives R [derived]
        v_sw = -np.inf
    elif circuit == "monostable":
        vs_c, rs_c = vcc, r_t

    if circuit in ASTABLES:
        diode = circuit == "astable-diode"
        vinf2, tau2 = node_source(*seg2, g_leak, i_b, c_eff)
        vinf_d, tau_d = node_source(vs_d, rs_d, g_leak, i_b, c_eff)
        if diode:
            vinf1, tau1 = node_source(*seg1, g_leak, i_b, c_eff)
            last2 = v_sw < v_up              # the threshold is met in segment 2
            vinf_c, tau_c = np.where(last2, vinf2, vinf1), np.where(last2, tau2, tau1)
        else:
            vinf_c, tau_c = vinf2, tau2
        # each phase runs on for the propagation delay past its threshold [derived]
        v_top = vinf_c - (vinf_c - v_up) * np.exp(-tpd / tau_c)
        v_bot = vinf_d - (vinf_d - v_lo_th) * np.exp(-tpd / tau_d)
        with np.errstate(all="ignore"):      # stalled points give NaN, masked just below
            if diode:
                v_mid = np.clip(v_sw, v_bot, v_up)
                t1 = rc_time_s(tau1, vinf1, v_bot, v_mid)
                t2 = rc_time_s(tau2, vinf2, v_mid, v_up)
                stalls = (vinf_c <= v_up) | ((v_mid > v_bot) & (vinf1 <= v_mid))
            else:
                t1, t2 = 0.0, rc_time_s(tau_c, vinf_c, v_bot, v_up)
                stalls = vinf_c <= v_up
            t_l = rc_time_s(tau_d, vinf_d, v_top, v_lo_th) + tpd
        stalls = stalls | (vinf_d >= v_lo_th)
        t_h = np.where(stalls, np.nan, t1 + t2 + tpd)
        t_l = np.where(stalls, np.nan, t_l)
        period = t_h + t_l
        # charge drawn from the supply along a segment from v0 to v1 in time t:
        # Q = ((V_s - V_inf) t + tau (v1 - v0)) / R_s, the integral of the RC law [derived]
        if diode:
            end1 = np.where(last2, v_mid, v_top)
            q1 = ((seg1[0] - vinf1) * (t1 + np.where(last2, 0.0, tpd)) + tau1 * (end1 - v_bot)) / seg1[1]
            q2 = np.where(last2, ((seg2[0] - vinf2) * (t2 + tpd) + tau2 * (v_top - v_mid)) / seg2[1], 0.0)
            i_charge_h = (q1 + q2) / t_h
            i_start = np.where(v_sw > v_bot, (seg1[0] - v_bot) / seg1[1], (seg2[0] - v_bot) / seg2[1])
        else:
            i_charge_h = ((seg2[0] - vinf_c) * t_h + tau_c * (v_top - v_bot)) / seg2[1] / t_h
            i_start = (seg2[0] - v_bot) / seg2[1]
        # mean capacitor voltage in the low phase: V_inf + tau (v0 - v1) / t [derived]
        vm_l = mean_between_v(tau_d, vinf_d, v_top, v_bot, t_l)
        if circuit == "astable-symmetric":
            i_ra_l = 0.0
            dis_peak = np.zeros(np.shape(period))
            p_res = i_start ** 2 * r_t
            p_dis_l = 0.0
        else:
            # node D during the low phase: VCC via RA, V_sat via R_sat, capacitor via RB,
            # linear in the capacitor voltage: V_D = a + b V [derived]
            rs_, vs_ = timer.saturation_ohm, timer.saturation_v
            den = rs_ * rb_t + ra_t * rb_t + ra_t * rs_
            a_d = (vcc * rs_ * rb_t + vs_ * ra_t * rb_t) / den
            b_d = ra_t * rs_ / den
            vd_mean = a_d + b_d * vm_l
            i_ra_l = (vcc - vd_mean) / ra_t
            vd_top = a_d + b_d * v_top
            dis_peak = (vcc - vd_top) / ra_t + (v_top - vd_top) / rb_t
            # RA: worst of the low phase (VCC across it, less node D) and the start of the high
            p_res = np.maximum((vcc - a_d - b_d * v_bot) ** 2 / ra_t, i_start ** 2 * ra_t)
            p_dis_l = vd_mean * (i_ra_l + (vm_l - vd_mean) / rb_t)
        i_h = iq_h + i_charge_h + i_load_h
        i_l = iq_l + i_ra_l + i_load_l
        supply = (t_h * i_h + t_l * i_l) / period
        p_chip_h = vcc * iq_h + (vcc - v_oh) * i_load_h
        p_chip_l = vcc * iq_l + v_ol * i_load_l + p_dis_l
        p_chip = (t_h * p_chip_h + t_l * p_chip_l) / period
        out.update(high_time_s=t_h, low_time_s=t_l, period_s=period, frequency_hz=1.0 / period,
                   duty=t_h / period, pulse_width_s=np.nan, supply_current_a=supply,
                   idle_current_a=np.nan, discharge_peak_a=dis_peak, ra_power_w=p_res)
    elif circuit == "monostable":
        # at rest the discharge transistor holds C near V_sat [derived]
        v0, _ = thevenin_with_sat(vcc, r_t, timer.saturation_v, timer.saturation_ohm)
        vinf_c, tau_c = node_source(vs_c, rs_c, g_leak, i_b, c_eff)
        stalls = vinf_c <= v_up
        with np.errstate(all="ignore"):
            pw = np.where(stalls, np.nan, rc_time_s(tau_c, vinf_c, v0, v_up) + tpd)
        v_end = vinf_c - (vinf_c - v_up) * np.exp(-tpd / tau_c)
        vm_h = mean_between_v(tau_c, vinf_c, v0, v_end, pw)
        i_idle_r = (vcc - v0) / r_t
        supply = iq_h + (vcc - vm_h) / r_t + i_load_h
        idle = iq_l + i_idle_r + i_load_l
        p_chip = np.maximum(vcc * iq_h + (vcc - v_oh) * i_load_h,
                            vcc * iq_l + v_ol * i_load_l + v0 * i_idle_r)
        nan = np.full_like(pw, np.nan)
        out.update(high_time_s=pw, low_time_s=nan, period_s=nan, frequency_hz=nan, duty=nan,
                   pulse_width_s=pw, supply_current_a=supply, idle_current_a=idle,
                   discharge_peak_a=i_idle_r, ra_power_w=(vcc - v0) ** 2 / r_t)
    else:  # bistable: set/reset latch, no timing [book]
        i_h = iq_h + i_load_h
        i_l = iq_l + i_load_l
        stalls = np.zeros(np.broadcast(vcc, t_amb).shape, dtype=bool)
        p_chip = np.maximum(vcc * iq_h + (vcc - v_oh) * i_load_h, vcc * iq_l + v_ol * i_load_l)
        nan = np.full(stalls.shape, np.nan)
        out.update(high_time_s=nan, low_time_s=nan, period_s=nan, frequency_hz=nan, duty=nan,
                   pulse_width_s=nan, supply_current_a=np.maximum(i_h, i_l), idle_current_a=i_l,
                   discharge_peak_a=np.zeros(stalls.shape), ra_power_w=np.zeros(stalls.shape))

    tj = t_amb + timer.theta_ja_c_per_w * p_chip
    shape = np.broadcast(*(np.asarray(v) for v in out.values()), tj, vcc, t_amb).shape
    out["power_w"] = vcc * out["supply_current_a"]
    out["output_high_v"] = v_oh
    out["output_low_v"] = v_ol
    out["output_current_a"] = np.maximum(i_load_h, i_load_l)
    out["junction_temp_c"] = tj
    out = {k: np.broadcast_to(np.asarray(v, dtype=float), shape) for k, v in out.items()}

    # flags [ds-bip]/[ds-cmos] limits from the timer model, [cp] part limits
    m = np.zeros((), dtype=np.uint32)

    def flag(name, cond):
        """Set a flag bit where cond holds; cond keeps its own (often smaller) shape."""
        nonlocal m
        m = m | np.where(cond, np.uint32(FLAG_BITS[name]), np.uint32(0))

    flag("supply-below-min", vcc < timer.min_v)
    flag("supply-above-max", vcc > timer.max_v)
    flag("supply-above-abs-max", vcc > timer.abs_max_v)
    flag("temperature-out-of-range", (t_amb < timer.ambient_min_c) | (t_amb > timer.ambient_max_c))
    flag("output-current-over-limit", (i_load_h > timer.source_max_a) | (i_load_l > timer.sink_max_a))
    flag("junction-too-hot", tj > timer.tj_max_c)
    if timed:
        r_in = {"astable": ra, "astable-diode": ra}.get(circuit, r)
        flag("resistor-too-small", np.asarray(r_in) < timer.min_resistance_ohm)
        # R_max = derating x (VCC - Vc) / I_th,max [ds-bip; cp halves it]
        r_charge = np.asarray(ra) + np.asarray(rb) if circuit == "astable" else np.asarray(r_in)
        if timer.threshold_current_max_a > 0:
            r_max = timer.resistance_derating * (vcc - v_up) / timer.threshold_current_max_a
            flag("resistance-too-large", r_charge > r_max)
        flag("capacitor-too-small", c_nom < timer.min_capacitance_f)
        flag("discharge-current-over-limit", out["discharge_peak_a"] > timer.discharge_max_a)
        flag("resistor-overpowered", out["ra_power_w"] > parts.resistor_power_w)
        flag("timing-stalls", stalls)
        if circuit in ASTABLES:
            flag("frequency-too-high", out["frequency_hz"] > timer.max_frequency_hz)
    out["flag_mask"] = np.broadcast_to(m, shape)
    return out


def flag_names(mask: int) -> list[str]:
    """Flag codes set in one mask value, in the stable order."""
    return [name for name, bit in FLAG_BITS.items() if mask & bit]
