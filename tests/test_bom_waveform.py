"""The bill of materials (bom.csv, the Parts sheet) and the pick's waveforms (waveform.csv)."""
from __future__ import annotations

import csv
import math

import eseries
import numpy as np
import pandas as pd
import pytest
from openpyxl import load_workbook

from sweep import values as qv
from sweep.bom import BOM_COLUMNS
from sweep.physics import Load, Parts, evaluate
from sweep.models import load_timer
from sweep.study import parse_study
from sweep.waveform import WAVEFORM_COLUMNS, pick_waveform, trace_of
from tests.cli_helpers import cli_captured

STUDY = """
[study]
title = "Flasher (invented example)"
circuit = "astable-diode"
timer = "cmos"
[design]
ra = { series = "E12", min = "10k", max = "47k" }
rb = { series = "E6", min = "100k", max = "470k" }
c = ["1u"]
load_resistance = { series = "E12", min = "220", max = "470" }
[conditions]
vcc = { min = 4.5, max = 5.5, steps = 3 }
[load]
kind = "led"
forward_voltage = "2.0V"
[analysis]
monte_carlo = 0
top = 4
"""
# IEC 60063 [std] through the eseries package (a library timer-sweep did not write)
SERIES = {"E3": eseries.E3, "E6": eseries.E6, "E12": eseries.E12, "E24": eseries.E24,
          "E48": eseries.E48, "E96": eseries.E96, "E192": eseries.E192}


@pytest.fixture(scope="module")
def flasher(tmp_path_factory):
    """The outputs of one run of STUDY, shared by the tests of this file (read only)."""
    tmp = tmp_path_factory.mktemp("flasher")
    study = tmp / "flasher.toml"
    study.write_text(STUDY, encoding="utf-8")
    code, _, err = cli_captured(["run", str(study), "--out", str(tmp / "out"), "-q"])
    assert code == 0, err
    return tmp / "out"


def _in_series(value: float, name: str) -> bool:
    members = eseries.erange(SERIES[name], value / 1.5, value * 1.5)
    return any(math.isclose(m, value, rel_tol=1e-9) for m in members)


@pytest.mark.slow
def test_bom_csv_opens_and_lists_every_part(flasher):
    out = flasher
    with open(out / "bom.csv", newline="", encoding="utf-8") as f:
        rows = list(csv.DictReader(f))
    assert list(rows[0]) == BOM_COLUMNS
    df = pd.read_csv(out / "bom.csv")
    assert list(df.columns) == BOM_COLUMNS and len(df) == len(rows)
    designs = list(dict.fromkeys(df["design"]))
    assert len(designs) == 4                                   # [analysis] top = 4
    for d in designs:
        one = df[df["design"] == d]
        refs = set(one["reference"])
        # timing parts, the diode of astable-diode, the LED and its resistor, supply and
        # control-pin decoupling [cp], the timer
        assert {"RA", "RB", "C", "D1", "RL", "LED1", "CS", "CV", "U1"} == refs
        assert set(one["role"]) == {"timing", "diode", "load", "decoupling", "timer"}
        assert (one["quantity"] == 1).all()
        cs = one[one["reference"] == "CS"].iloc[0]
        cv = one[one["reference"] == "CV"].iloc[0]
        assert qv.parse_quantity(cs["rkm"], "F") == pytest.approx(100e-9)   # [cp]
        assert qv.parse_quantity(cv["rkm"], "F") == pytest.approx(10e-9)    # [cp]
        assert "V" in cs["rating"] and "W" in one[one["reference"] == "RA"].iloc[0]["rating"]
    # every resistor and capacitor value is an IEC 60063 member [std], read back from its RKM
    # code [std IEC 60062] and its value text
    valued = df[df["rkm"].notna()]
    assert len(valued) == 6 * 4                     # RA, RB, C, RL, CS, CV per design
    for _, r in valued.iterrows():
        unit = "F" if r["reference"].startswith("C") else "ohm"
        v = qv.parse_quantity(r["rkm"], unit)
        assert v == pytest.approx(qv.parse_quantity(r["value"].replace(" ", ""), unit), rel=1e-12)
        assert _in_series(v, r["series"]), (r["reference"], v, r["series"])
        assert _in_series(v, "E192") or _in_series(v, "E24")


@pytest.mark.slow
def test_parts_sheet_shows_the_bill_of_materials(flasher):
    out = flasher
    rows = list(load_workbook(out / "flasher.xlsx", read_only=True)["Parts"].iter_rows(values_only=True))
    head = list(rows[0])
    body = [r for r in rows[1:] if r[head.index("Design")] is not None]
    assert {"Role", "Qty", "Ref.", "RKM code", "Rating (margin)"} <= set(head)
    bom = pd.read_csv(out / "bom.csv")
    assert len(body) == len(bom)
    assert [r[head.index("Ref.")] for r in body] == list(bom["reference"])


def test_relay_load_gets_a_flyback_diode_and_no_resistor():
    s = parse_study("""
[study]
circuit = "monostable"
[design]
r = "100k"
c = "10u"
[load]
resistance = "400"
kind = "relay"
""")
    from sweep.bom import bill_of_materials
    from sweep.pick import worst_figures
    d = pd.DataFrame({"rank": [1], "design": [1], "r_ohm": [100e3], "c_f": [10e-6], "verdict": ["pass"]})
    bom = bill_of_materials(s, d, worst_figures(s, d.head(s.top)))
    assert {"K1", "D2"} <= set(bom["ref"]) and "RL" not in set(bom["ref"])
    assert "flyback" in bom.loc[bom["ref"] == "D2", "value_text"].iloc[0]


@pytest.mark.slow
def test_waveform_csv_has_both_conditions(flasher):
    out = flasher
    with open(out / "waveform.csv", newline="", encoding="utf-8") as f:
        assert next(csv.reader(f)) == WAVEFORM_COLUMNS
    w = pd.read_csv(out / "waveform.csv")
    assert set(w["condition"]) == {"nominal", "worst case"}
    for _, g in w.groupby("condition"):
        assert np.all(np.diff(g["time_s"]) >= 0)
    assert "Waveforms of the pick" in (out / "flasher.html").read_text(encoding="utf-8")


def _astable_point(ideal: bool, circuit="astable", capacitor="C0G"):
    timer = load_timer("bipolar")
    out = evaluate(circuit, timer, Parts(capacitor=capacitor, capacitor_voltage_v=16.0), Load(),
                   vcc=9.0, temperature=25.0, ra=10e3, rb=47e3, c=100e-9, ideal=ideal)
    return {k: float(np.ravel(v)[0]) for k, v in out.items()}


class _Circuit:
    def __init__(self, circuit):
        self.circuit = circuit


def test_ideal_waveform_follows_the_rc_law():
    # ideal astable: charge from VCC/3 toward VCC with tau = (RA + RB) C, discharge from 2/3 VCC
    # toward 0 V with tau = RB C [book: the RC law, e.g. Horowitz & Hill]
    p = _astable_point(True)
    n = 200
    t, v, vo = trace_of(_Circuit("astable"), p, n=n)
    vcc, c = 9.0, 100e-9
    t_h, t_l = p["high_time_s"], p["low_time_s"]
    assert t_h == pytest.approx(math.log(2) * 57e3 * c, rel=1e-12)
    picks = np.linspace(0, 6 * n - 1, 50).astype(int)             # 50 sampled instants
    for i in picks:
        cycle, k = divmod(i, 2 * n)
        local = t[i] - cycle * (t_h + t_l)
        if k < n:
            want = vcc - (vcc - vcc / 3) * math.exp(-local / (57e3 * c))
        else:
            want = (2 * vcc / 3) * math.exp(-(local - t_h) / (47e3 * c))
        assert v[i] == pytest.approx(want, rel=1e-9, abs=1e-12)
    assert np.all(v >= vcc / 3 - 1e-9) and np.all(v <= 2 * vcc / 3 + 1e-9)


@pytest.mark.parametrize("circuit,capacitor", [("astable", "C0G"), ("astable-diode", "X7R"),
                                                ("astable", "Y5V")])
def test_realistic_waveform_switches_at_the_model_times(circuit, capacitor):
    p = _astable_point(False, circuit, capacitor)
    t, v, vo = trace_of(_Circuit(circuit), p, n=2000)
    v_up, v_lo = 6.0, 3.0                          # 2/3 and 1/3 of 9 V [book]
    tpd = load_timer("bipolar").propagation_delay_s
    # the node passes a threshold only by the propagation delay's run-on [derived]
    run_on = 0.01 * (v_up - v_lo)
    assert np.all(v <= v_up + run_on) and np.all(v >= v_lo - run_on)
    # it crosses the upper threshold at the model's high time (less the run-on), the lower at
    # the end of the low time; the output switches exactly at the model's instants
    t_h, t_l = p["high_time_s"], p["low_time_s"]
    up = np.argmax(v >= v_up)
    assert t[up] == pytest.approx(t_h, abs=tpd + 2 * t_h / 2000)
    after = np.arange(len(t)) > up
    down = np.argmax(after & (v <= v_lo))
    assert t[down] == pytest.approx(t_h + t_l, abs=tpd + 2 * t_l / 2000)
    hi_time = np.sum(np.diff(t)[vo[:-1] == vo.max()])
    assert hi_time == pytest.approx(3 * t_h, rel=1e-9)


def test_monostable_waveform_is_one_pulse_and_recovery():
    s = parse_study('[study]\ncircuit = "monostable"\n[design]\nr = "100k"\nc = "1u"\n'
                    '[conditions]\nvcc = [5.0, 9.0, 15.0]\n[analysis]\nmonte_carlo = 0\n')
    d = pd.DataFrame({"rank": [1], "design": [1], "r_ohm": [100e3], "c_f": [1e-6]})
    tr = pick_waveform(s, d)
    nom = tr.table[tr.table["condition"] == "nominal"]
    high = nom["output_v"] > 1.0
    t = nom["time_s"].to_numpy()
    pw = t[high.to_numpy()].max() - t[high.to_numpy()].min()
    out = evaluate("monostable", s.timer, s.parts, s.load, vcc=10.0, temperature=25.0, r=100e3, c=1e-6)
    assert pw == pytest.approx(float(out["pulse_width_s"]), rel=1e-9)
    assert nom["capacitor_v"].iloc[-1] < 0.2                   # recovered: C emptied again
    assert tr.thresholds["nominal"][0] == pytest.approx(2 / 3 * 10.0)
    assert "5 V" in tr.described["worst case"] or "15 V" in tr.described["worst case"]
