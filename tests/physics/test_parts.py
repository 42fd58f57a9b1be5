"""The study keys and command-line options of the diode, leakage and discharge-surge physics, end to
end: parsing, refusals, the `point` command and the surge caution."""
from __future__ import annotations

import json

import pytest

from sweep.reporting import discharge_surge_caution
from sweep.study import parse_study
from tests.cli_helpers import cli

DIODE_STUDY = """[study]
circuit = "astable-diode"
timer = "cmos"
[design]
ra = "470k"
rb = "1M"
c = "1u"
[conditions]
vcc = 5
[parts]
capacitor = "C0G"
{parts}
"""


@pytest.mark.parametrize("parts, words", [
    ('diode = "germanium"', ["parts.diode", "germanium", "silicon", "schottky"]),
    ('diode = "schottky"\ndiode_drop = "0.3V"', ["diode_drop", "diode", "not both"]),
    ('diode_saturation_current = "1n"\ndiode_drop = "0.3V"', ["diode_drop", "diode_saturation_current"]),
    ('diode_ideality = 7', ["diode_ideality", "0.8", "3"]),
    ('diode_saturation_current = "1"', ["diode_saturation_current"]),
    ('diode_saturation_current = "1nF"', ["diode_saturation_current"]),
])
def test_bad_diode_keys_are_refused(tmp_path, capsys, parts, words):
    path = tmp_path / "d.toml"
    path.write_text(DIODE_STUDY.format(parts=parts))
    code, out, err = cli(["check", str(path)], capsys)
    assert code == 2
    assert "Traceback" not in err
    for w in words:
        assert w in err, (w, err)


def test_diode_keys_reach_the_model():
    # a Schottky drops less than silicon forward, so its high time is shorter [book: a Schottky
    # barrier's saturation current is far higher]; a fixed 0.7 V drop gives the longest
    times = {}
    for name, parts in (("silicon", ""), ("schottky", 'diode = "schottky"'), ("fixed", 'diode_drop = "0.7V"'),
                        ("own", 'diode_saturation_current = "2.5n"\ndiode_ideality = 1.75')):
        st = parse_study(DIODE_STUDY.format(parts=parts), "d.toml")
        from sweep.engine import evaluate_block
        out = evaluate_block(st.case, {a.key: a.values for a in st.design},
                             {a.key: a.values for a in st.conditions}, with_spec=False)
        times[name] = float(out["high_time_s"].ravel()[0])
    assert times["schottky"] < times["silicon"] < times["fixed"]
    # explicit figures equal to the silicon preset give the silicon result
    assert times["own"] == pytest.approx(times["silicon"], rel=1e-12)


def test_point_takes_the_diode_options(capsys):
    base = ["point", "--circuit", "astable-diode", "--timer", "cmos", "--ra", "1M", "--rb", "1M",
            "--c", "100n", "--vcc", "5", "--json"]
    got = {}
    for name, extra in (("silicon", []), ("schottky", ["--diode", "schottky"]),
                        ("fixed", ["--diode-drop", "0.7"])):
        code, out, err = cli(base + extra, capsys)
        assert code == 0, err
        got[name] = json.loads(out)
    assert got["schottky"]["high_time_s"] < got["silicon"]["high_time_s"] < got["fixed"]["high_time_s"]
    # the Schottky's reverse leakage helps the discharge: a shorter low time
    assert got["schottky"]["low_time_s"] < got["silicon"]["low_time_s"]
    code, out, err = cli(base + ["--diode", "schottky", "--diode-drop", "0.7"], capsys)
    assert code == 2 and "not both" in err


def test_big_monostable_capacitor_gets_a_series_resistor_caution():
    # [derived] 22 uF at 8 V dumps ~0.3 mJ into the discharge transistor; the caution names the
    # resistor that keeps the peak near the steady limit: 5.33 V / 50 mA - 9.5 ohm = 97 ohm, so
    # the next E12 value, 100 ohm [IEC 60063]
    text = """[study]
circuit = "monostable"
timer = "bipolar"
[design]
r = "100k"
c = "22u"
[conditions]
vcc = 8
[parts]
capacitor = "electrolytic"
capacitor_voltage = "16V"
"""
    import pandas as pd
    st = parse_study(text, "m.toml")
    top = pd.DataFrame({"flags": ["discharge-current-over-limit"]})
    words = discharge_surge_caution(st, top)
    assert "100 Ω" in words and "series" in words and "discharge pin" in words
    assert discharge_surge_caution(st, pd.DataFrame({"flags": [""]})) == ""


def test_a_discharge_resistor_tames_the_dump_and_keeps_the_pulse():
    # [derived] 100 ohm in series with the discharge pin limits the 22 uF dump from 5.3 V to
    # about 50 mA and takes most of its energy; the pulse (set by R, C and the thresholds) moves
    # only through the idle voltage, by far less than 0.1 %
    from sweep.models import load_timer
    from sweep.physics import FLAG_BITS, Load, Parts, evaluate
    timer = load_timer("bipolar")
    over = FLAG_BITS["discharge-current-over-limit"]
    kw = dict(vcc=8.0, temperature=25.0, c=22e-6, r=100e3)
    bare = evaluate("monostable", timer, Parts(capacitor="electrolytic", capacitor_voltage_v=16.0),
                    Load(), **kw)
    tamed = evaluate("monostable", timer, Parts(capacitor="electrolytic", capacitor_voltage_v=16.0,
                                                discharge_resistor_ohm=100.0), Load(), **kw)
    assert int(bare["flag_mask"]) & over and not int(tamed["flag_mask"]) & over
    assert float(tamed["discharge_peak_a"]) < 0.06
    assert float(tamed["pulse_width_s"]) == pytest.approx(float(bare["pulse_width_s"]), rel=1e-3)


def test_discharge_resistor_is_for_the_monostable(tmp_path, capsys):
    path = tmp_path / "d.toml"
    path.write_text(DIODE_STUDY.format(parts='discharge_resistor = "100"'))
    code, out, err = cli(["check", str(path)], capsys)
    assert code == 2 and "discharge_resistor" in err and "monostable" in err
