"""The cycle every astable shares: the low phase ends in a run-on below Vc/2, the high phase
(each astable's own `charge`) climbs to Vc and runs on, the low phase (`discharge`) falls back.
Supply current, chip power and the discharge figures follow from the two phases [derived:
charge balance and Kirchhoff's laws]."""
from __future__ import annotations

import numpy as np

from ..network import Node, discharge_network, node_source, surge
from ..nodes import linear_phase, run_on, two_segment_phase


def transistor_discharge(n: Node, extra_current_a=0.0):
    """Low phase of a two-resistor astable: C empties through RB into the discharge node, which
    RA feeds from VCC and the transistor holds down. Returns (segment, split, network)."""
    v_d, r_d, a_d, b_d = discharge_network(n.timer, n.vcc, n.ra_t, n.rb_t)
    return node_source(v_d, r_d, n.g_leak, n.i_draw + extra_current_a), None, (a_d, b_d)


def cycle(n: Node, charge, low):
    """Both phases of an astable, the supply current and the discharge figures.

    charge(n, v_bot) -> (Phase, stalls, current [A] into the node at its start, feed resistor [Ω]);
    low = (segment, split, network): the low phase's Thevenin segment (V_inf, g), an optional
    second segment and switch voltage (split), and the discharge node's (a, b) (V_D = a + b V),
    or None where the output itself discharges C."""
    seg_d, split, network = low
    tpd = n.timer.propagation_delay_s
    v_lo = 0.5 * n.v_up
    # the cycle starts where the low phase's run-on ends [derived]
    vinf_b, g_b = seg_d if split is None else (np.where(v_lo > split[1], seg_d[0], split[0][0]),
                                                np.where(v_lo > split[1], seg_d[1], split[0][1]))
    at_lo = n.curve.at_fraction(1.0 / 3.0)       # Vc/2 in the fit from Vc/4 to Vc
    v_bot = run_on(n.curve, vinf_b, g_b, v_lo, tpd, at_lo)
    high, stalls, i_start, r_feed = charge(n, v_bot)
    v_top = high.v_end_v
    with np.errstate(all="ignore"):
        if split is None:
            lowp = linear_phase(n.curve, *seg_d, v_top, v_lo, tpd, at_lo)
            stalls = stalls | (seg_d[0] >= v_lo)
        else:
            lowp, stalls_d = two_segment_phase(n.curve, seg_d, split[0], split[1], v_top, v_lo, tpd)
            stalls = stalls | stalls_d
    t_h = np.where(stalls, np.nan, high.time_s)
    t_l = np.where(stalls, np.nan, lowp.time_s)
    period = t_h + t_l
    # charge from the supply in the high phase: what the node stored plus what leaked and what
    # the inputs drew [derived: charge balance]
    q_h = high.charge_c + n.g_leak * high.vt_vs + n.i_draw * high.time_s
    vm_l = lowp.vt_vs / lowp.time_s                             # mean node voltage, low phase
    vcc, ra_t, rb_t, timer, stage = n.vcc, n.ra_t, n.rb_t, n.timer, n.stage
    if network is None:                  # the output discharges C: no transistor, no RA
        i_ra_l = 0.0
        dis_peak = np.zeros(np.shape(period))
        steady = dis_peak
        p_res = i_start ** 2 * r_feed
        p_dis_l = 0.0
        r_series = np.inf
    else:
        a_d, b_d = network
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
    iq = n.iq
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
               wave_vinf_low_v=lowp.vinf_v)
    return out, stalls, p_chip, surge(timer, n.curve, v_top, v_lo, r_series), steady


#: the frequency limit, the flag every astable adds [ds-bip]/[ds-cmos]
def frequency_flags(out, env) -> dict:
    return {"frequency-too-high": out["frequency_hz"] > env["timer"].max_frequency_hz}


#: the Check sheet's frequency and duty from the high- and low-time helper cells [book]
CHECK_FROM_TIMES = {"frequency_hz": "1/({TH}+{TL})", "duty": "{TH}/({TH}+{TL})"}


#: what the chart page's waveform of an astable shows
WAVEFORM_TEXT = ("three cycles: the capacitor charges to the upper threshold with the output high, "
                 "then discharges to the lower one with the output low")


def trace(probe, p, input_period_s=np.nan) -> None:
    """Three cycles: the capacitor charges to the upper threshold with the output high, then
    discharges to the lower one with the output low (probe: physics.traces.Probe; p: one
    evaluated point, the model's columns)."""
    v0, v1 = p["wave_v_start_v"], p["wave_v_top_v"]
    for _ in range(3):
        probe.seg(v0, v1, p["wave_vinf_high_v"], p["high_time_s"], p["output_high_v"])
        probe.seg(v1, v0, p["wave_vinf_low_v"], p["low_time_s"], p["output_low_v"])
