"""The realistic 555 model: one pure, broadcasting numpy function.

Every input is an array (or scalar) in SI units; all arrays broadcast against each other, so the
engine can pass a design axis and a condition axis with different shapes and never loop in
Python. Source tags beside each formula: [book] a textbook, [ds-bip]/[ds-cmos] a typical
datasheet figure (the timer-model files), [cp] common practice, [mem] from memory, [derived]
worked out here from the RC law and Kirchhoff's laws.

Each phase of the timing node is a charge or discharge between the thresholds through a network
of Thevenin sources (saturation as V0 + R I, leakage as a conductance, bias and trigger currents
as constant currents) into the capacitor, whose value follows its DC-bias curve over the swing;
`nodes.py` integrates it. The diode of astable-diode is a Shockley device (or, when a study
gives `diode_drop`, a fixed drop), the output stage follows its drop-vs-current curves
(`output.py`).
"""
from __future__ import annotations

import numpy as np

from .nodes import (NodeCapacitance, linear_phase, node_capacitance, quadrature_phase, run_on,
                    two_segment_phase)
from .output import OutputStates, output_states
from .parts import (Load, Parts, capacitance_temperature_factor, leakage_conductance_s,
                    resistor_at, reverse_current_at, saturation_at, thermal_voltage_v,
                    wright_omega)
from .timer import TimerModel

CIRCUITS = ("astable", "astable-diode", "astable-symmetric", "monostable", "missing-pulse", "bistable")
ASTABLES = ("astable", "astable-diode", "astable-symmetric")

#: which timing parts each circuit needs
CIRCUIT_PARTS = {
    "astable": ("ra", "rb", "c"),
    "astable-diode": ("ra", "rb", "c"),
    "astable-symmetric": ("r", "c"),
    "monostable": ("r", "c"),
    "missing-pulse": ("r", "c"),
    "bistable": (),
}

# bit of each flag in the mask (order of sweep.variables.FLAGS)
FLAG_BITS = {name: 1 << i for i, name in enumerate([
    "supply-below-min", "supply-above-max", "supply-above-abs-max", "temperature-out-of-range",
    "resistor-too-small", "resistance-too-large", "capacitor-too-small", "frequency-too-high",
    "output-current-over-limit", "discharge-current-over-limit", "resistor-overpowered",
    "junction-too-hot", "timing-stalls", "spec-miss", "false-alarm"])}


def thevenin_with_sat(vcc_v, r_pull_ohm, v_sat_v, r_sat_ohm):
    """Node held by a discharge transistor (V_sat0 + R_sat I) against a pull-up r_pull to VCC:
    returns (V_th, R_th) [derived]. Exact also for R_sat = 0."""
    v = (vcc_v * r_sat_ohm + v_sat_v * r_pull_ohm) / (r_pull_ohm + r_sat_ohm)
    r = r_pull_ohm * r_sat_ohm / (r_pull_ohm + r_sat_ohm)
    return v, r


def node_source(v_src_v, r_src_ohm, g_leak_s, i_draw_a):
    """A source v_src behind r_src driving the timing node, which also leaks g_leak to ground and
    loses i_draw into the comparator inputs: returns (V_inf [V], g [S]), the net current into
    the node being g (V_inf - v) [book: Thevenin]."""
    g = 1.0 / r_src_ohm + g_leak_s
    return (v_src_v / r_src_ohm - i_draw_a) / g, g


def diode_feed_a(vcc_v, v_node_v, ra_ohm, rb_ohm, i_sat_a, n_vt_v):
    """Current [A] from VCC through RA into the timing node when RB and a Shockley diode
    I = Is (exp(u / (n Vt)) - 1) in parallel join RA to the node [derived: Kirchhoff's current
    law at the discharge node, (VCC - v - u)/RA = u/RB + Is (exp(u/nVt) - 1), solved for the
    diode voltage u with Lambert's W: u = A/G - nVt W((Is / (G nVt)) exp(A / (G nVt))),
    A = (VCC - v)/RA + Is, G = 1/RA + 1/RB; W of an exponential is the Wright omega function]."""
    g = 1.0 / ra_ohm + 1.0 / rb_ohm
    a = (vcc_v - v_node_v) / ra_ohm + i_sat_a
    u = a / g - n_vt_v * wright_omega(np.log(i_sat_a / (g * n_vt_v)) + a / (g * n_vt_v))
    return (vcc_v - v_node_v - u) / ra_ohm


def _capacitor(circuit, timer, parts, c, t_amb, v_up, ideal, leak_factor, dc_bias_factor=1.0):
    """The timing node's C(v) over the swing, its leakage conductance [S] and the constant
    current [A] the comparator inputs draw from it."""
    cap = parts.technology
    c_nom = np.asarray(c, dtype=float)
    c_t = c_nom * (1.0 if ideal else capacitance_temperature_factor(cap, t_amb))
    loss = 0.0 if ideal else (cap.dc_bias_loss if parts.dc_bias_loss is None else parts.dc_bias_loss)
    if loss != 0.0 and not (np.ndim(dc_bias_factor) == 0 and dc_bias_factor == 1.0):
        loss = loss * np.asarray(dc_bias_factor, dtype=float)      # a build's or corner's curve
    # the monostable ramps from (nearly) 0 V, an astable swings between Vc/2 and Vc [book] and,
    # at the highest frequencies, runs on below Vc/2 for the delay: the curve is fitted from Vc/4
    curve = node_capacitance(c_t, parts.stray_capacitance_f, loss, parts.capacitor_voltage_v,
                             v_up, 0.0 if circuit in ("monostable", "missing-pulse") else 0.25)
    g_leak = 0.0 if ideal else leak_factor * leakage_conductance_s(
        cap, c_nom, parts.capacitor_voltage_v, t_amb, v_work_v=v_up)
    # threshold input current drawn from the node, and in the astables the trigger input's, which
    # sits on the same node: a bipolar trigger input (PNP) pushes its current into the node, so
    # it speeds the charge and slows the discharge [ds-bip, mem]
    i_trig = 0.0
    if circuit in ASTABLES:
        i_trig = -timer.trigger_current_a if timer.trigger_current_sources else timer.trigger_current_a
    i_draw = timer.threshold_current_a + i_trig
    return curve, g_leak, i_draw


def _discharge_network(timer, vcc, ra_t, rb_t):
    """Astable low phase: the discharge node D with RA from VCC, RB to the capacitor and the
    transistor (V_sat0 + R_sat) to ground is linear in the capacitor voltage V: V_D = a + b V
    [derived: Kirchhoff's current law]. Returns (Thevenin V, R seen through RB, a, b)."""
    v_d, r_d = thevenin_with_sat(vcc, ra_t, timer.saturation_v, timer.saturation_ohm)
    rs_, vs_ = timer.saturation_ohm, timer.saturation_v
    den = rs_ * rb_t + ra_t * rb_t + ra_t * rs_
    a_d = (vcc * rs_ * rb_t + vs_ * ra_t * rb_t) / den
    b_d = ra_t * rs_ / den
    return v_d, rb_t + r_d, a_d, b_d


def _charge_phase(circuit, timer, parts, stage: OutputStates, curve, g_leak, i_draw, *, vcc,
                  t_amb, ra_t, rb_t, r_t, v_bot, v_up, ideal, diode_is_factor=1.0):
    """The astable's high phase from v_bot to v_up and on for the delay. Returns (Phase, stalls,
    current [A] into the node at its start, its source's resistance to the supply [Ω])."""
    tpd = timer.propagation_delay_s
    if circuit == "astable":                                   # through RA + RB [book]
        vinf, g = node_source(vcc, ra_t + rb_t, g_leak, i_draw)
        return (linear_phase(curve, vinf, g, v_bot, v_up, tpd, curve.at_fraction(1.0)), vinf <= v_up,
                (vcc - v_bot) / (ra_t + rb_t), ra_t)
    if circuit == "astable-symmetric":                         # the output high drives R [derived]
        v_h, r_h = stage.high
        seg1 = node_source(v_h, r_t + r_h, g_leak, i_draw)
        i0 = (v_h - v_bot) / (r_t + r_h)
        if stage.high_lifted is None:
            return linear_phase(curve, *seg1, v_bot, v_up, tpd), seg1[0] <= v_up, i0, r_t
        # a load to the supply lifts the output above a stage that cannot sink: the load alone
        # feeds R while the node stays above the stage's open level e [derived]
        v_l, r_l, e = stage.high_lifted
        lifted = ~np.isnan(v_l)
        seg2 = node_source(np.where(lifted, v_l, v_h), r_t + np.where(lifted, r_l, r_h), g_leak, i_draw)
        v_sw = np.where(lifted, e - r_t * (v_l - e) / r_l, -np.inf)
        ph, stalls = two_segment_phase(curve, seg1, seg2, v_sw, v_bot, v_up, tpd)
        i0 = np.where(lifted & (v_bot >= v_sw), (np.where(lifted, v_l, v_h) - v_bot)
                      / (r_t + np.where(lifted, r_l, r_h)), i0)
        return ph, stalls, i0, r_t
    if ideal or parts.diode_drop_v is not None:
        # fixed diode drop: the diode conducts while (VCC - V) RB / (RA + RB) >= Vd, i.e. below
        # v_sw = VCC - Vd (RA + RB) / RB; above it the capacitor charges through RA + RB [derived]
        vd = 0.0 if ideal else parts.diode_drop_v
        seg1 = node_source(vcc - vd, ra_t, g_leak, i_draw)
        seg2 = node_source(vcc, ra_t + rb_t, g_leak, i_draw)
        v_sw = vcc - vd * (ra_t + rb_t) / rb_t
        ph, stalls = two_segment_phase(curve, seg1, seg2, v_sw, v_bot, v_up, tpd)
        i0 = np.where(v_sw > v_bot, (vcc - vd - v_bot) / ra_t, (vcc - v_bot) / (ra_t + rb_t))
        return ph, stalls, i0, ra_t
    # Shockley diode across RB [book: Sedra & Smith; temperature rule in parts.saturation_at]
    diode = parts.diode_model
    i_sat = saturation_at(diode, t_amb) * diode_is_factor
    n_vt = diode.ideality * thermal_voltage_v(t_amb)

    def net(v):
        return diode_feed_a(vcc, v, ra_t, rb_t, i_sat, n_vt) - g_leak * v - i_draw
    ph, stalls = quadrature_phase(curve, net, v_bot, v_up, tpd)
    return ph, stalls, diode_feed_a(vcc, v_bot, ra_t, rb_t, i_sat, n_vt), ra_t


def _astable(circuit, timer, parts, iq, stage, curve, g_leak, i_draw, *, vcc, t_amb, ra_t, rb_t,
             r_t, v_up, ideal, diode_is_factor=1.0):
    """Both phases of an astable, the supply current and the discharge figures."""
    tpd = timer.propagation_delay_s
    v_lo = 0.5 * v_up
    split = None
    if circuit == "astable-symmetric":
        v_l, r_l = stage.low
        seg_d = node_source(v_l, r_t + r_l, g_leak, i_draw)      # output low sinks R [derived]
        if stage.low_split is not None:
            # a load to ground below the stage's offset: while the node is above v_k the stage
            # and the load sink R's current together, below it the load alone [derived]
            v_ld, r_ld, e = stage.low_split
            on = ~np.isnan(e)
            seg_ld = node_source(np.where(on, v_ld, v_l), r_t + np.where(on, r_ld, r_l), g_leak, i_draw)
            split = (seg_ld, np.where(on, e + r_t * (e - v_ld) / r_ld, -np.inf))
    else:
        v_d, r_d, a_d, b_d = _discharge_network(timer, vcc, ra_t, rb_t)
        i_rev = 0.0
        if circuit == "astable-diode" and not ideal and parts.diode_drop_v is None:
            # the diode is reverse biased while C discharges: its leakage helps [cp]
            i_rev = reverse_current_at(parts.diode_model, t_amb)
        seg_d = node_source(v_d, r_d, g_leak, i_draw + i_rev)
    # the cycle starts where the low phase's run-on ends [derived]
    vinf_b, g_b = seg_d if split is None else (np.where(v_lo > split[1], seg_d[0], split[0][0]),
                                                np.where(v_lo > split[1], seg_d[1], split[0][1]))
    at_lo = curve.at_fraction(1.0 / 3.0)       # Vc/2 in the fit from Vc/4 to Vc
    v_bot = run_on(curve, vinf_b, g_b, v_lo, tpd, at_lo)
    high, stalls, i_start, r_feed = _charge_phase(
        circuit, timer, parts, stage, curve, g_leak, i_draw, vcc=vcc, t_amb=t_amb, ra_t=ra_t,
        rb_t=rb_t, r_t=r_t, v_bot=v_bot, v_up=v_up, ideal=ideal, diode_is_factor=diode_is_factor)
    v_top = high.v_end_v
    with np.errstate(all="ignore"):
        if split is None:
            low = linear_phase(curve, *seg_d, v_top, v_lo, tpd, at_lo)
            stalls = stalls | (seg_d[0] >= v_lo)
        else:
            low, stalls_d = two_segment_phase(curve, seg_d, split[0], split[1], v_top, v_lo, tpd)
            stalls = stalls | stalls_d
    t_h = np.where(stalls, np.nan, high.time_s)
    t_l = np.where(stalls, np.nan, low.time_s)
    period = t_h + t_l
    # charge from the supply in the high phase: what the node stored plus what leaked and what
    # the inputs drew [derived: charge balance]
    q_h = high.charge_c + g_leak * high.vt_vs + i_draw * high.time_s
    vm_l = low.vt_vs / low.time_s                             # mean node voltage, low phase
    if circuit == "astable-symmetric":
        i_ra_l = 0.0
        dis_peak = np.zeros(np.shape(period))
        steady = dis_peak
        p_res = i_start ** 2 * r_t
        p_dis_l = 0.0
        r_series = np.inf
    else:
        vd_mean = a_d + b_d * vm_l
        i_ra_l = (vcc - vd_mean) / ra_t
        vd_top = a_d + b_d * v_top
        # turn-on: the capacitor dumps through RB into the transistor, RA's current on top
        dis_peak = np.minimum((vcc - vd_top) / ra_t + (v_top - vd_top) / rb_t, timer.surge_current_a)
        vd_bot = a_d + b_d * v_bot
        steady = (vcc - vd_bot) / ra_t + (v_bot - vd_bot) / rb_t   # at the end of the low phase
        # RA: worst of the low phase (VCC across it, less node D) and the start of the high
        p_res = np.maximum((vcc - vd_bot) ** 2 / ra_t, i_start ** 2 * ra_t)
        p_dis_l = vd_mean * (i_ra_l + (vm_l - vd_mean) / rb_t)
        r_series = rb_t
    i_h = iq[True] + q_h / high.time_s + stage.i_high
    i_l = iq[False] + i_ra_l + stage.i_low
    supply = (t_h * i_h + t_l * i_l) / period
    p_chip_h = vcc * iq[True] + (vcc - stage.v_high) * stage.i_high
    p_chip_l = vcc * iq[False] + stage.v_low * stage.i_low + p_dis_l
    p_chip = (t_h * p_chip_h + t_l * p_chip_l) / period
    out = dict(high_time_s=t_h, low_time_s=t_l, period_s=period, frequency_hz=1.0 / period,
               duty=t_h / period, pulse_width_s=np.nan, supply_current_a=supply,
               idle_current_a=np.nan, discharge_peak_a=dis_peak, ra_power_w=p_res)
    # where the node starts and tops out and where each phase heads: the waveform's phases
    out.update(wave_v_start_v=v_bot, wave_v_top_v=v_top, wave_vinf_high_v=high.vinf_v,
               wave_vinf_low_v=low.vinf_v)
    return out, stalls, p_chip, _surge(timer, curve, v_top, v_lo, r_series), steady


def _surge(timer, curve: NodeCapacitance, v_top, v_end, r_series):
    """The discharge transistor's turn-on surge: (energy [J] it takes, duration [s] to a tenth
    of its peak), with C taken at the middle of the swing. The capacitor's energy between v_top
    and v_end splits between the transistor
    and a series resistance in proportion to their resistances; beyond surge_current_a the
    transistor leaves saturation and takes the excess itself [derived]."""
    if np.all(np.isinf(r_series)):
        z = np.zeros(np.shape(v_top))
        return z, z * np.nan
    r_sat = timer.saturation_ohm
    with np.errstate(all="ignore"):
        c_mean = curve.at(0.5 * (v_end + v_top))
        energy = 0.5 * c_mean * (v_top ** 2 - v_end ** 2)
        r_eff = np.maximum(r_sat, v_top / timer.surge_current_a - r_series)
        e_tr = energy * r_eff / (r_eff + r_series)
        # limited at first to surge_current_a (constant current), then exponential [derived]
        r_loop = r_sat + r_series
        v_knee = np.minimum(v_top, timer.surge_current_a * r_loop)
        t_cc = c_mean * (v_top - v_knee) / timer.surge_current_a
        tau = c_mean * r_loop
        duration = t_cc + tau * np.log(np.maximum(v_knee / (0.1 * v_top), 1.0))
    return e_tr, duration


def _monostable(timer, parts, iq, stage, curve, g_leak, i_draw, *, vcc, r_t, v_up):
    """The monostable's pulse, supply and idle currents, and the capacitor dump at its end."""
    tpd = timer.propagation_delay_s
    # at rest the discharge transistor holds C: R from VCC, V_sat0 + R_sat, leakage and the
    # threshold input current [derived: Kirchhoff's current law]
    # threshold input current; a resistor R_s between the discharge pin and C is in series with
    # the saturation resistance [derived: Kirchhoff's current law]
    r_s = parts.discharge_resistor_ohm
    r_sat = timer.saturation_ohm + r_s
    if r_sat > 0:
        v0 = ((vcc / r_t + timer.saturation_v / r_sat - i_draw)
              / (1.0 / r_t + 1.0 / r_sat + g_leak))
    else:
        v0 = timer.saturation_v + 0.0 * vcc * r_t
    vinf_c, g_c = node_source(vcc, r_t, g_leak, i_draw)
    stalls = vinf_c <= v_up
    with np.errstate(all="ignore"):
        ph = linear_phase(curve, vinf_c, g_c, v0, v_up, tpd, curve.at_fraction(1.0))
        pw = np.where(stalls, np.nan, ph.time_s)
        vm_h = ph.vt_vs / ph.time_s
    i_idle_r = (vcc - v0) / r_t
    supply = iq[True] + (vcc - vm_h) / r_t + stage.i_high
    idle = iq[False] + i_idle_r + stage.i_low
    p_chip = np.maximum(vcc * iq[True] + (vcc - stage.v_high) * stage.i_high,
                        vcc * iq[False] + stage.v_low * stage.i_low
                        + v0 * i_idle_r)
    v_top = ph.v_end_v
    # at the pulse's end the capacitor dumps into the transistor, through R_s if there is one
    # [derived]
    with np.errstate(all="ignore"):
        dump = np.minimum((v_top - timer.saturation_v) / max(r_sat, 1e-12), timer.surge_current_a)
    nan = np.full_like(pw, np.nan)
    out = dict(high_time_s=pw, low_time_s=nan, period_s=nan, frequency_hz=nan, duty=nan,
               pulse_width_s=pw, supply_current_a=supply, idle_current_a=idle,
               discharge_peak_a=dump + i_idle_r, ra_power_w=(vcc - v0) ** 2 / r_t)
    out.update(wave_v_start_v=v0, wave_v_top_v=v_top, wave_vinf_high_v=ph.vinf_v, wave_vinf_low_v=v0)
    return out, stalls, p_chip, _surge(timer, curve, v_top, v0, r_s), i_idle_r


def _missing_pulse(timer, parts, iq, stage, curve, g_leak, i_draw, *, vcc, r_t, v_up, input_period):
    """The missing-pulse detector: a monostable whose capacitor an input pulse train discharges
    (through a transistor across C) and retriggers before it reaches the threshold. The timeout,
    from the last pulse to the alarm, is the monostable's ramp from the discharged level to the
    threshold, ln 3 R C in the ideal case [book]; the external transistor is taken to discharge
    C to the same level as the timer's own discharge transistor [cp]. While pulses arrive the
    output stays high and C ramps for one input period at a time; the supply current is the
    quiescent high current, the load and the mean current through R over that ramp, with the
    node following the RC law whose time constant matches the timeout [derived]. The current in
    the alarm state (output low, C held) is reported as the idle current."""
    out, stalls, p_chip, surge, steady = _monostable(timer, parts, iq, stage, curve, g_leak, i_draw,
                                                     vcc=vcc, r_t=r_t, v_up=v_up)
    timeout = out["pulse_width_s"]
    v0 = out["wave_v_start_v"]
    vinf = out["wave_vinf_high_v"]
    t_in = np.asarray(input_period, dtype=float)
    with np.errstate(all="ignore"):
        tau = timeout / np.log((vinf - v0) / (vinf - v_up))
        span = np.minimum(t_in, timeout)
        v_mean = vinf - (vinf - v0) * tau / span * -np.expm1(-span / tau)
        supply = iq[True] + (vcc - v_mean) / r_t + stage.i_high
    nan = np.full(np.shape(timeout), np.nan)
    out.update(pulse_width_s=nan, high_time_s=nan, timeout_s=timeout, timeout_margin_s=timeout - t_in,
               supply_current_a=np.where(np.isnan(timeout), np.nan, supply))
    return out, stalls, p_chip, surge, steady


def evaluate(circuit: str, timer: TimerModel, parts: Parts, load: Load, *, vcc, temperature,
             c=np.nan, ra=np.nan, rb=np.nan, r=np.nan, control_voltage=np.nan,
             leak_factor=1.0, dc_bias_factor=1.0, diode_is_factor=1.0, iq_factor=1.0,
             load_factor=1.0, vf_shift=0.0, stage_factor=1.0,
             ideal: bool = False, load_resistance=np.nan, input_period=np.nan) -> dict[str, np.ndarray]:
    """Evaluate every point of a broadcast grid.

    Parameters (SI units; arrays broadcast): vcc [V], temperature [°C], c [F] nominal at 25 °C,
    ra, rb, r [Ω] nominal at 25 °C, control_voltage [V] (NaN: internal divider), leak_factor [-]
    the capacitor's leakage relative to its typical figure (1: typical; see
    parts.leakage_conductance_s for the specification maximum); dc_bias_factor, diode_is_factor,
    iq_factor [-]: a build's or a worst-case corner's DC-bias loss, diode saturation current and
    quiescent current relative to their typical figures; load_resistance [Ω] a swept load
    resistor (NaN: the [load] resistance), input_period [s] the missing-pulse detector's input;
    load_factor, vf_shift [V], stage_factor: a build's or corner's load resistor, LED forward
    voltage and output-stage drop relative to their nominal figures.
    Returns a dict of arrays: the output columns of sweep.variables.OUTPUTS and 'flag_mask'
    (bits of FLAG_BITS, spec-miss excluded: that needs the study's [spec]).
    """
    if circuit not in CIRCUITS:
        raise ValueError(f"unknown circuit {circuit!r}")
    if ideal:
        timer, parts = timer.idealised(), parts.idealised()
    vcc = np.asarray(vcc, dtype=float)
    t_amb = np.asarray(temperature, dtype=float)
    cv = np.asarray(control_voltage, dtype=float)
    tc = parts.resistor_tempco_per_k
    ra_t, rb_t, r_t = (resistor_at(np.asarray(x, dtype=float), t_amb, tc) for x in (ra, rb, r))
    # thresholds: upper = control voltage, lower = half of it [book]
    v_up = np.where(np.isnan(cv), timer.threshold_fraction * vcc, cv)
    stage = output_states(timer, load, vcc, t_amb, load_resistance, load_factor, vf_shift,
                          1.0 if ideal else stage_factor)
    iq = {high: timer.quiescent_a(vcc, output_high=high) * iq_factor for high in (True, False)}
    timed = circuit != "bistable"
    surge = steady = None
    if timed:
        curve, g_leak, i_draw = _capacitor(circuit, timer, parts, c, t_amb, v_up, ideal, leak_factor,
                                           dc_bias_factor)
        if circuit in ASTABLES:
            out, stalls, p_chip, surge, steady = _astable(
                circuit, timer, parts, iq, stage, curve, g_leak, i_draw, vcc=vcc, t_amb=t_amb,
                ra_t=ra_t, rb_t=rb_t, r_t=r_t, v_up=v_up, ideal=ideal, diode_is_factor=diode_is_factor)
        elif circuit == "missing-pulse":
            out, stalls, p_chip, surge, steady = _missing_pulse(
                timer, parts, iq, stage, curve, g_leak, i_draw, vcc=vcc, r_t=r_t, v_up=v_up,
                input_period=input_period)
        else:
            out, stalls, p_chip, surge, steady = _monostable(
                timer, parts, iq, stage, curve, g_leak, i_draw, vcc=vcc, r_t=r_t, v_up=v_up)
        out["discharge_dump_s"] = surge[1]
    else:  # bistable: set/reset latch, no timing [book]
        i_h = iq[True] + stage.i_high
        i_l = iq[False] + stage.i_low
        stalls = np.zeros(np.broadcast(vcc, t_amb).shape, dtype=bool)
        p_chip = np.maximum(vcc * iq[True] + (vcc - stage.v_high) * stage.i_high,
                            vcc * iq[False] + stage.v_low * stage.i_low)
        nan = np.full(stalls.shape, np.nan)
        out = dict(high_time_s=nan, low_time_s=nan, period_s=nan, frequency_hz=nan, duty=nan,
                   pulse_width_s=nan, supply_current_a=np.maximum(i_h, i_l), idle_current_a=i_l,
                   discharge_peak_a=np.zeros(stalls.shape), ra_power_w=np.zeros(stalls.shape),
                   discharge_dump_s=nan)
    tj = t_amb + timer.theta_ja_c_per_w * p_chip
    out.setdefault("timeout_s", np.nan)
    out.setdefault("timeout_margin_s", np.nan)
    shape = np.broadcast(*(np.asarray(v) for v in out.values()), tj, vcc, t_amb).shape
    out["power_w"] = vcc * out["supply_current_a"]
    out["output_high_v"] = stage.v_high
    out["output_low_v"] = stage.v_low
    out["output_current_a"] = np.maximum(stage.i_high, stage.i_low)
    out["junction_temp_c"] = tj
    out = {k: np.broadcast_to(np.asarray(v, dtype=float), shape) for k, v in out.items()}
    env = dict(vcc=vcc, t_amb=t_amb, v_up=v_up, ra=ra, rb=rb, r=r, c=c, steady=steady,
               surge=surge, stalls=stalls, input_period=input_period)
    out["flag_mask"] = np.broadcast_to(_flags(circuit, timer, parts, stage, out, env), shape)
    return out


def _flags(circuit, timer, parts, stage, out, env):
    """Flag bits of every limit broken [ds-bip]/[ds-cmos] limits from the timer model, [cp] part
    limits."""
    vcc, t_amb, v_up = env["vcc"], env["t_amb"], env["v_up"]
    m = np.zeros((), dtype=np.uint32)

    def flag(name, cond):
        """Set a flag bit where cond holds; cond keeps its own (often smaller) shape."""
        nonlocal m
        m = m | np.where(cond, np.uint32(FLAG_BITS[name]), np.uint32(0))

    flag("supply-below-min", vcc < timer.min_v)
    flag("supply-above-max", vcc > timer.max_v)
    flag("supply-above-abs-max", vcc > timer.abs_max_v)
    flag("temperature-out-of-range", (t_amb < timer.ambient_min_c) | (t_amb > timer.ambient_max_c))
    flag("output-current-over-limit", (stage.i_high > timer.source_max_a) | (stage.i_low > timer.sink_max_a))
    flag("junction-too-hot", out["junction_temp_c"] > timer.tj_max_c)
    if circuit == "bistable":
        return m
    ra, rb, r, c = (np.asarray(env[k]) for k in ("ra", "rb", "r", "c"))
    r_in = ra if circuit in ("astable", "astable-diode") else r
    flag("resistor-too-small", r_in < timer.min_resistance_ohm)
    # R_max = derating x (VCC - Vc) / I_th,max [ds-bip; cp halves it]
    r_charge = ra + rb if circuit == "astable" else r_in
    if timer.threshold_current_max_a > 0:
        r_max = timer.resistance_derating * (vcc - v_up) / timer.threshold_current_max_a
        flag("resistance-too-large", r_charge > r_max)
    flag("capacitor-too-small", c < timer.min_capacitance_f)
    # steady current through the transistor, or a turn-on dump with more energy than it takes
    flag("discharge-current-over-limit", (env["steady"] > timer.discharge_max_a)
         | (env["surge"][0] > timer.surge_energy_max_j))
    flag("resistor-overpowered", out["ra_power_w"] > parts.resistor_power_w)
    flag("timing-stalls", env["stalls"])
    if circuit in ASTABLES:
        flag("frequency-too-high", out["frequency_hz"] > timer.max_frequency_hz)
    if circuit == "missing-pulse":
        flag("false-alarm", out["timeout_s"] < np.asarray(env["input_period"], dtype=float))
    return m


def flag_names(mask: int) -> list[str]:
    """Flag codes set in one mask value, in the stable order."""
    return [name for name, bit in FLAG_BITS.items() if mask & bit]
