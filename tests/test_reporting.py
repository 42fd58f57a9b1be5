"""Reporting: the Check rows, the pick's curves, the words of the Summary and the cautions,
checked against the textbook formulas, the standard series and the usual safety practice."""
from __future__ import annotations

import math

import eseries
import numpy as np
import pandas as pd
import pytest

from sweep.engine import axis_values
from sweep.reporting import (cautions, designs_for_people, discharge_surge_caution, life_text,
                             worst_case_misses)
from sweep.study import parse_study
from sweep.variables import eng

ASTABLE = """[study]
title = "reporting check (invented)"
circuit = "astable"
timer = "bipolar"
[design]
ra = ["1k", "4.7k", "10k"]
rb = ["10k", "47k"]
c = ["100n", "1u"]
[conditions]
vcc = { min = 6, max = 12, steps = 3 }
temperature = [0, 25, 50]
[spec]
frequency = { min = "10Hz", max = "500Hz" }
[analysis]
monte_carlo = 0
top = 12
"""

MONOSTABLE = """[study]
title = "reporting check (invented)"
circuit = "monostable"
timer = "cmos"
[design]
r = ["10k", "100k", "1M"]
c = ["1u", "10u"]
[conditions]
vcc = 9
[analysis]
monte_carlo = 0
top = 6
"""


def ranked(study) -> pd.DataFrame:
    """Every design of the study as a ranked table, rank = design number (enough for the
    functions under test, which read the part columns of the top rows)."""
    n = study.n_designs
    values = axis_values(study.design, np.arange(n))
    df = pd.DataFrame({"rank": np.arange(1, n + 1), "design": np.arange(1, n + 1)})
    for a in study.design:
        df[a.column] = values[a.key]
    df["verdict"] = "pass"
    df["flags"] = ""
    return df


def test_worst_case_misses_says_how_far_beyond_each_limit():
    st = parse_study(ASTABLE, "a.toml")
    best = pd.Series({"frequency_hz_wc_min": 9.0, "frequency_hz_wc_max": 550.0})
    words = worst_case_misses(st, best)
    # relative deviation from the limit: (9 - 10) / 10 = -10 %, (550 - 500) / 500 = +10 %
    assert len(words) == 2
    assert "down to" in words[0] and "-10.0 %" in words[0] and eng(10.0, "frequency_hz") in words[0]
    assert "up to" in words[1] and "+10.0 %" in words[1] and eng(500.0, "frequency_hz") in words[1]
    inside = pd.Series({"frequency_hz_wc_min": 10.0, "frequency_hz_wc_max": 500.0})
    assert worst_case_misses(st, inside) == []                 # on the limits is inside
    nan = pd.Series({"frequency_hz_wc_min": np.nan, "frequency_hz_wc_max": np.nan})
    assert len(worst_case_misses(st, nan)) == 2                # no figure is no proof


@pytest.mark.parametrize("hours,words", [(794.4, "794 h (33.1 days)"), (24_000, "24,000 h (1,000.0 days)"),
                                         (2.5, "2.5 h"), (math.nan, "-")])
def test_life_text_counts_24_hours_a_day(hours, words):
    assert life_text(hours) == words


def _with_load(load: str, extra: str = "") -> str:
    return MONOSTABLE.replace("[analysis]", f"{load}\n{extra}\n[analysis]")


@pytest.mark.parametrize("load,flyback,mains", [
    ('[load]\nresistance = "400"\nkind = "relay"', True, False),
    ('[load]\nresistance = "400"\nkind = "inductive"', True, False),
    ('[load]\nresistance = "400"\nkind = "mains-switching"', True, True),
    ('[load]\nresistance = "1k"\nkind = "resistive"', False, False),
    ("", False, False),
])
def test_cautions_follow_the_load(load, flyback, mains):
    # [cp] a coil switched off kicks back: a flyback diode across it protects the output;
    # mains wiring defers to local electrical codes and licensed practice
    st = parse_study(_with_load(load), "m.toml")
    text = " ".join(cautions(st, ranked(st)))
    assert ("flyback diode" in text) == flyback
    assert ("local electrical codes" in text and "licensed" in text) == mains
    assert "build and measure" in text                          # the model's own caution, always


def test_a_polarised_capacitor_gets_its_polarity_caution():
    plain = parse_study(MONOSTABLE, "m.toml")
    polar = parse_study(_with_load("", '[parts]\ncapacitor = "electrolytic"\ncapacitor_voltage = "16V"'), "m.toml")
    assert not any("polarity" in c for c in cautions(plain, ranked(plain)))
    assert any("polarity" in c for c in cautions(polar, ranked(polar)))


@pytest.mark.parametrize("vcc", [5.0, 9.0, 15.0])
def test_the_surge_resistor_is_ohms_law_rounded_up_to_e12(vcc):
    st = parse_study(MONOSTABLE.replace("vcc = 9", f"vcc = {vcc}").replace('timer = "cmos"', 'timer = "bipolar"'), "m.toml")
    t = st.timer
    # R = V_threshold / I_limit - R_sat [Ohm's law], the next IEC 60063 E12 value up, from the
    # eseries package
    need = t.threshold_fraction * vcc / t.discharge_max_a - t.saturation_ohm
    r = next(v for v in eseries.erange(eseries.E12, need, 10 * need) if v >= need * (1 - 1e-9))
    words = discharge_surge_caution(st, pd.DataFrame({"flags": ["discharge-current-over-limit"]}))
    assert f"about {eng(r, 'ra_ohm')} in series" in words


def test_the_designs_table_puts_rank_parts_and_verdict_first():
    st = parse_study(ASTABLE, "a.toml")
    designs = ranked(st)
    designs["yield"] = np.nan
    out = designs_for_people(st, designs)
    assert list(out.columns[:6]) == ["rank", "design", "ra_ohm", "rb_ohm", "c_f", "verdict"]
    assert list(out["design"]) == list(designs["design"])          # rows as given, none lost
