"""Design traps a timer-sweep user must be warned about, each as a flag on the point.

The limits are typical datasheet figures [ds-bip]/[ds-cmos] and common practice [cp], as the timer
files and parts data state them; each check also has a near neighbour that must NOT be flagged, so a
flag that is always on (or always off) fails.
"""
import math

import numpy as np
import pytest

from sweep.models import load_timer
from sweep.physics import Load, Parts, evaluate, flag_names

BIPOLAR = load_timer("bipolar")
CMOS = load_timer("cmos")


def flags(circuit="astable", timer=BIPOLAR, parts=Parts(), load=Load(), **kw):
    kw.setdefault("vcc", 9.0)
    kw.setdefault("temperature", 25.0)
    kw.setdefault("c", 10e-9)
    if circuit in ("astable", "astable-diode"):
        kw.setdefault("ra", 10e3)
        kw.setdefault("rb", 47e3)
    elif circuit != "bistable":
        kw.setdefault("r", 47e3)
    out = evaluate(circuit, timer, parts, load, **kw)
    return set(flag_names(int(out["flag_mask"]))), {k: float(v) for k, v in out.items()}


def test_a_sound_design_has_no_flags():
    # reference point for the neighbours below: 9 V, 10k/47k/10n, 25 C, no load
    assert flags()[0] == set()
    assert flags("monostable", CMOS, vcc=5.0)[0] == set()


def test_tiny_ra_at_15_v():
    # [cp] minimum RA about 1 kOhm, from keeping the discharge current near 15 mA at 15 V;
    # [ds-bip] with RA = 100 Ohm the transistor sinks (15 V - V_sat)/100 Ohm, about 140 mA
    got, out = flags(vcc=15.0, ra=100.0, rb=10e3)
    assert {"resistor-too-small", "discharge-current-over-limit"} <= got
    assert out["discharge_peak_a"] > 0.1
    got, _ = flags(vcc=15.0, ra=4.7e3, rb=10e3)
    assert not {"resistor-too-small", "discharge-current-over-limit"} & got


def test_huge_timing_resistance_on_bipolar_timer():
    # [ds-bip] R_max = (VCC - Vc)/I_th,max = (5 - 3.33) V / 0.25 uA = 6.7 MOhm at 5 V, and
    # conservative practice halves it [cp]: 50 MOhm is far beyond, 2 MOhm is fine
    # the rule at its edge, from the published figures: half of 6.67 MOhm is 3.33 MOhm at 5 V
    assert "resistance-too-large" not in flags("monostable", vcc=5.0, r=3.2e6, c=1e-9)[0]
    assert "resistance-too-large" in flags("monostable", vcc=5.0, r=3.5e6, c=1e-9)[0]
    got, _ = flags(vcc=5.0, ra=25e6, rb=25e6, c=1e-9)
    assert "resistance-too-large" in got
    assert "resistance-too-large" not in flags(vcc=5.0, ra=1e6, rb=1e6, c=1e-9)[0]
    # at 15 V the same rule allows 20 MOhm (10 MOhm halved) [ds-bip]
    assert "resistance-too-large" not in flags(vcc=15.0, ra=4e6, rb=4e6, c=1e-9)[0]
    assert "resistance-too-large" in flags("monostable", vcc=5.0, r=50e6, c=1e-9)[0]


def test_huge_timing_resistance_is_fine_on_cmos_timer():
    # [ds-cmos] input currents about 10 pA: timing resistors of tens of MOhm are usable
    got, _ = flags(timer=CMOS, vcc=5.0, ra=25e6, rb=25e6, c=1e-9)
    assert "resistance-too-large" not in got


@pytest.mark.parametrize("circuit", ["astable", "astable-diode", "astable-symmetric",
                                     "monostable"])
def test_leaky_electrolytic_stalls(circuit):
    # [cp] aluminium electrolytic leakage up to 0.01 C V: 1000 uF x 16 V -> 160 uA at rated
    # voltage, i.e. about 100 kOhm in parallel with C. Through 1 MOhm the node settles near
    # VCC x 0.1/1.1, far below 2/3 VCC: the timer never switches
    from sweep.physics.parts import capacitor_named, leakage_max_a
    electrolytic = capacitor_named("electrolytic")
    assert leakage_max_a(electrolytic, 1000e-6, 16.0, 20.0) == pytest.approx(160e-6)   # [cp]
    assert leakage_max_a(electrolytic, 1e-6, 16.0, 20.0) == pytest.approx(3e-6)        # the floor [cp]
    parts = Parts(capacitor="electrolytic", capacitor_voltage_v=16.0)
    r = dict(ra=500e3, rb=500e3) if circuit in ("astable", "astable-diode") else dict(r=1e6)
    got, out = flags(circuit, parts=parts, vcc=12.0, c=1000e-6, **r)
    assert "timing-stalls" in got
    assert math.isnan(out["high_time_s"])
    # a 1 uF part leaks only its 3 uA floor (about 5 MOhm at 16 V): 100 kOhm times fine
    r = dict(ra=50e3, rb=50e3) if circuit in ("astable", "astable-diode") else dict(r=100e3)
    got, out = flags(circuit, parts=parts, vcc=12.0, c=1e-6, **r)
    assert "timing-stalls" not in got and out["high_time_s"] > 0


def test_supply_above_absolute_maximum():
    # [ds-bip] 18 V absolute maximum, 16 V recommended maximum
    assert {"supply-above-abs-max", "supply-above-max"} <= flags(vcc=20.0)[0]
    got = flags(vcc=17.0)[0]
    assert "supply-above-max" in got and "supply-above-abs-max" not in got
    assert not {"supply-above-max", "supply-above-abs-max"} & flags(vcc=15.0)[0]
    # [ds-bip] 4.5 V recommended minimum; [ds-cmos] 2 V
    assert "supply-below-min" in flags(vcc=3.0)[0]
    assert "supply-below-min" not in flags(timer=CMOS, vcc=3.0)[0]


@pytest.mark.parametrize("to", ["ground", "supply"])
def test_ten_ohm_load(to):
    # [ds-bip] output current +-200 mA; 10 Ohm at 9 V asks for several hundred mA
    got, out = flags(load=Load(resistance_ohm=10.0, to=to))
    assert "output-current-over-limit" in got
    assert out["output_current_a"] > 0.2
    got, out = flags(load=Load(resistance_ohm=1e3, to=to))
    assert "output-current-over-limit" not in got and 0 < out["output_current_a"] < 0.01


def test_cmos_output_sources_little():
    # [ds-cmos] the output sources only about 10 mA: 470 Ohm at 12 V is too much for it,
    # while a bipolar timer drives the same load easily [ds-bip]
    load = Load(resistance_ohm=470.0)
    assert "output-current-over-limit" in flags(timer=CMOS, vcc=12.0, load=load)[0]
    assert "output-current-over-limit" not in flags(vcc=12.0, load=load)[0]


def test_minimum_capacitor():
    # [cp] below about 100 pF stray capacitance and delays dominate the timing
    assert "capacitor-too-small" in flags(c=47e-12)[0]
    assert "capacitor-too-small" not in flags(c=100e-12)[0]
    assert "capacitor-too-small" in flags("monostable", c=22e-12)[0]


def test_temperature_out_of_range():
    # [cp] generic operating ambient -40 to +105 C
    assert "temperature-out-of-range" in flags(temperature=125.0)[0]
    assert "temperature-out-of-range" in flags(temperature=-55.0)[0]
    assert "temperature-out-of-range" not in flags(temperature=105.0)[0]
    assert "temperature-out-of-range" not in flags(temperature=-40.0)[0]


def test_one_megahertz_astable():
    # [mem] practical top frequency of a bipolar timer 100-500 kHz; [ds-cmos] CMOS up to about
    # 2 MHz. RA = RB = 1 kOhm with 470 pF is 1/(ln2 x 3 kOhm x 470 pF) = 1.02 MHz ideal [book]
    kw = dict(vcc=9.0, ra=1e3, rb=1e3, c=470e-12)
    textbook = evaluate("astable", BIPOLAR, Parts(), Load(), temperature=25.0, ideal=True, **kw)
    assert float(np.ravel(textbook["frequency_hz"])[0]) == pytest.approx(1.02e6, rel=5e-3)
    got, out = flags(**kw)
    assert "frequency-too-high" in got
    assert out["frequency_hz"] > 500e3
    # run-on past each threshold (about 100 ns per transition [mem]) slows it down
    assert out["frequency_hz"] < 1.0 / (math.log(2) * 3e3 * 470e-12)
    assert "frequency-too-high" not in flags(timer=CMOS, **kw)[0]
    assert "frequency-too-high" not in flags(ra=10e3, rb=10e3, c=4.7e-9)[0]   # 10 kHz


def test_junction_too_hot():
    # [ds-bip] theta_JA 85-100 C/W (DIP-8), T_j max 150 C. A 75 Ohm load at 16 V draws about
    # 180 mA with about 2.3 V across the output stage (1.7 V at 100 mA, 2.5 V at 200 mA), i.e.
    # 0.4 W, plus 16 V x about 10 mA quiescent: near 0.58 W, a rise of about 55-60 K
    # [derived: the supply current drawn by the timing network]
    load = Load(resistance_ohm=75.0)
    kw = dict(vcc=16.0, r=100e3, c=1e-6, load=load)
    got, out = flags("monostable", temperature=105.0, **kw)
    assert "junction-too-hot" in got
    assert "output-current-over-limit" not in got        # the heat, not the current, is the trap
    assert 45.0 < out["junction_temp_c"] - 105.0 < 70.0
    got, out = flags("monostable", temperature=25.0, **kw)
    assert "junction-too-hot" not in got
    # no load at the same hot ambient: only the quiescent 0.15 W, about 15 K
    got, out = flags("monostable", temperature=105.0, vcc=16.0, r=100e3, c=1e-6)
    assert "junction-too-hot" not in got and out["junction_temp_c"] < 130.0


def test_flags_on_a_grid_match_points():
    # the mask is per point: one broadcast call equals separate calls [derived]
    vcc = np.array([5.0, 9.0, 20.0])
    ra = np.array([[100.0], [10e3]])
    out = evaluate("astable", BIPOLAR, Parts(), Load(), vcc=vcc, temperature=25.0, c=10e-9,
                   ra=ra, rb=47e3)
    for i in range(2):
        for j in range(3):
            single = evaluate("astable", BIPOLAR, Parts(), Load(), vcc=vcc[j], temperature=25.0,
                              c=10e-9, ra=ra[i, 0], rb=47e3)
            assert int(out["flag_mask"][i, j]) == int(single["flag_mask"])
