"""The networks around the timing node, shared by the circuits: Thevenin sources, the discharge
transistor, the diode feed and the discharge surge.

Pure numpy, SI units. Source tags: [book] a textbook, [ds-bip]/[ds-cmos] a typical datasheet
figure (the timer-model files), [cp] common practice, [mem] from memory, [derived] worked out
here from the RC law and Kirchhoff's laws.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .nodes import NodeCapacitance
from .output import OutputStates
from .parts import Parts, wright_omega
from .timer import TimerModel


@dataclass(frozen=True)
class Node:
    """Everything a circuit's phases need at one broadcast grid of points: the chip, the parts,
    the output stage, the timing node's C(v), leakage conductance g_leak [S] and input current
    i_draw [A], the quiescent current by output state iq {True: high, False: low} [A], the supply
    vcc [V], the ambient t_amb [°C], the timing resistors at temperature ra_t, rb_t, r_t [Ω],
    the upper threshold v_up [V], and the spreads a build or corner sets."""
    timer: TimerModel
    parts: Parts
    stage: OutputStates
    curve: NodeCapacitance
    g_leak: object
    i_draw: object
    iq: dict
    vcc: np.ndarray
    t_amb: np.ndarray
    ra_t: np.ndarray
    rb_t: np.ndarray
    r_t: np.ndarray
    v_up: np.ndarray
    ideal: bool
    diode_is_factor: object = 1.0
    input_period: object = np.nan


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


def discharge_network(timer: TimerModel, vcc, ra_t, rb_t):
    """Astable low phase: the discharge node D with RA from VCC, RB to the capacitor and the
    transistor (V_sat0 + R_sat) to ground is linear in the capacitor voltage V: V_D = a + b V
    [derived: Kirchhoff's current law]. Returns (Thevenin V, R seen through RB, a, b)."""
    v_d, r_d = thevenin_with_sat(vcc, ra_t, timer.saturation_v, timer.saturation_ohm)
    rs_, vs_ = timer.saturation_ohm, timer.saturation_v
    den = rs_ * rb_t + ra_t * rb_t + ra_t * rs_
    a_d = (vcc * rs_ * rb_t + vs_ * ra_t * rb_t) / den
    b_d = ra_t * rs_ / den
    return v_d, rb_t + r_d, a_d, b_d


def surge(timer: TimerModel, curve: NodeCapacitance, v_top, v_end, r_series):
    """The discharge transistor's turn-on surge: (energy [J] it takes, duration [s] to a tenth
    of its peak), with C taken at the middle of the swing. The capacitor's energy between v_top
    and v_end splits between the transistor and a series resistance in proportion to their
    resistances; beyond surge_current_a the transistor leaves saturation and takes the excess
    itself [derived]."""
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
