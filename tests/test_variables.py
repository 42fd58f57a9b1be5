"""The registry of variables: every output the model returns and every flag it raises has an
entry, and every machine name carries its SI unit."""
from __future__ import annotations

import math

import pytest

from sweep.models import load_timer
from sweep.physics import CIRCUIT_PARTS, CIRCUITS, FLAG_BITS, FLAGS, Load, Parts, evaluate
from sweep.variables import AXES, FLAG_TEXT, OUTPUTS, VARIABLES, eng

#: model results that are not columns of any output (the waveform's phase figures and the
#: packed flags, which become the `flags` text) [DEVELOPERS.md, how data flows]
NOT_COLUMNS = {"flag_mask"}
WAVE_PREFIX = "wave_"

#: unit suffix of a machine name -> the symbol shown in headers: SI units and their symbols
#: [std: BIPM, The International System of Units, 9th edition, tables 2 and 4], plus the hour
#: [same brochure, table 8: non-SI units accepted for use with the SI]
SUFFIX_UNIT = {"ohm": "Ω", "f": "F", "v": "V", "s": "s", "a": "A", "w": "W", "hz": "Hz",
               "c": "°C", "h": "h", "j": "J"}


def model_outputs(circuit: str) -> set[str]:
    kw = {k: {"ra": 10e3, "rb": 47e3, "r": 100e3, "c": 100e-9}[k] for k in CIRCUIT_PARTS[circuit]}
    if circuit == "missing-pulse":
        kw["input_period"] = 1.0
    out = evaluate(circuit, load_timer("bipolar"), Parts(), Load(), vcc=9.0, temperature=25.0, **kw)
    return set(out)


@pytest.mark.parametrize("circuit", CIRCUITS)
def test_every_output_the_model_returns_has_a_variable(circuit):
    outputs = {k for k in model_outputs(circuit) if k not in NOT_COLUMNS and not k.startswith(WAVE_PREFIX)}
    assert outputs, circuit
    assert outputs <= set(VARIABLES), sorted(outputs - set(VARIABLES))
    assert outputs <= set(OUTPUTS), sorted(outputs - set(OUTPUTS))   # and a place in the tables


def test_every_flag_the_model_can_raise_has_a_code_and_a_text():
    assert list(FLAG_BITS) == list(FLAGS)                 # the same codes in the same order
    for code in FLAG_BITS:
        assert FLAG_TEXT.get(code, "").strip(), code
    # the codes are lower-case words joined by hyphens (stable, used in every output)
    assert all(code == code.lower() and " " not in code for code in FLAGS)
    # one bit each: a mask decodes to exactly the flags set in it
    bits = list(FLAG_BITS.values())
    assert len(set(bits)) == len(bits) and all(b & (b - 1) == 0 for b in bits)


@pytest.mark.parametrize("name", sorted(VARIABLES))
def test_a_machine_name_with_a_unit_suffix_shows_that_unit(name):
    suffix = name.rsplit("_", 1)[-1] if "_" in name else ""
    var = VARIABLES[name]
    if suffix in SUFFIX_UNIT:
        assert var.unit == SUFFIX_UNIT[suffix], (name, var.unit)
        assert var.header == f"{var.label} [{var.unit}]"
    if var.unit == "":
        assert var.header == var.label                    # no empty brackets


def test_every_sweepable_key_names_a_registered_column_of_its_unit():
    parse_unit = {"ohm": "Ω", "F": "F", "V": "V", "C": "°C", "s": "s"}
    for key, (column, unit) in AXES.items():
        assert column in VARIABLES, key
        assert VARIABLES[column].unit == parse_unit[unit], key


def test_eng_reads_values_as_a_person_would():
    # engineering notation: a power of ten that is a multiple of three with its SI prefix
    # [std: IEC 60027-1 / BIPM SI prefixes]; duty is a share shown in per cent
    assert eng(4700.0, "ra_ohm") == "4.7 kΩ" and eng(100e-9, "c_f") == "100 nF"
    assert eng(0.35, "duty") == "35.0 %"
    assert eng(math.nan, "frequency_hz") == "-" and eng(math.inf, "duty") == "-"
