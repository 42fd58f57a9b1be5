"""Battery life, the swept load resistor and the LED current."""
from __future__ import annotations

import json

import numpy as np
import pytest
from openpyxl import load_workbook
from scipy.integrate import simpson

from sweep.analysis import analyse_designs
from sweep.engine import axis_values, battery_life_h, evaluate_block
from sweep.errors import InputError
from sweep.physics import Load, Parts, evaluate
from sweep.models import load_timer
from sweep.study import parse_study
from sweep.waveform import trace_of
from tests.cli_helpers import cli

BLINKER = """
[study]
title = "Blinker (invented example)"
circuit = "astable-diode"
timer = "cmos"
battery_capacity = "220mAh"
battery_usable = "80%"
[design]
ra = ["47k", "100k"]
rb = ["1M", "1.5M"]
c = ["1u"]
load_resistance = { series = "E12", min = "330", max = "1k" }
[conditions]
vcc = { min = 2.7, max = 3.1, steps = 3, nominal = 3.0 }
[load]
kind = "led"
forward_voltage = "1.9V"
[spec]
battery_life = { min = "20d" }
load_current = { min = "1mA" }
[analysis]
monte_carlo = 50
top = 3
"""


def test_battery_life_is_usable_capacity_over_the_mean_current():
    # life = capacity x usable share / mean current, exactly [derived: the definition]
    s = parse_study(BLINKER)
    assert s.battery_capacity_ah == pytest.approx(0.220) and s.battery_usable == pytest.approx(0.8)
    assert s.supply == "battery"                      # a capacity implies a battery supply
    assert s.spec[0].lo == pytest.approx(20 * 24)     # "20d" is 480 h
    d = axis_values(s.design, np.arange(s.n_designs))
    c = axis_values(s.conditions, np.arange(s.n_conditions))
    out = evaluate_block(s.case, d, c)
    np.testing.assert_allclose(out["battery_life_h"], 0.220 * 0.8 / out["supply_current_a"], rtol=1e-15)


def test_the_hand_figure_of_a_coin_cell_blinker():
    # 220 mAh at 0.277 mA is 794 h, about 33 days, by hand [derived: 220 / 0.277]
    s = parse_study(BLINKER.replace('battery_usable = "80%"\n', ""))
    life = battery_life_h(s.case, {"supply_current_a": np.array([0.277e-3]),
                              "idle_current_a": np.array([np.nan])})
    assert life[0] == pytest.approx(794.2, abs=0.1) and life[0] / 24 == pytest.approx(33.1, abs=0.05)


def test_a_monostable_drains_its_idle_current_while_it_waits():
    s = parse_study("""
[study]
circuit = "monostable"
battery_capacity = 2.4
[design]
r = "100k"
c = "10u"
""")
    out = evaluate_block(s.case, {"r": np.array([100e3]), "c": np.array([10e-6])}, {"vcc": np.array([9.0]),
                         "temperature": np.array([25.0])})
    life, idle = out["battery_life_h"].item(), out["idle_current_a"].item()
    assert life == pytest.approx(2.4 / idle, rel=1e-15)
    assert idle != pytest.approx(out["supply_current_a"].item())


def test_mean_current_matches_an_integral_of_the_waveform_supply_current():
    # ideal astable: the supply feeds the timer's quiescent current, the load, and the timing
    # network: (VCC - v(t)) / (RA + RB) while C charges, VCC / RA while the discharge pin holds
    # RA's end at ground [book: the astable's topology; Kirchhoff's current law]. Integrated over
    # one period along the waveform with scipy's Simpson rule, it must give the model's average.
    timer, parts = load_timer("bipolar"), Parts()
    ra, rb, c, vcc = 10e3, 47e3, 100e-9, 9.0
    out = evaluate("astable", timer, parts, Load(1e3), vcc=vcc, temperature=25.0, ra=ra, rb=rb,
                   c=c, ideal=True)
    p = {k: float(np.ravel(v)[0]) for k, v in out.items()}

    class S:
        circuit = "astable"
    t, v, vo = trace_of(S, p, n=4001)
    period = p["period_s"]
    idl = timer.idealised()
    hi_n = 4001
    th, vh = t[:hi_n], v[:hi_n]                      # first high phase
    tl = t[hi_n:2 * hi_n]                            # first low phase
    i_h = idl.quiescent_a(vcc, output_high=True) + (vcc - vh) / (ra + rb) + p["output_high_v"] / 1e3
    i_l = np.full(len(tl), idl.quiescent_a(vcc, output_high=False) + vcc / ra)
    charge = simpson(i_h, x=th) + simpson(i_l, x=tl)
    assert charge / period == pytest.approx(p["supply_current_a"], rel=1e-6)


@pytest.mark.parametrize("text,problem", [
    ('battery_capacity = "220mF"', "capacity"),
    ('battery_capacity = "-1Ah"', "capacity"),
    ('battery_usable = "80%"', "needs battery_capacity"),
])
def test_bad_battery_keys_name_the_key(text, problem):
    with pytest.raises(InputError) as e:
        parse_study(f'[study]\ncircuit = "astable"\n{text}\n[design]\nra = "1k"\nrb = "1k"\nc = "1n"\n', "s.toml")
    assert e.value.key.startswith("study.battery") and problem in e.value.problem


def test_battery_life_spec_needs_a_capacity_and_a_time_unit():
    base = '[study]\ncircuit = "astable"\n{}[design]\nra = "1k"\nrb = "1k"\nc = "1n"\n[spec]\nbattery_life = {{ min = {} }}\n'
    with pytest.raises(InputError, match="battery_capacity"):
        parse_study(base.format("", '"30d"'))
    with pytest.raises(InputError) as e:
        parse_study(base.format('battery_capacity = "1Ah"\n', '"30s"'))
    assert e.value.key == "spec.battery_life.min"
    assert parse_study(base.format('battery_capacity = "1Ah"\n', '"720h"')).spec[0].lo == 720
    assert parse_study(base.format('battery_capacity = "1Ah"\n', "100")).spec[0].lo == 100


@pytest.mark.parametrize("circuit", ["astable-diode", "astable-symmetric", "missing-pulse", "bistable"])
@pytest.mark.parametrize("timer_name,to", [("cmos", "ground"), ("bipolar", "ground"), ("bipolar", "supply")])
def test_a_swept_load_resistor_broadcasts_like_separate_loads(circuit, timer_name, to):
    # one evaluation over an axis of load resistors equals one evaluation per resistor
    timer, parts = load_timer(timer_name), Parts()
    rl = np.array([220.0, 470.0, 1000.0])[:, None]
    kw = dict(vcc=np.array([4.5, 5.0, 5.5])[None, :], temperature=25.0, ra=47e3, rb=1e6, r=100e3,
              c=1e-6, input_period=0.05)
    vf = 1.9 if to == "ground" else 0.0
    swept = evaluate(circuit, timer, parts, Load(forward_voltage_v=vf, to=to), load_resistance=rl, **kw)
    for i, r in enumerate(rl[:, 0]):
        one = evaluate(circuit, timer, parts, Load(r, forward_voltage_v=vf, to=to), **kw)
        for k in ("output_current_a", "supply_current_a", "output_high_v", "output_low_v", "period_s",
                  "timeout_s", "junction_temp_c"):
            np.testing.assert_allclose(np.broadcast_to(swept[k], (3, 3))[i], np.broadcast_to(one[k], (1, 3))[0],
                                       rtol=1e-13, equal_nan=True, err_msg=k)


def test_led_current_in_ideal_mode_is_ohms_law():
    # a rail-to-rail output drives the LED and its resistor: I = (VCC - Vf) / R [book: Ohm's law]
    timer, parts = load_timer("cmos"), Parts()
    rl = np.array([220.0, 330.0, 1000.0])
    out = evaluate("astable", timer, parts, Load(forward_voltage_v=2.0, kind="led"), vcc=5.0,
                   temperature=25.0, ra=10e3, rb=100e3, c=1e-6, load_resistance=rl, ideal=True)
    np.testing.assert_allclose(out["output_current_a"], (5.0 - 2.0) / rl, rtol=1e-12)


def test_load_current_spec_and_battery_life_rank_the_swept_resistor():
    s = parse_study(BLINKER)
    df = analyse_designs(s, 0, s.n_designs)
    # a bigger LED resistor: less LED current, longer battery life [derived]
    one = df[(df["ra_ohm"] == 47e3) & (df["rb_ohm"] == 1e6)].sort_values("load_resistance_ohm")
    assert np.all(np.diff(one["output_current_a_nom"]) < 0)
    assert np.all(np.diff(one["battery_life_h_nom"]) > 0)
    assert {"battery_life_h_wc_min", "battery_life_h_min", "battery_life_h_mc_mean"} <= set(df.columns)
    assert (df["battery_life_h_wc_min"] <= df["battery_life_h_nom"]).all()
    # the spec: at least 1 mA through the LED at every condition
    miss = df["output_current_a_min"] < 1e-3
    assert miss.any() and (df.loc[miss, "verdict"] == "spec miss").all()


@pytest.mark.slow
def test_the_summary_states_battery_life_and_the_cautions(tmp_path, capsys):
    study = tmp_path / "blinker.toml"
    study.write_text(BLINKER, encoding="utf-8")
    code, _, err = cli(["run", str(study), "--out", str(tmp_path / "out"), "-q"], capsys)
    assert code == 0, err
    wb = load_workbook(tmp_path / "out" / "blinker.xlsx", read_only=True)
    rows = {r[0]: r[1] for r in wb["Summary"].iter_rows(values_only=True) if r and r[0]}
    life = rows["Battery life"]
    assert "nominal" in life and "worst case" in life and "220 mAh x 80 % usable" in life
    cautions = [r[1] for r in wb["Summary"].iter_rows(values_only=True) if r and r[0] == "CAUTION"]
    assert any("children" in c and "primary cell" in c for c in cautions)
    rec = json.loads((tmp_path / "out" / "run.json").read_text())
    assert {"bom.csv", "waveform.csv"} <= set(rec["sha256"])


@pytest.mark.parametrize("load,key,words", [
    ('[load]\nkind = "led"\nresistance = "330"\n', "load.forward_voltage", "LED"),
    ('[load]\nresistance = "330"\n', "load.resistance", "swept"),
])
def test_bad_load_keys_name_the_key(load, key, words):
    text = ('[study]\ncircuit = "astable"\n[design]\nra = "1k"\nrb = "10k"\nc = "1u"\n'
            'load_resistance = ["220", "330"]\n' + load)
    if key == "load.forward_voltage":
        text = text.replace('load_resistance = ["220", "330"]\n', "")
    with pytest.raises(InputError) as e:
        parse_study(text, "s.toml")
    assert e.value.key == key and words in e.value.problem
