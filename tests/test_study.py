"""Study files: every range form, defaults, and the values they parse to."""
from __future__ import annotations

import numpy as np
import pytest
import eseries

from sweep.errors import InputError
from sweep.study import load_study, parse_study, study_rows
from sweep.tomltext import rows_to_toml

BASE = """
[study]
circuit = "astable"
[design]
ra = "10k"
rb = "47k"
c = "100n"
"""


def test_range_forms_parse_to_the_published_values():
    s = parse_study("""
[study]
circuit = "astable"
[design]
ra = { series = "E12", min = "10k", max = "100k" }
rb = ["4k7", "10k", 22000]
c = { min = "1n", max = "1u", per_decade = 3 }
[conditions]
vcc = { min = 5, max = 15, steps = 5 }
temperature = -20
""", "t.toml")
    ax = {a.key: a for a in s.axes}
    # IEC 60063 E12 between 10k and 100k inclusive, cross-checked with the eseries package [std]
    expected = [float(v) for v in eseries.erange(eseries.E12, 10e3, 100e3 + 1)]
    assert np.allclose(ax["ra"].values, expected)
    assert ax["ra"].values[0] == 10e3 and ax["ra"].values[-1] == 100e3
    assert list(ax["rb"].values) == [4.7e3, 10e3, 22e3]           # IEC 60062 RKM 4k7 [std]
    # three per decade from 1 nF to 1 uF: 10 values, ratio 10^(1/3) [derived]
    assert len(ax["c"].values) == 10
    assert np.allclose(np.diff(np.log10(ax["c"].values)), 1 / 3)
    assert list(ax["vcc"].values) == [5, 7.5, 10, 12.5, 15]
    assert ax["vcc"].nominal == 10                                  # middle of the range
    assert ax["temperature"].values.tolist() == [-20.0]
    assert s.n_designs == len(expected) * 3 * 10 and s.n_conditions == 5


def test_defaults_typical_supply_25c_and_series_tolerance():
    s = parse_study(BASE.replace('ra = "10k"', 'ra = { series = "E24", min = "1k", max = "2k" }'), "t.toml")
    ax = {a.key: a for a in s.axes}
    assert ax["vcc"].values.tolist() == [s.timer.typical_v]
    assert ax["temperature"].values.tolist() == [25.0]
    assert s.parts.resistor_tolerance == 0.05     # E24 implies 5 % [std IEC 60063]
    s2 = parse_study(BASE + "[parts]\nresistor_tolerance = \"1%\"\n", "t.toml")
    assert s2.parts.resistor_tolerance == 0.01


def test_parts_units_and_percent():
    s = parse_study(BASE + """[parts]
resistor_tempco = "50ppm"
capacitor = "np0"
capacitor_voltage = "25V"
stray_capacitance = "3p"
""", "t.toml")
    assert s.parts.resistor_tempco_per_k == pytest.approx(50e-6)
    assert s.parts.capacitor == "C0G"            # EIA-198: NP0 is the older name of C0G [std]
    assert s.parts.capacitor_voltage_v == 25 and s.parts.stray_capacitance_f == pytest.approx(3e-12)


def test_spec_target_tolerance_and_min_max():
    s = parse_study(BASE + """[spec]
frequency = { target = "2kHz", tolerance = "10%" }
duty = { max = "60%" }
""", "t.toml")
    f, d = s.spec
    assert (f.lo, f.hi) == pytest.approx((1800, 2200))
    assert d.hi == pytest.approx(0.6) and d.lo == -np.inf


def test_study_sheet_rows_round_trip():
    s = load_study("studies/bike-light.toml")
    text, _ = rows_to_toml([(a, b, c) for a, b, c, _ in study_rows(s)])
    s2 = parse_study(text, "bike-light.xlsx")
    assert s2.digest == s.digest


@pytest.mark.parametrize("study", ["bike-light", "dosing-pump", "jig-latch", "buzzer"])
def test_examples_are_valid_and_say_they_are_invented(study):
    text = open(f"studies/{study}.toml", encoding="utf-8").read()
    assert "invented" in text.lower()
    s = load_study(f"studies/{study}.toml")
    assert s.n_points >= 1


def test_a_key_in_design_and_conditions_is_refused():
    with pytest.raises(InputError) as e:
        parse_study(BASE + "[conditions]\nra = \"22k\"\n", "t.toml")
    assert "both" in e.value.problem and e.value.key == "conditions.ra"


def test_typical_sigma_and_yield_target_parse_and_refuse_nonsense():
    s = parse_study(BASE, "t.toml")
    assert s.typical_sigma == 1.0 and s.yield_min is None          # the documented defaults
    s = parse_study(BASE + '[spec]\nyield = { min = "99%" }\n[analysis]\ntypical_sigma = 3\n', "t.toml")
    assert s.typical_sigma == 3.0 and s.yield_min == pytest.approx(0.99)
    assert s.spec == ()                    # a yield target is no limit on a point's output
    for bad, key in (('[analysis]\ntypical_sigma = 0\n', "typical_sigma"),
                     ('[analysis]\ntypical_sigma = "x"\n', "typical_sigma"),
                     ('[spec]\nyield = { min = 1.5 }\n', "yield.min"),
                     ('[spec]\nyield = { max = 0.9 }\n', "yield"),
                     ('[spec]\nyield = 0.99\n', "yield")):
        with pytest.raises(InputError) as e:
            parse_study(BASE + bad, "t.toml")
        assert e.value.key.endswith(key), (bad, e.value.key)


def test_a_timer_model_needs_maxima_at_least_typical(tmp_path):
    from pathlib import Path
    src = Path("sweep/models/bipolar.toml").read_text(encoding="utf-8")
    bad = tmp_path / "t.toml"
    bad.write_text(src.replace("accuracy_monostable_max = 0.03", "accuracy_monostable_max = 0.005"),
                   encoding="utf-8")
    with pytest.raises(InputError) as e:
        parse_study(BASE.replace('circuit = "astable"', f'circuit = "astable"\ntimer = "{bad}"'), "t.toml")
    assert e.value.key == "accuracy_monostable_max"
    bad.write_text(src.replace("accuracy_monostable_max = 0.03", ""), encoding="utf-8")
    with pytest.raises(InputError) as e:
        parse_study(BASE.replace('circuit = "astable"', f'circuit = "astable"\ntimer = "{bad}"'), "t.toml")
    assert e.value.key == "accuracy_monostable_max" and "missing" in e.value.problem
