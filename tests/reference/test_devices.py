"""The devices behind the timing: the Shockley diode, capacitor leakage, the discharge surge.

Each check names its outside reference: the textbook diode law, scipy's special functions and
root finder, the electrolytic leakage rule, and facts of the trade.
"""
from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.optimize import brentq
from scipy.special import wrightomega

from sweep.models import load_timer
from sweep.physics import FLAG_BITS, Load, Parts, evaluate
from sweep.physics.network import diode_feed_a
from sweep.physics.parts import (DIODES, leakage_conductance_s, leakage_max_a, saturation_at,
                                 thermal_voltage_v, wright_omega)

BIPOLAR, CMOS = load_timer("bipolar"), load_timer("cmos")
STALL = FLAG_BITS["timing-stalls"]
DISCHARGE = FLAG_BITS["discharge-current-over-limit"]


def test_thermal_voltage_is_kt_over_q():
    # [book: any semiconductor text] kT/q = 25.69 mV at 25 C, 25.26 mV at 20 C
    assert float(thermal_voltage_v(25.0)) == pytest.approx(0.025693, rel=1e-4)
    assert float(thermal_voltage_v(20.0)) == pytest.approx(0.025262, rel=1e-4)


def test_wright_omega_against_scipy():
    # [book: Corless & Jeffrey 2002] w + ln w = z; scipy.special.wrightomega is the reference
    z = np.concatenate([np.linspace(-700.0, 700.0, 20001), np.linspace(-5.0, 8.0, 20001)])
    ref = np.real(wrightomega(z))
    ok = ref > 1e-300
    assert np.max(np.abs(wright_omega(z)[ok] / ref[ok] - 1.0)) < 1e-13


@pytest.mark.parametrize("current_a", [1e-6, 10e-6, 1e-3])
def test_diode_feed_follows_the_shockley_law(current_a):
    # [book: Sedra & Smith, the diode equation I = Is (exp(V / n Vt) - 1)] with RB open the diode
    # carries all of RA's current: choose the voltage across RA + diode that the textbook law
    # gives for this current, and the model must return that current
    d = DIODES["silicon"]
    i_s, n_vt = d.saturation_current_a, d.ideality * float(thermal_voltage_v(25.0))
    v_diode = n_vt * math.log(current_a / i_s + 1.0)
    ra = 100e3 if current_a < 1e-4 else 1e3
    vcc, v_node = 12.0, 12.0 - current_a * ra - v_diode
    got = float(diode_feed_a(vcc, v_node, ra, 1e18, i_s, n_vt))
    assert got == pytest.approx(current_a, rel=1e-9)
    # small-signal silicon drops well under the 0.7 V of a fixed-drop model at these currents
    # [from memory: 0.35-0.5 V at microamps]
    assert v_diode < 0.62


@pytest.mark.parametrize("ra, rb, v_node", [(100e3, 1e6, 2.0), (1e6, 1e6, 5.0), (10e3, 47e3, 1.0),
                                            (4.7e6, 100e3, 3.0)])
def test_diode_feed_against_root_finding(ra, rb, v_node):
    # [outside library: scipy.optimize.brentq] Kirchhoff's current law at the discharge node,
    # (VCC - V_D)/RA = (V_D - v)/RB + Is (exp((V_D - v)/nVt) - 1), solved by root finding
    vcc = 9.0
    for name in DIODES:
        d = DIODES[name]
        i_s, n_vt = d.saturation_current_a, d.ideality * float(thermal_voltage_v(25.0))

        def kcl(vd):
            return (vcc - vd) / ra - (vd - v_node) / rb - i_s * math.expm1((vd - v_node) / n_vt)
        vd = brentq(kcl, v_node, vcc, xtol=1e-15, rtol=1e-15)
        want = (vcc - vd) / ra
        assert float(diode_feed_a(vcc, v_node, ra, rb, i_s, n_vt)) == pytest.approx(want, rel=1e-9)


def test_diode_drop_falls_about_2mv_per_kelvin():
    # [book: Sedra & Smith] at a fixed current a silicon junction's forward drop falls about
    # 2 mV/K; the saturation-current temperature rule must give that, within 1-2.5 mV/K
    d = DIODES["silicon"]
    drops = []
    for t in (15.0, 35.0):
        i_s, n_vt = float(saturation_at(d, t)), d.ideality * float(thermal_voltage_v(t))
        drops.append(n_vt * math.log(1e-3 / i_s + 1.0))
    slope = (drops[1] - drops[0]) / 20.0
    assert -2.5e-3 < slope < -1.0e-3
    assert float(saturation_at(d, 25.0)) == pytest.approx(d.saturation_current_a, rel=1e-12)


@pytest.mark.parametrize("timer", [BIPOLAR, CMOS], ids=["bipolar", "cmos"])
@pytest.mark.parametrize("ra, rb", [(100e3, 100e3), (470e3, 1e6), (1e6, 330e3), (220e3, 2.2e6)])
@pytest.mark.parametrize("vcc", [5.0, 9.0, 15.0])
def test_shockley_diode_lies_between_ideal_and_fixed_drop(timer, ra, rb, vcc):
    # [derived from the diode law] at the microamps of these timing resistors a real diode drops
    # more than an ideal one and less than 0.7 V, so its high time lies between the two
    kw = dict(vcc=vcc, temperature=25.0, c=100e-9, ra=ra, rb=rb)
    parts = Parts(capacitor="C0G")
    t = {}
    for name, p in (("ideal", Parts(capacitor="C0G", diode_drop_v=0.0)), ("real", parts),
                    ("fixed", Parts(capacitor="C0G", diode_drop_v=0.7))):
        t[name] = float(evaluate("astable-diode", timer, p, Load(), **kw)["high_time_s"])
    assert t["ideal"] < t["real"] < t["fixed"], t


def test_leakage_typical_is_below_the_maximum_and_falls_with_rating():
    # [cp] the 0.01 C V (or 3 uA) rule is a maximum at rated voltage; typical parts leak less,
    # and a higher-rated part worked at the same voltage leaks less still
    from sweep.physics.parts import capacitor_named
    cap = capacitor_named("electrolytic")
    c, v_work = 47e-6, 8.0
    g_typ = [float(leakage_conductance_s(cap, c, vr, 25.0, v_work_v=v_work)) for vr in (10, 16, 25, 50)]
    g_max = [float(leakage_conductance_s(cap, c, vr, 25.0, maximum=True)) for vr in (10, 16, 25, 50)]
    assert all(a > b for a, b in zip(g_typ, g_typ[1:]))
    assert all(t < m for t, m in zip(g_typ, g_max))
    # the maximum itself: 0.01 x 47 uF x 25 V = 11.75 uA at rated voltage, 20 C [cp]
    assert float(leakage_max_a(cap, c, 25.0, 20.0)) == pytest.approx(11.75e-6, rel=1e-12)
    # 3 uA floor for a small part [cp]
    assert float(leakage_max_a(cap, 1e-6, 16.0, 20.0)) == pytest.approx(3e-6, rel=1e-12)


@pytest.mark.parametrize("circuit", ["monostable", "astable"])
@pytest.mark.parametrize("c", [10e-6, 100e-6, 470e-6])
def test_higher_rated_electrolytic_never_times_longer(circuit, c):
    # property [cp: derating is the usual cure for leakage]: at the same working voltage a
    # higher-rated electrolytic never gives a longer nominal time or an earlier stall
    kw = dict(vcc=12.0, temperature=40.0, c=c)
    kw.update(dict(r=1e6) if circuit == "monostable" else dict(ra=470e3, rb=1e6))
    key = "pulse_width_s" if circuit == "monostable" else "high_time_s"
    last_t, last_stall = math.inf, True
    for vr in (16.0, 25.0, 35.0, 50.0, 63.0, 100.0):
        o = evaluate(circuit, BIPOLAR, Parts(capacitor="electrolytic", capacitor_voltage_v=vr),
                     Load(), **kw)
        stall = bool(int(o["flag_mask"]) & STALL)
        assert not (stall and not last_stall)
        if not stall:
            t = float(o[key])
            assert t <= last_t * (1 + 1e-12)
            last_t = t
        last_stall = stall


def test_relay_delay_with_an_electrolytic_is_feasible():
    # the scenario: a 30 s relay-on delay at 12 V with a 47 uF / 25 V electrolytic and about
    # 580 kOhm (1.1 R C = 30 s [book]); with typical leakage the nominal pulse lies within 10 %
    # of 1.1 R C at 25 C and the timer does not stall
    for r, c in ((580e3, 47e-6), (270e3, 100e-6)):
        o = evaluate("monostable", BIPOLAR, Parts(capacitor="electrolytic", capacitor_voltage_v=25.0),
                     Load(), vcc=12.0, temperature=25.0, c=c, r=r)
        assert not int(o["flag_mask"]) & STALL
        assert float(o["pulse_width_s"]) == pytest.approx(1.1 * r * c, rel=0.10)
    # the specification maximum, all the same, is a real risk: the worst case stalls or runs long
    p = Parts(capacitor="electrolytic", capacitor_voltage_v=25.0)
    g_max = float(leakage_conductance_s(p.technology, 47e-6, 25.0, 25.0, maximum=True))
    g_typ = float(leakage_conductance_s(p.technology, 47e-6, 25.0, 25.0, v_work_v=8.0))
    o = evaluate("monostable", BIPOLAR, p, Load(), vcc=12.0, temperature=25.0, c=47e-6, r=580e3,
                 leak_factor=g_max / g_typ)
    assert int(o["flag_mask"]) & STALL or float(o["pulse_width_s"]) > 1.3 * 1.1 * 580e3 * 47e-6


@pytest.mark.parametrize("timer", [BIPOLAR, CMOS], ids=["bipolar", "cmos"])
def test_monostable_discharge_surge(timer):
    # [derived: the capacitor at 2/3 VCC dumps into the saturation resistance] 22 uF at 8 V
    # pulls far more than the transistor's steady limit, for milliseconds, and is flagged; a
    # 10 nF dump lasts well under a microsecond and is not
    big = evaluate("monostable", timer, Parts(capacitor="electrolytic", capacitor_voltage_v=16.0),
                   Load(), vcc=8.0, temperature=25.0, c=22e-6, r=100e3)
    assert float(big["discharge_peak_a"]) > 0.09
    assert float(big["discharge_peak_a"]) <= timer.surge_current_a + 1e-3
    assert int(big["flag_mask"]) & DISCHARGE
    assert 1e-4 < float(big["discharge_dump_s"]) < 0.1
    small = evaluate("monostable", timer, Parts(capacitor="C0G"), Load(), vcc=15.0,
                     temperature=25.0, c=10e-9, r=100e3)
    assert not int(small["flag_mask"]) & DISCHARGE
    assert float(small["discharge_dump_s"]) < 1e-5


def test_bipolar_output_cannot_sink_a_load_to_the_supply():
    # [book: an emitter-follower output sources but cannot sink] with a resistive load to the
    # supply the bipolar output sits at the supply when high (nothing pulls it down), not 1.2 V
    # below it; a CMOS output stage holds its own level
    load = Load(resistance_ohm=1e3, to="supply")
    o = evaluate("astable", BIPOLAR, Parts(capacitor="C0G"), load, vcc=9.0, temperature=25.0,
                 c=10e-9, ra=10e3, rb=10e3)
    assert float(o["output_high_v"]) == pytest.approx(9.0, abs=1e-9)
    o = evaluate("astable", BIPOLAR, Parts(capacitor="C0G"), Load(), vcc=9.0, temperature=25.0,
                 c=10e-9, ra=10e3, rb=10e3)
    assert 7.5 < float(o["output_high_v"]) < 8.0        # about 1.2-1.5 V down unloaded [mem]
