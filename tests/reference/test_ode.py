"""The realistic model against an independent simulation of the timing network.

The reference here is scipy's general-purpose ODE solver (`solve_ivp`, DOP853, threshold events)
integrating Kirchhoff's current law written in this file from the circuit description, not from
timer-sweep's formulas [book: nodal analysis and the 555 block diagram, e.g. Horowitz & Hill,
*The Art of Electronics*, oscillators and timers; Sedra & Smith, *Microelectronic Circuits*]:

- timing node X (the capacitor C(v), its DC-bias curve taken at the instantaneous voltage, with
  leakage conductance g and the comparator input currents i_b drawn from it):
  C(V) dV/dt = i_in(V) - g V - i_b
- discharge node D (no capacitance, so it is solved algebraically at every step): RA from VCC,
  RB to X, the discharge transistor to ground as a source V_sat0 in series with R_sat when on,
  and in the diode circuit a diode from D to X: a Shockley device I = Is (exp(u / n Vt) - 1)
  [book: Sedra & Smith], its forward equation solved with scipy's Wright omega function and
  checked against scipy's root finder in a test below, or a fixed drop that conducts only when
  forward biased; reverse biased it leaks its reverse current
- output node O of the output-fed astable (also solved algebraically): the stage's drop against
  its current as the timer file's piecewise-linear curve, a high stage that cannot sink current
  when the file says so, a low stage that only sinks, and the load (a resistor and an LED's
  forward voltage that conducts one way) to ground or to the supply; the root of the piecewise
  linear current balance is found exactly between its breakpoints
- comparators switch the output a propagation delay after the node crosses a threshold: the
  simulation keeps integrating the same equations for t_pd before switching.

Part data (the capacitor's temperature and DC-bias curves, the leakage rule, the diode's figures
and the output curves) come from sweep.physics.parts and the timer files: the simulation checks
timing dynamics, not data. Both are run on the same element values, so the only differences
left are the model's approximations (a quadratic for C(v), quadrature for the diode, a linearised
output stage) and the solver's error; 0.5 % is the agreement asked of them, while a wrong term
(a missing bias current, the wrong Thevenin resistance, the delay on the wrong side, a fixed
diode drop) is larger.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np
import pytest
from scipy.integrate import solve_ivp
from scipy.optimize import brentq
from scipy.special import wrightomega

from sweep.models import load_timer
from sweep.physics import CAPACITORS, FLAG_BITS, Load, Parts, evaluate
from sweep.physics.parts import (capacitance_temperature_factor, dc_bias_factor,
                                 leakage_conductance_s, reverse_current_at, saturation_at,
                                 thermal_voltage_v)

TIMERS = {name: load_timer(name) for name in ("bipolar", "cmos")}
TIMED = ("astable", "astable-diode", "astable-symmetric", "monostable")
RTOL_ODE = 1e-10
TOLERANCE = 0.005          # agreement required, relative
N_DESIGNS = 480
MIN_COMPARED = 200
STALL = FLAG_BITS["timing-stalls"]


@dataclass(frozen=True)
class Network:
    """Element values of one design at its operating point (SI units)."""
    circuit: str
    vcc: float
    v_up: float            # upper threshold
    v_lo: float            # lower threshold
    c_t: float             # capacitance at 0 V and the working temperature
    loss: float            # DC-bias loss at rated voltage
    v_rated: float
    stray: float
    cap_name: str
    g_leak: float          # capacitor leakage conductance
    i_b: float             # comparator input currents drawn from X
    ra: float
    rb: float
    r: float
    v_sat0: float
    r_sat: float
    v_diode: float         # fixed drop; NaN: the Shockley diode below
    i_sat: float
    n_vt: float
    i_rev: float
    src_points: tuple      # output stage: (A, V) drop curves, the high level's shift
    snk_points: tuple
    src_shift: float
    can_sink: bool
    load_r: float
    load_to: str
    load_vf: float
    t_pd: float

    def cap(self, v: float) -> float:
        """C(v): the DC-bias curve at the instantaneous voltage, plus the stray capacitance."""
        return self.c_t * float(dc_bias_factor(CAPACITORS[self.cap_name], v, self.v_rated,
                                               self.loss)) + self.stray

    @property
    def tau_scale(self) -> float:
        """An upper bound on any time constant of the network, for the integration window."""
        r = {"astable": self.ra + self.rb, "astable-diode": self.ra + self.rb,
             "astable-symmetric": self.r + 1e3 + (self.load_r if math.isfinite(self.load_r) else 0.0)
             }.get(self.circuit, self.r)
        return r * self.c_t * 1.1 + r * self.stray


def network(circuit, timer, parts, load, *, vcc, temperature, c, ra=np.nan, rb=np.nan, r=np.nan,
            control_voltage=np.nan, leak_factor=1.0) -> Network:
    """Element values from the data records, written out here rather than taken from the model."""
    # R(T) = R25 (1 + alpha (T - 25 C)) [cp]
    k_r = 1.0 + parts.resistor_tempco_per_k * (temperature - 25.0)
    # thresholds: control voltage (internal divider, or driven) and half of it [book]
    v_up = timer.threshold_fraction * vcc if math.isnan(control_voltage) else control_voltage
    cap = parts.technology
    loss = cap.dc_bias_loss if parts.dc_bias_loss is None else parts.dc_bias_loss
    g_leak = leak_factor * float(leakage_conductance_s(cap, c, parts.capacitor_voltage_v,
                                                        temperature, v_work_v=v_up))
    # the trigger input sits on the timing node of an astable, not of the monostable [book]; the
    # timer file says whether its current flows out of the pin (a PNP input) or in
    i_trig = 0.0
    if circuit != "monostable":
        i_trig = -timer.trigger_current_a if timer.trigger_current_sources else timer.trigger_current_a
    i_b = timer.threshold_current_a + i_trig
    d = parts.diode_model
    fixed = parts.diode_drop_v is not None
    return Network(
        circuit=circuit, vcc=vcc, v_up=v_up, v_lo=0.5 * v_up,
        c_t=c * float(capacitance_temperature_factor(cap, temperature)), loss=loss,
        v_rated=parts.capacitor_voltage_v, stray=parts.stray_capacitance_f, cap_name=cap.name,
        g_leak=g_leak, i_b=i_b, ra=ra * k_r, rb=rb * k_r, r=r * k_r,
        v_sat0=timer.saturation_v,
        # a monostable's resistor between the discharge pin and C is in series with the switch
        r_sat=timer.saturation_ohm + (parts.discharge_resistor_ohm if circuit == "monostable" else 0.0),
        v_diode=parts.diode_drop_v if fixed else math.nan,
        i_sat=float(saturation_at(d, temperature)),
        n_vt=d.ideality * float(thermal_voltage_v(temperature)),
        i_rev=0.0 if fixed else float(reverse_current_at(d, temperature)),
        src_points=timer.source_drop_points, snk_points=timer.sink_drop_points,
        src_shift=timer.source_drop_tempco_v_per_k * (temperature - 25.0),
        can_sink=timer.high_can_sink, load_r=load.resistance_ohm, load_to=load.to,
        load_vf=load.forward_voltage_v, t_pd=timer.propagation_delay_s)


# --- node equations ------------------------------------------------------------------------
def node_d_off(n: Network, v):
    """Discharge node with the transistor off and no diode current: RA and RB in series."""
    return (n.vcc / n.ra + v / n.rb) / (1.0 / n.ra + 1.0 / n.rb)


def node_d_on(n: Network, v, i_into_d=0.0):
    """Discharge node with the transistor on: KCL with RA to VCC, RB to X, V_sat0 + R_sat, and
    any other current into D."""
    return ((n.vcc / n.ra + v / n.rb + n.v_sat0 / n.r_sat + i_into_d)
            / (1.0 / n.ra + 1.0 / n.rb + 1.0 / n.r_sat))


def shockley_feed(n: Network, v):
    """RA's current with RB and the Shockley diode from D to X: KCL at D,
    (VCC - v - u)/RA = u/RB + Is (exp(u/nVt) - 1), u = V_D - v, solved with Lambert's W of an
    exponential (scipy's Wright omega) [book: the diode equation; Corless & Jeffrey 2002]."""
    g = 1.0 / n.ra + 1.0 / n.rb
    a = (n.vcc - v) / n.ra + n.i_sat
    u = a / g - n.n_vt * float(np.real(wrightomega(math.log(n.i_sat / (g * n.n_vt)) + a / (g * n.n_vt))))
    return (n.vcc - v - u) / n.ra


def _curve_inverse(points, drop, sinks_below):
    """Stage current [A] that gives this drop on a piecewise-linear (A, V) curve extended along
    its end segments; below the first point's drop, the first segment continued (a stage that
    conducts both ways) or 0 (one that cannot)."""
    xs = [p[0] for p in points]
    ys = [p[1] for p in points]
    if len(xs) == 1:
        return math.inf if drop > ys[0] else (-math.inf if sinks_below else 0.0)
    if drop <= ys[0]:
        if not sinks_below:
            return 0.0
        s = (ys[1] - ys[0]) / (xs[1] - xs[0])
        return (drop - ys[0]) / s if s > 0 else -math.inf
    for k in range(len(xs) - 1):
        if drop <= ys[k + 1] or k == len(xs) - 2:
            s = (ys[k + 1] - ys[k]) / (xs[k + 1] - xs[k])
            return xs[k] + (drop - ys[k]) / s if s > 0 else (math.inf if drop > ys[k] else xs[k])
    raise AssertionError


def output_node(n: Network, v_x: float, high: bool) -> float:
    """Voltage of the output node O given the capacitor voltage: the current balance at O (stage,
    load, and R to the capacitor) is piecewise linear and decreasing in V_O, so its root lies
    between two breakpoints where it changes sign and is found there exactly [derived]."""
    def balance(vo):
        if high:     # stage current out of the supply into O
            i_stage = _curve_inverse(n.src_points, n.vcc - n.src_shift - vo, n.can_sink)
        else:        # stage current sunk from O (never sourced)
            i_stage = -_curve_inverse(n.snk_points, vo, False)
        i_load = 0.0
        if math.isfinite(n.load_r):
            if n.load_to == "ground":
                i_load = -max(0.0, (vo - n.load_vf) / n.load_r) if n.load_vf > 0 else -vo / n.load_r
            else:
                i_load = max(0.0, (n.vcc - n.load_vf - vo) / n.load_r) if n.load_vf > 0 \
                    else (n.vcc - vo) / n.load_r
        return i_stage + i_load - (vo - v_x) / n.r
    # breakpoints of the balance: the stage curve's corners and the load's turn-on
    if high:
        corners = [n.vcc - n.src_shift - p[1] for p in n.src_points]
    else:
        corners = [p[1] for p in n.snk_points]
    if math.isfinite(n.load_r):
        corners.append(n.load_vf if n.load_to == "ground" else n.vcc - n.load_vf)
    span = 10.0 * n.vcc + 10.0 + abs(v_x)
    xs = sorted({-span, span, *corners})
    fs = [balance(x) for x in xs]
    for (a, fa), (b, fb) in zip(zip(xs, fs), zip(xs[1:], fs[1:])):
        if fa >= 0.0 >= fb:
            return a if fa == fb else a + fa * (b - a) / (fa - fb)
    raise AssertionError(("no root at the output node", n, v_x, high))


def current_into_x(n: Network, v, high: bool):
    """Current [A] delivered to the timing node by the network in each output state."""
    if n.circuit == "astable":
        vd = node_d_off(n, v) if high else node_d_on(n, v)
        return (vd - v) / n.rb
    if n.circuit == "astable-diode":
        if high:
            if math.isnan(n.v_diode):
                return shockley_feed(n, v)
            # a fixed drop clamps D at most Vd above X; it is off when RB alone keeps D lower.
            # All of RA's current then reaches X (through RB, the diode, or both).
            vd = min(v + n.v_diode, node_d_off(n, v))
            return (n.vcc - vd) / n.ra
        # discharging: the diode is reverse biased and leaks its reverse current from X into D
        vd = node_d_on(n, v, n.i_rev)
        assert vd < v
        return (vd - v) / n.rb - n.i_rev
    if n.circuit == "astable-symmetric":
        return (output_node(n, v, high) - v) / n.r
    if n.circuit == "monostable":
        return (n.vcc - v) / n.r
    raise ValueError(n.circuit)


def phase(n: Network, v0: float, high: bool, t_window: float):
    """Integrate one output state from v0 until the node crosses its threshold, then for the
    propagation delay. Returns (duration, end voltage), or None if the threshold is never
    reached within t_window."""
    def rhs(t, y):
        v = y[0]
        return [(current_into_x(n, v, high) - n.g_leak * v - n.i_b) / n.cap(v)]

    target = n.v_up if high else n.v_lo

    def crossing(t, y):
        return y[0] - target
    crossing.terminal = True
    crossing.direction = 1.0 if high else -1.0
    opts = dict(method="DOP853", rtol=RTOL_ODE, atol=1e-13 * n.vcc)
    sol = solve_ivp(rhs, (0.0, t_window), [v0], events=crossing, max_step=t_window / 50, **opts)
    assert sol.status >= 0, sol.message
    if sol.t_events[0].size == 0:
        return None
    t_cross, v_cross = sol.t_events[0][0], sol.y_events[0][0][0]
    if n.t_pd == 0.0:
        return t_cross, v_cross
    run_on = solve_ivp(rhs, (0.0, n.t_pd), [v_cross], **opts)
    return t_cross + n.t_pd, run_on.y[0, -1]


def simulate(n: Network, max_cycles: int = 8):
    """Astable: (tH, tL) of the settled cycle, starting from an empty capacitor at power-up.
    Monostable: (pulse width, None) from the idle voltage. None if the timer stalls."""
    window = 200.0 * n.tau_scale
    if n.circuit == "monostable":
        # at rest the discharge transistor holds X: KCL with R to VCC, V_sat0 + R_sat, leakage
        v_idle = ((n.vcc / n.r + n.v_sat0 / n.r_sat - n.i_b)
                  / (1.0 / n.r + 1.0 / n.r_sat + n.g_leak))
        res = phase(n, v_idle, True, window)
        return None if res is None else (res[0], None)
    v, last = 0.0, None
    for _ in range(max_cycles):
        hi = phase(n, v, True, window)
        if hi is None:
            return None
        lo = phase(n, hi[1], False, window)
        if lo is None:
            return None
        v = lo[1]
        cycle = (hi[0], lo[0])
        if last is not None and all(abs(a - b) <= 1e-9 * a for a, b in zip(cycle, last)):
            return cycle + (hi[1],)
        last = cycle
    raise AssertionError(f"period did not settle in {max_cycles} cycles: {n}")


# --- random designs --------------------------------------------------------------------------
RATINGS = (6.3, 10.0, 16.0, 25.0, 50.0, 100.0)


def random_designs(seed: int, count: int):
    rng = np.random.default_rng(seed)

    def log_u(lo, hi):
        return float(np.exp(rng.uniform(math.log(lo), math.log(hi))))

    out = []
    for i in range(count):
        circuit = TIMED[i % 4]
        name = ("bipolar", "cmos")[(i // 4) % 2]
        timer = TIMERS[name]
        vcc = float(rng.uniform(timer.min_v, timer.max_v))
        cap = str(rng.choice(sorted(CAPACITORS)))
        rating = float(rng.choice([x for x in RATINGS if x >= vcc]))
        diode = [dict(), dict(diode="schottky"), dict(diode_drop_v=0.7),
                 dict(diode_saturation_current_a=log_u(1e-12, 1e-7),
                      diode_ideality=float(rng.uniform(1.0, 2.0)))][int(rng.integers(4))]
        parts = Parts(capacitor=cap, capacitor_voltage_v=rating,
                      resistor_tempco_per_k=float(rng.choice([100e-6, -300e-6, 25e-6])),
                      stray_capacitance_f=float(rng.choice([2e-12, 5e-12, 20e-12])), **diode)
        kind = int(rng.integers(4))
        load = [Load(), Load(resistance_ohm=log_u(300.0, 100e3)),
                Load(resistance_ohm=log_u(300.0, 100e3), to="supply"),
                Load(resistance_ohm=log_u(300.0, 10e3), forward_voltage_v=1.9)][kind]
        cv = float(rng.uniform(0.45, 0.8) * vcc) if rng.random() < 0.25 else math.nan
        # leakage from typical (1) to several times typical, as the Monte Carlo draws it
        kw = dict(vcc=vcc, temperature=float(rng.uniform(-40.0, 105.0)),
                  c=log_u(100e-12, 1000e-6), control_voltage=cv,
                  leak_factor=float(rng.choice([1.0, 1.0, log_u(1.0, 20.0)])))
        if circuit in ("astable", "astable-diode"):
            kw.update(ra=log_u(1e3, 10e6), rb=log_u(1e3, 10e6))
        else:
            kw.update(r=log_u(1e3, 10e6))
        out.append((circuit, name, parts, load, kw))
    return out


def model_times(circuit, timer, parts, load, kw):
    o = evaluate(circuit, timer, parts, load, **kw)
    return {k: float(v) for k, v in o.items()}


def diode_turns_off(n: Network, v_top: float) -> bool:
    """True if, at the top of the ramp, RB alone would keep D less than a fixed drop Vd above X
    (so the diode carries no current for part of the high phase)."""
    return not math.isnan(n.v_diode) and node_d_off(n, v_top) - v_top < n.v_diode


def deviations(circuit, m, sim):
    """Relative deviations of the model from the simulation."""
    if circuit == "monostable":
        return {"pulse_width_s": m["pulse_width_s"] / sim[0] - 1.0}
    t_h, t_l = sim[0], sim[1]
    want = {"high_time_s": t_h, "low_time_s": t_l, "frequency_hz": 1.0 / (t_h + t_l),
            "duty": t_h / (t_h + t_l)}
    return {k: m[k] / w - 1.0 for k, w in want.items()}


@pytest.mark.slow
def test_model_matches_simulation():
    worst, worst_case = 0.0, None
    compared, stalled, diode_off = {}, 0, 0
    worst_by: dict = {}
    for circuit, name, parts, load, kw in random_designs(20240, N_DESIGNS):
        timer = TIMERS[name]
        m = model_times(circuit, timer, parts, load, kw)
        n = network(circuit, timer, parts, load, **kw)
        sim = simulate(n)
        if int(m["flag_mask"]) & STALL:
            # the model says the node never reaches a threshold: neither may the simulation,
            # within 200 of the network's longest time constant
            assert sim is None, (circuit, name, parts, load, kw, sim)
            stalled += 1
            continue
        assert sim is not None, ("simulation stalls, model does not", circuit, name, kw)
        if circuit == "astable-diode" and diode_turns_off(n, sim[2]):
            diode_off += 1          # compared all the same: the model charges in two segments
        for key, dev in deviations(circuit, m, sim).items():
            assert math.isfinite(dev)
            worst_by[(circuit, name)] = max(worst_by.get((circuit, name), 0.0), abs(dev))
            if abs(dev) > worst:
                worst, worst_case = abs(dev), (key, circuit, name, parts, load, kw)
        compared[(circuit, name)] = compared.get((circuit, name), 0) + 1
    total = sum(compared.values())
    print(f"\nODE reference: {total} designs compared, {stalled} stall in both, "
          f"{diode_off} diode circuits with the diode off part of the time; "
          f"largest relative deviation {worst:.3e} ({worst_case[0]}, {worst_case[1]}, "
          f"{worst_case[2]})")
    print("per circuit and timer:", compared)
    print("largest deviation per circuit and timer:",
          {f"{c} {t}": f"{v:.1e}" for (c, t), v in sorted(worst_by.items())})
    assert total >= MIN_COMPARED
    assert len(compared) == 8 and min(compared.values()) >= 15
    assert stalled >= 1                 # the stall branch was exercised
    assert diode_off >= 2               # the fixed drop's diode-off segment was exercised
    assert worst < TOLERANCE, worst_case


@pytest.mark.parametrize("circuit", TIMED)
@pytest.mark.parametrize("name", ["bipolar", "cmos"])
def test_stalls_agree_with_simulation(circuit, name):
    # [cp] aluminium electrolytic leakage 0.01 C V: 1000 uF rated 16 V leaks 160 uA, about
    # 100 kOhm, so a 3.3 MOhm timing resistor can never lift the node to its upper threshold
    timer = TIMERS[name]
    parts = Parts(capacitor="electrolytic", capacitor_voltage_v=16.0)
    kw = dict(vcc=12.0, temperature=60.0, c=1000e-6)
    kw.update(dict(ra=1e6, rb=3.3e6) if circuit in ("astable", "astable-diode") else dict(r=3.3e6))
    m = model_times(circuit, timer, parts, Load(), kw)
    assert int(m["flag_mask"]) & STALL
    assert simulate(network(circuit, timer, parts, Load(), **kw)) is None


def test_simulation_detects_a_wrong_model():
    # the harness itself must be able to fail: leaving out the 0.1 uA threshold current at
    # 10 MOhm and 5 V moves the pulse by several percent [ds-bip; derived], far beyond 0.5 %
    timer = TIMERS["bipolar"]
    kw = dict(vcc=5.0, temperature=25.0, c=10e-9, r=10e6)
    t_sim = simulate(network("monostable", timer, Parts(capacitor="C0G"), Load(), **kw))[0]
    no_bias = replace(timer, threshold_current_a=0.0)
    t_no_bias = simulate(network("monostable", no_bias, Parts(capacitor="C0G"), Load(), **kw))[0]
    assert abs(t_no_bias / t_sim - 1.0) > 0.02
    m = model_times("monostable", timer, Parts(capacitor="C0G"), Load(), kw)
    assert abs(m["pulse_width_s"] / t_sim - 1.0) < 1e-5
    assert abs(m["pulse_width_s"] / t_no_bias - 1.0) > 0.02


@pytest.mark.parametrize("name, vcc, ra, rb", [("bipolar", 5.0, 100e3, 1e3),
                                              ("cmos", 9.0, 1e6, 47e3),
                                              ("bipolar", 15.0, 470e3, 47e3)])
def test_astable_diode_when_rb_is_small(name, vcc, ra, rb):
    # diode across RB [derived] given as a constant drop that only conducts forward; with RB
    # much smaller than RA the drop across RB stays below Vd
    timer = TIMERS[name]
    parts = Parts(capacitor="C0G", diode_drop_v=0.7)
    kw = dict(vcc=vcc, temperature=25.0, c=10e-9, ra=ra, rb=rb)
    m = model_times("astable-diode", timer, parts, Load(), kw)
    n = network("astable-diode", timer, parts, Load(), **kw)
    sim = simulate(n)
    assert diode_turns_off(n, sim[2])
    dev = deviations("astable-diode", m, sim)
    assert abs(dev["high_time_s"]) < TOLERANCE, dev


def test_astable_diode_low_supply_does_not_stall():
    # CMOS timer at 2.0 V [ds-cmos: supply 2-15 V]: VCC - Vd = 1.3 V < 2/3 VCC = 1.33 V, yet with
    # RA = RB a fixed-drop diode is off above 0.6 V on the capacitor, and RA+RB charge it
    # towards 2 V
    timer = TIMERS["cmos"]
    parts = Parts(capacitor="C0G", diode_drop_v=0.7)
    kw = dict(vcc=2.0, temperature=25.0, c=10e-9, ra=100e3, rb=100e3)
    n = network("astable-diode", timer, parts, Load(), **kw)
    sim = simulate(n)
    assert sim is not None and diode_turns_off(n, sim[2])
    m = model_times("astable-diode", timer, parts, Load(), kw)
    assert not int(m["flag_mask"]) & STALL
    assert abs(deviations("astable-diode", m, sim)["high_time_s"]) < TOLERANCE


# --- the missing-pulse detector against a pulse train ----------------------------------------
def simulate_train(n: Network, pulses: list[float], t_end: float):
    """A monostable whose capacitor each input pulse empties (a transistor across C, on for the
    short input pulse) and retriggers [book: the missing-pulse detector, e.g. Horowitz & Hill].
    The node starts where the discharge transistor holds it, ramps through R under Kirchhoff's
    current law between pulses, and the output falls (the alarm) a propagation delay after the
    node crosses the upper threshold. Returns the alarm time [s], or None if none comes before
    t_end."""
    v_idle = ((n.vcc / n.r + n.v_sat0 / n.r_sat - n.i_b) / (1.0 / n.r + 1.0 / n.r_sat + n.g_leak))
    edges = sorted(pulses) + [t_end]
    for start, stop in zip(edges[:-1], edges[1:]):
        res = phase(n, v_idle, True, stop - start)
        if res is not None and start + res[0] - n.t_pd < stop:
            return start + res[0]
    return None


@pytest.mark.parametrize("name,cap,r,c,vcc", [
    ("bipolar", "C0G", 100e3, 10e-9, 12.0),
    ("bipolar", "X7R", 330e3, 1e-6, 9.0),
    ("cmos", "polyester", 1e6, 2.2e-6, 5.0),
    ("cmos", "electrolytic", 220e3, 10e-6, 9.0),
])
def test_missing_pulse_detector_against_a_pulse_train(name, cap, r, c, vcc):
    timer, parts = TIMERS[name], Parts(capacitor=cap, capacitor_voltage_v=25.0)
    kw = dict(vcc=vcc, temperature=25.0, c=c, r=r)
    t_in = 0.3 * r * c                              # a legal input period, well inside ln 3 R C
    out = evaluate("missing-pulse", timer, parts, Load(), input_period=t_in, **kw)
    timeout = float(out["timeout_s"])
    assert not int(out["flag_mask"]) & FLAG_BITS["false-alarm"]
    n = network("monostable", timer, parts, Load(), **kw)
    # five pulses on time, then the sixth comes late: the alarm is one timeout after the fifth
    on_time = [k * t_in for k in range(5)]
    late = on_time[-1] + 1.5 * timeout
    alarm = simulate_train(n, on_time + [late], late + 3.0 * timeout)
    assert alarm is not None and alarm < late
    assert alarm - on_time[-1] == pytest.approx(timeout, rel=TOLERANCE)
    # no alarm while the pulses keep coming
    assert simulate_train(n, [k * t_in for k in range(20)], 20 * t_in) is None
    # the model's false-alarm flag where the input period exceeds the timeout: the simulation
    # alarms inside the first period, so every pulse would raise it
    slow = 1.05 * timeout
    out = evaluate("missing-pulse", timer, parts, Load(), input_period=slow, **kw)
    assert int(out["flag_mask"]) & FLAG_BITS["false-alarm"]
    assert float(out["timeout_margin_s"]) == pytest.approx(timeout - slow)
    assert simulate_train(n, [k * slow for k in range(3)], 3 * slow) < slow


def test_missing_pulse_timeout_is_the_textbook_ln3_rc_in_ideal_mode():
    # timeout = R C ln(VCC / (VCC - 2/3 VCC)) = ln 3 R C [book: any 555 text]
    out = evaluate("missing-pulse", TIMERS["bipolar"], Parts(), Load(), vcc=9.0, temperature=25.0,
                   r=470e3, c=np.array([1e-6, 4.7e-6]), input_period=0.2, ideal=True)
    assert np.allclose(out["timeout_s"], math.log(3.0) * 470e3 * np.array([1e-6, 4.7e-6]), rtol=1e-12)
