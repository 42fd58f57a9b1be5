"""The registries agree with each other and with the model: every circuit provides its whole
interface, every output the model returns has a variable, every flag a text."""
from __future__ import annotations

from pathlib import Path

import pytest

from sweep.physics import FLAGS, REGISTRY, TIMING_PARTS
from sweep.starters import starter_text
from sweep.study import SPEC_COLUMNS, parse_study
from sweep.values import unit_symbol
from sweep.variables import AXES, FLAG_TEXT, OUTPUTS, REFS, STATS, VARIABLES

REFERENCE = Path(__file__).parent / "reference"
CIRCUITS = sorted(REGISTRY)


@pytest.mark.parametrize("name", CIRCUITS)
def test_every_circuit_provides_the_whole_interface(name):
    c = REGISTRY[name]
    assert c.name == name and c.title and callable(c.phases)
    assert set(c.parts) <= set(TIMING_PARTS)
    assert set(c.main_outputs) | set(c.after_main) <= set(OUTPUTS)
    assert set(c.spec_keys) <= set(SPEC_COLUMNS)
    assert set(c.conditions) <= set(AXES)
    assert c.starter is not None
    if c.timed:
        assert "c" in c.parts and c.main_outputs and c.textbook and c.trace is not None
        assert c.cycle_output in OUTPUTS and c.timer_band in ("astable", "monostable")
        assert c.input_resistor in c.parts and set(c.charging) <= set(c.parts)
        # the Check sheet checks every main output with a formula of the circuit's own
        assert set(c.main_outputs) <= set(c.check)
    # the textbook formulas' test names the circuit [book: the reference tests]
    assert f'"{name}"' in (REFERENCE / "test_textbook.py").read_text(encoding="utf-8")


@pytest.mark.parametrize("name", CIRCUITS)
def test_every_starter_is_a_valid_study_of_its_circuit(name):
    st = parse_study(starter_text(name), f"{name}.toml")
    assert st.circuit == name
    assert {a.key for a in st.design} >= set(REGISTRY[name].parts)


def test_every_flag_has_a_text_and_no_text_is_orphaned():
    assert set(FLAG_TEXT) == set(FLAGS)


def test_units_agree_between_parsing_and_display():
    for v in VARIABLES.values():
        if v.parse is not None:
            assert unit_symbol(v.parse) == v.unit, v.name
    assert AXES["ra"] == ("ra_ohm", "ohm") and AXES["temperature"] == ("temperature_c", "C")
    assert set(REFS) == set(TIMING_PARTS) | {"load_resistance"}


def test_every_per_design_figure_of_an_output_has_one_suffix():
    suffixes = [s for s, _ in STATS]
    assert len(set(suffixes)) == len(suffixes) == 7
    assert all(s.startswith("_") for s in suffixes)
