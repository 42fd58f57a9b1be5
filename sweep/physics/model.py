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

from .circuits import REGISTRY, TIMING_PARTS, Circuit
from .network import Node
from .nodes import node_capacitance
from .output import output_states
from .parts import Load, Parts, capacitance_temperature_factor, leakage_conductance_s, resistor_at
from .timer import TimerModel

#: every flag code, in the stable order of its bit in the mask [the product's flag list]
FLAGS = ("supply-below-min", "supply-above-max", "supply-above-abs-max", "temperature-out-of-range",
         "resistor-too-small", "resistance-too-large", "capacitor-too-small", "frequency-too-high",
         "output-current-over-limit", "discharge-current-over-limit", "resistor-overpowered",
         "junction-too-hot", "timing-stalls", "spec-miss", "false-alarm")
FLAG_BITS = {name: 1 << i for i, name in enumerate(FLAGS)}


def _capacitor(circuit: Circuit, timer, parts, c, t_amb, v_up, ideal, leak_factor, dc_bias_factor=1.0):
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
                             v_up, 0.0 if circuit.ramps_from_ground else 0.25)
    g_leak = 0.0 if ideal else leak_factor * leakage_conductance_s(
        cap, c_nom, parts.capacitor_voltage_v, t_amb, v_work_v=v_up)
    # threshold input current drawn from the node, and where the trigger input sits on the same
    # node (the astables) the trigger input's: a bipolar trigger input (PNP) pushes its current into the node, so
    # it speeds the charge and slows the discharge [ds-bip, mem]
    i_trig = 0.0
    if circuit.trigger_on_node:
        i_trig = -timer.trigger_current_a if timer.trigger_current_sources else timer.trigger_current_a
    i_draw = timer.threshold_current_a + i_trig
    return curve, g_leak, i_draw


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
    circ = REGISTRY.get(circuit)
    if circ is None:
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
    curve, g_leak, i_draw = None, 0.0, 0.0
    if circ.timed:
        curve, g_leak, i_draw = _capacitor(circ, timer, parts, c, t_amb, v_up, ideal, leak_factor,
                                           dc_bias_factor)
    node = Node(timer=timer, parts=parts, stage=stage, curve=curve, g_leak=g_leak, i_draw=i_draw,
                iq=iq, vcc=vcc, t_amb=t_amb, ra_t=ra_t, rb_t=rb_t, r_t=r_t, v_up=v_up, ideal=ideal,
                diode_is_factor=diode_is_factor, input_period=input_period)
    out, stalls, p_chip, surge, steady = circ.phases(node)
    if surge is not None:
        out["discharge_dump_s"] = surge[1]
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
               surge=surge, stalls=stalls, input_period=input_period, timer=timer)
    out["flag_mask"] = np.broadcast_to(_flags(circ, timer, parts, stage, out, env), shape)
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
    if not circuit.timed:
        return m
    part = {k: np.asarray(env[k]) for k in TIMING_PARTS}
    flag("resistor-too-small", part[circuit.input_resistor] < timer.min_resistance_ohm)
    # R_max = derating x (VCC - Vc) / I_th,max [ds-bip; cp halves it]
    r_charge = sum(part[k] for k in circuit.charging)
    if timer.threshold_current_max_a > 0:
        r_max = timer.resistance_derating * (vcc - v_up) / timer.threshold_current_max_a
        flag("resistance-too-large", r_charge > r_max)
    flag("capacitor-too-small", part["c"] < timer.min_capacitance_f)
    # steady current through the transistor, or a turn-on dump with more energy than it takes
    flag("discharge-current-over-limit", (env["steady"] > timer.discharge_max_a)
         | (env["surge"][0] > timer.surge_energy_max_j))
    flag("resistor-overpowered", out["ra_power_w"] > parts.resistor_power_w)
    flag("timing-stalls", env["stalls"])
    if circuit.extra_flags is not None:
        for name, cond in circuit.extra_flags(out, env).items():
            flag(name, cond)
    return m


def flag_names(mask: int) -> list[str]:
    """Flag codes set in one mask value, in the stable order."""
    return [name for name, bit in FLAG_BITS.items() if mask & bit]
