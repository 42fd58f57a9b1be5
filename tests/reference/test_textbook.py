"""Ideal mode against the textbook 555 formulas.

Sources: the RC law and the 555 timing formulas are [book: Sedra & Smith, *Microelectronic
Circuits*; Horowitz & Hill, *The Art of Electronics*, oscillators and timers]. The diode-across-RB
figures are [derived] from the same RC law. In ideal mode (every non-ideality removed) timer-sweep must reproduce them to rounding error, so the tolerance is 1e-9
relative: a wrong constant, a swapped resistor or a stray non-ideality is far larger than that.
"""
import math
from dataclasses import replace

import numpy as np
import pytest

from sweep.models import load_timer
from sweep.physics import CIRCUIT_PARTS, Load, Parts, evaluate

LN2 = math.log(2.0)
LN3 = math.log(3.0)
N = 400          # random designs per check
RTOL = 1e-9      # rounding error only

TIMERS = {name: load_timer(name) for name in ("bipolar", "cmos")}


def log_uniform(rng, lo, hi, n):
    return np.exp(rng.uniform(math.log(lo), math.log(hi), n))


def designs(name, seed):
    """Random designs: R 1k-10M and C 100p-1000u log-uniform, VCC inside the timer's range,
    temperature anywhere in -40..105 C (ideal mode ignores it)."""
    rng = np.random.default_rng(seed)
    timer = TIMERS[name]
    return dict(ra=log_uniform(rng, 1e3, 10e6, N), rb=log_uniform(rng, 1e3, 10e6, N),
                r=log_uniform(rng, 1e3, 10e6, N), c=log_uniform(rng, 100e-12, 1000e-6, N),
                vcc=rng.uniform(timer.min_v, timer.max_v, N),
                temperature=rng.uniform(-40.0, 105.0, N),
                # a control voltage between a third and nine tenths of the supply
                cv_frac=rng.uniform(0.35, 0.9, N),
                capacitor=rng.choice(["X7R", "electrolytic", "C0G", "Y5V", "polyester"]))


def ideal(circuit, name, d, *, parts=None, load=Load(), control_voltage=np.nan):
    keys = tuple(k for k in CIRCUIT_PARTS[circuit] if k != "c")
    return evaluate(circuit, TIMERS[name], parts or Parts(capacitor=str(d["capacitor"])), load,
                    vcc=d["vcc"], temperature=d["temperature"], c=d["c"],
                    control_voltage=control_voltage, ideal=True, **{k: d[k] for k in keys})


def assert_close(got, want):
    np.testing.assert_allclose(got, want, rtol=RTOL, atol=0.0)


TIMER_NAMES = pytest.mark.parametrize("name", ["bipolar", "cmos"])


@TIMER_NAMES
def test_astable(name):
    # [book] tH = ln2 (RA+RB) C, tL = ln2 RB C, f = 1/(ln2 (RA+2RB) C), duty = (RA+RB)/(RA+2RB)
    d = designs(name, 1)
    o = ideal("astable", name, d)
    ra, rb, c = d["ra"], d["rb"], d["c"]
    assert_close(o["high_time_s"], LN2 * (ra + rb) * c)
    assert_close(o["low_time_s"], LN2 * rb * c)
    assert_close(o["period_s"], LN2 * (ra + 2 * rb) * c)
    assert_close(o["frequency_hz"], 1.0 / (LN2 * (ra + 2 * rb) * c))
    assert_close(o["duty"], (ra + rb) / (ra + 2 * rb))
    # [book] 1/ln2 = 1.443: the "1.44/((RA+2RB) C)" rule of thumb
    assert np.all(np.round(o["frequency_hz"] * (ra + 2 * rb) * c, 3) == 1.443)
    assert np.all(o["duty"] > 0.5)


@TIMER_NAMES
def test_astable_with_control_voltage(name):
    # [book] tH = (RA+RB) C ln((VCC - Vc/2)/(VCC - Vc)), tL = RB C ln2
    d = designs(name, 2)
    vc = d["cv_frac"] * d["vcc"]
    o = ideal("astable", name, d, control_voltage=vc)
    ra, rb, c, vcc = d["ra"], d["rb"], d["c"], d["vcc"]
    t_h = (ra + rb) * c * np.log((vcc - vc / 2) / (vcc - vc))
    assert_close(o["high_time_s"], t_h)
    assert_close(o["low_time_s"], LN2 * rb * c)
    assert_close(o["frequency_hz"], 1.0 / (t_h + LN2 * rb * c))


@TIMER_NAMES
def test_astable_diode_ideal(name):
    # [derived] diode across RB with zero drop: charge through RA, discharge through RB
    d = designs(name, 3)
    o = ideal("astable-diode", name, d)
    assert_close(o["high_time_s"], LN2 * d["ra"] * d["c"])
    assert_close(o["low_time_s"], LN2 * d["rb"] * d["c"])
    assert_close(o["duty"], d["ra"] / (d["ra"] + d["rb"]))


@TIMER_NAMES
@pytest.mark.parametrize("load", [Load(), Load(resistance_ohm=1e3), Load(resistance_ohm=470.0,
                                                                       to="supply")])
def test_astable_symmetric_ideal(name, load):
    # [derived] one resistor from a rail-to-rail output: tH = tL = ln2 R C, duty 0.5
    d = designs(name, 4)
    o = ideal("astable-symmetric", name, d, load=load)
    assert_close(o["high_time_s"], LN2 * d["r"] * d["c"])
    assert_close(o["low_time_s"], LN2 * d["r"] * d["c"])
    assert_close(o["duty"], np.full(N, 0.5))


@TIMER_NAMES
def test_monostable(name):
    # [book] t = ln3 R C; with a control voltage t = R C ln(VCC/(VCC - Vc))
    d = designs(name, 5)
    o = ideal("monostable", name, d)
    assert_close(o["pulse_width_s"], LN3 * d["r"] * d["c"])
    assert_close(o["high_time_s"], LN3 * d["r"] * d["c"])
    vc = d["cv_frac"] * d["vcc"]
    o = ideal("monostable", name, d, control_voltage=vc)
    assert_close(o["pulse_width_s"], d["r"] * d["c"] * np.log(d["vcc"] / (d["vcc"] - vc)))


def test_one_point_one_rc_is_0_13_percent_high():
    # [book] ln3 = 1.0986; the rule of thumb "1.1 RC" is 0.13 % high
    o = evaluate("monostable", TIMERS["bipolar"], Parts(), Load(), vcc=9.0, temperature=25.0,
                 r=100e3, c=1e-6, ideal=True)
    assert round(float(o["pulse_width_s"]) / (100e3 * 1e-6), 4) == 1.0986
    assert round(100.0 * (1.1 * 100e3 * 1e-6 / float(o["pulse_width_s"]) - 1.0), 2) == 0.13


def no_nonidealities(timer, parts):
    """The realistic model with every non-ideality switched off except the diode drop."""
    timer = replace(timer, threshold_current_a=0.0, trigger_current_a=0.0, saturation_v=0.0,
                    saturation_ohm=0.0, propagation_delay_s=0.0)
    parts = replace(parts, capacitor="C0G", resistor_tempco_per_k=0.0, stray_capacitance_f=0.0,
                    dc_bias_loss=0.0, diode_drop_v=0.7)
    return timer, parts


@TIMER_NAMES
@pytest.mark.parametrize("vcc, ratio", [(5.0, 1.45), (9.0, 1.20), (15.0, 1.11)])
def test_diode_drop_is_not_negligible(name, vcc, ratio):
    # [derived from the RC law] with Vd = 0.7 V, tH = RA C ln((VCC-Vd-Vc/2)/(VCC-Vd-Vc))
    # is 1.45x ln2 RA C at 5 V, 1.20x at 9 V, 1.11x at 15 V
    timer, parts = no_nonidealities(TIMERS[name], Parts())
    ra, rb, c = 10e3, 100e3, 100e-9     # C0G: its 10 GOhm insulation is far above RA
    o = evaluate("astable-diode", timer, parts, Load(), vcc=vcc, temperature=25.0, ra=ra, rb=rb,
                 c=c)
    got = float(o["high_time_s"]) / (LN2 * ra * c)
    assert round(got, 2) == ratio
    # the discharge side keeps the textbook ln2 RB C (C0G insulation, 5 GOhm here, moves it
    # by RB/R_ins = 2e-5)
    assert float(o["low_time_s"]) == pytest.approx(LN2 * rb * c, rel=1e-4)


@TIMER_NAMES
def test_missing_pulse_timeout(name):
    # [book] the missing-pulse detector times out as the monostable's pulse, ln3 R C after the
    # last input pulse; with a control voltage R C ln(VCC/(VCC - Vc))
    d = designs(name, 11)
    timer = TIMERS[name]
    kw = dict(vcc=d["vcc"], temperature=d["temperature"], c=d["c"], r=d["r"], ideal=True)
    o = evaluate("missing-pulse", timer, Parts(capacitor=str(d["capacitor"])), Load(),
                 input_period=1e-9, **kw)
    assert_close(o["timeout_s"], LN3 * d["r"] * d["c"])
    vc = d["cv_frac"] * d["vcc"]
    o = evaluate("missing-pulse", timer, Parts(capacitor=str(d["capacitor"])), Load(),
                 input_period=1e-9, control_voltage=vc, **kw)
    assert_close(o["timeout_s"], d["r"] * d["c"] * np.log(d["vcc"] / (d["vcc"] - vc)))


@TIMER_NAMES
def test_bistable_drives_its_load_by_ohms_law(name):
    # [book: Ohm's law] an ideal output high sits at the supply, so a load to ground carries
    # VCC / RL, and the latch draws that on top of its quiescent current
    d = designs(name, 13)
    timer = TIMERS[name]
    rl = log_uniform(np.random.default_rng(14), 100.0, 100e3, N)
    o = evaluate("bistable", timer, Parts(), Load(resistance_ohm=1.0), vcc=d["vcc"],
                 temperature=d["temperature"], load_resistance=rl, ideal=True)
    assert_close(o["output_high_v"], d["vcc"])
    assert_close(o["output_current_a"], d["vcc"] / rl)
    assert_close(o["supply_current_a"],
                 np.maximum(timer.quiescent_a(d["vcc"], output_high=True) + d["vcc"] / rl,
                            timer.quiescent_a(d["vcc"], output_high=False)))
