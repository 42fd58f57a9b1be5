"""Standard values and quantity text checked against IEC 60063, IEC 60062, the SI brochure and
the `eseries` package (a library timer-sweep did not write)."""
import math

import eseries
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from sweep.values import (SERIES, SERIES_TOLERANCE, format_eng, parse_quantity,
                          parse_rkm_tolerance, rkm_code, series_of, series_values)

NAMES = ["E3", "E6", "E12", "E24", "E48", "E96", "E192"]
ESERIES_KEY = {n: getattr(eseries, n) for n in NAMES}


def as_int(name):
    """The series as whole numbers, 2 figures (E3..E24) or 3 figures (E48..E192)."""
    scale = 10 if name in ("E3", "E6", "E12", "E24") else 100
    return [round(m * scale) for m in SERIES[name]]


# --- IEC 60063 -------------------------------------------------------------------------------
def test_printed_tables():
    # [std IEC 60063] printed values of the standard's tables
    assert as_int("E6") == [10, 15, 22, 33, 47, 68]
    assert as_int("E12") == [10, 12, 15, 18, 22, 27, 33, 39, 47, 56, 68, 82]
    assert as_int("E24") == [10, 11, 12, 13, 15, 16, 18, 20, 22, 24, 27, 30,
                             33, 36, 39, 43, 47, 51, 56, 62, 68, 75, 82, 91]
    assert as_int("E3") == [10, 22, 47]                      # [std IEC 60063]
    assert SERIES["E12"][-1] == 8.2 and SERIES["E24"][11] == 3.0  # exact floats, not 3.0000001


@pytest.mark.parametrize("name", NAMES)
def test_series_match_eseries_package(name):
    # [outside library: eseries] eseries.series returns the same figures as whole numbers
    assert as_int(name) == list(eseries.series(ESERIES_KEY[name]))
    assert all(1 <= m < 10 for m in SERIES[name])
    assert list(SERIES[name]) == sorted(SERIES[name])


def test_series_structure():
    # [std IEC 60063] E192 index 185 is 920 (the formula gives 919); counts; nesting
    assert SERIES["E192"][185] == 9.20
    assert SERIES["E192"][185] != round(10 ** (185 / 192), 2)    # not the formula's 9.19
    for name in NAMES:
        assert len(SERIES[name]) == int(name[1:])
    assert set(as_int("E48")) <= set(as_int("E96")) <= set(as_int("E192"))
    assert set(SERIES["E3"]) <= set(SERIES["E6"]) <= set(SERIES["E12"]) <= set(SERIES["E24"])


@pytest.mark.parametrize("name", NAMES)
def test_series_tolerance(name):
    # [std IEC 60063] E6..E192; E3 +-40 % is common practice [cp]; both agree with eseries
    assert SERIES_TOLERANCE[name] == pytest.approx(eseries.tolerance(ESERIES_KEY[name]))


@pytest.mark.parametrize("name, lo, hi", [
    ("E12", 10e3, 1e6), ("E24", 0.9e-9, 1.1e-8), ("E96", 1.0, 1000.0),
    ("E192", 4.7e3, 5.1e3), ("E3", 1e-12, 1e-6), ("E48", 33.0, 3.3e6), ("E6", 1.0, 1.0)])
def test_series_values_match_erange(name, lo, hi):
    # [outside library: eseries] erange is inclusive of both bounds, like ours
    ours = series_values(name, lo, hi)
    theirs = np.array(list(eseries.erange(ESERIES_KEY[name], lo, hi)))
    assert ours.shape == theirs.shape
    np.testing.assert_allclose(ours, theirs, rtol=1e-12)
    assert np.all(np.diff(ours) > 0)


def test_series_values_exact_floats():
    # [derived] bounds included exactly, and each value is the float nearest its decimal value
    v = series_values("e12", 10e3, 1e6)                       # name is case-insensitive
    assert v[0] == 10000.0 and v[-1] == 1000000.0 and len(v) == 25
    caps = series_values("E24", 1e-12, 1e-3)
    assert 4.7e-9 in caps and 2.2e-6 in caps and 1e-7 in caps
    assert all(float(f"{x:.3g}") == x for x in caps)          # no 4.700000000000001e-09
    assert all(float(f"{x:.3g}") == x for x in series_values("E192", 0.1, 1e7))
    assert series_values("E12", 4.71e3, 5.5e3).size == 0      # nothing in between


def test_series_values_bad_input():
    with pytest.raises(ValueError, match="E3, E6, E12, E24, E48, E96, E192"):
        series_values("E5", 1, 10)
    for lo, hi in [(0, 10), (10, 1), (-1, 10), (1, math.inf)]:
        with pytest.raises(ValueError):
            series_values("E12", lo, hi)


def test_series_of():
    # [std IEC 60063] membership; the coarsest series wins
    assert series_of(4700) == "E3"
    assert series_of(1.5e-6) == "E6"
    assert series_of(1.2e3) == "E12"
    assert series_of(9.1) == "E24"
    assert series_of(1.05e3) == "E48"
    assert series_of(1.02e5) == "E96"
    assert series_of(1.01) == "E192"
    assert series_of(9.2e3) == "E192"
    assert series_of(9.19e3) is None                          # the E192 exception
    assert series_of(4700 * (1 + 1e-12)) == "E3"              # within 1e-9 relative
    assert series_of(4700 * (1 + 1e-6)) is None
    for bad in (1234, 0, -4700, math.nan, math.inf):
        assert series_of(bad) is None


# --- IEC 60062 RKM codes ---------------------------------------------------------------------
@pytest.mark.parametrize("code, unit, value", [
    ("R47", "ohm", 0.47), ("2R2", "ohm", 2.2), ("4K7", "ohm", 4700.0), ("4k7", "ohm", 4700.0),
    ("1M0", "ohm", 1e6), ("100R", "ohm", 100.0), ("10K0", "ohm", 10e3), ("1G5", "ohm", 1.5e9),
    ("4n7", "F", 4.7e-9), ("p68", "F", 6.8e-13), ("1u0", "F", 1e-6), ("2µ2", "F", 2.2e-6),
    ("2μ2", "F", 2.2e-6), ("1m0", "F", 1e-3)])
def test_rkm_examples(code, unit, value):
    # [std IEC 60062] the letter replaces the decimal point; u for micro is common practice [cp]
    assert parse_quantity(code, unit) == value
    assert parse_rkm_tolerance(code) is None


@pytest.mark.parametrize("value, unit, code", [
    (4700, "ohm", "4K7"), (0.47, "ohm", "R47"), (1e6, "ohm", "1M0"), (100, "ohm", "100R"),
    (2.2, "ohm", "2R2"), (4.7e-9, "F", "4n7"), (1e-7, "F", "100n"), (6.8e-13, "F", "p68"),
    (1e-6, "F", "1u0")])
def test_rkm_code(value, unit, code):
    # [std IEC 60062] examples; "u" instead of the printed µ is common ASCII practice [cp]
    assert rkm_code(value, unit) == code


def test_rkm_code_round_trips_every_standard_value():
    # [derived] every E192 value from 0.1 ohm to 1 Gohm and 0.1 pF to 0.1 F reads back exactly
    for v in series_values("E192", 0.1, 1e9):
        assert parse_quantity(rkm_code(v, "ohm"), "ohm") == v
    for v in series_values("E192", 1e-13, 0.1):
        assert parse_quantity(rkm_code(v, "F"), "F") == v
    for bad in [(0, "ohm"), (-1, "ohm"), (math.nan, "F"), (1.0, "F"), (5, "V")]:
        with pytest.raises(ValueError):
            rkm_code(*bad)


@pytest.mark.parametrize("letter, tol", [("F", 0.01), ("G", 0.02), ("J", 0.05), ("K", 0.10),
                                         ("M", 0.20)])
def test_tolerance_letters(letter, tol):
    # [std IEC 60062] tolerance letters after a code; the value ignores them
    assert parse_rkm_tolerance("4K7" + letter) == tol
    assert parse_quantity("4K7" + letter, "ohm") == 4700.0
    assert parse_rkm_tolerance("100R" + letter) == tol
    if letter != "F":
        assert parse_rkm_tolerance("4n7" + letter) == tol
        assert parse_quantity("4n7" + letter, "F") == 4.7e-9


def test_tolerance_f_after_capacitor_code():
    # [derived] '4n7F': the value is 4.7 nF either way, the tolerance is not told
    assert parse_quantity("4n7F", "F") == 4.7e-9
    with pytest.raises(ValueError, match="ambiguous"):
        parse_rkm_tolerance("4n7F")
    assert parse_rkm_tolerance("10K") is None and parse_rkm_tolerance("4.7k") is None


@pytest.mark.parametrize("text, unit", [
    ("47KJ", "ohm"), ("10KK", "ohm"), ("10KF", "ohm"), ("10MJ", "ohm"), ("100nJ", "F"),
    ("47nK", "F")])
def test_ambiguous_tolerance_rejected(text, unit):
    # [std IEC 60062] K and M are multipliers and tolerance letters: reject, never guess
    with pytest.raises(ValueError, match="ambiguous"):
        parse_quantity(text, unit)


def test_k_rules():
    # [cp] '10K' is 10 kohm for a resistor; for a capacitor K is no prefix and may be 10 %
    assert parse_quantity("10K", "ohm") == 10e3
    assert parse_quantity("100 KΩ", "ohm") == 100e3
    with pytest.raises(ValueError, match="tolerance"):
        parse_quantity("100K", "F")
    with pytest.raises(ValueError, match="kilo is 'k'"):
        parse_quantity("5K", "V")
    with pytest.raises(ValueError, match="Celsius"):
        parse_quantity("300K", "C")


# --- SI prefixes and units -------------------------------------------------------------------
@pytest.mark.parametrize("prefix, factor", [
    ("p", 1e-12), ("n", 1e-9), ("u", 1e-6), ("µ", 1e-6), ("μ", 1e-6), ("m", 1e-3), ("", 1.0),
    ("k", 1e3), ("M", 1e6), ("G", 1e9)])
def test_si_prefixes(prefix, factor):
    # [std: SI brochure] prefix factors; M is mega and m is milli
    for unit, suffix in [("V", "V"), ("A", "A"), ("Hz", "Hz"), ("s", "s"), ("W", "W"),
                         ("F", "F"), ("ohm", "Ω"), ("ohm", "ohm"), ("V", "")]:
        assert parse_quantity(f"3.3{prefix}{suffix}", unit) == float(f"3.3e{round(math.log10(factor))}")
        assert parse_quantity(f"3.3 {prefix}{suffix}", unit) == pytest.approx(3.3 * factor, rel=1e-15)


def test_decimal_values_are_exact():
    # [derived] the float nearest the written decimal, not a product of two rounded floats
    assert parse_quantity("4.7n", "F") == 4.7e-9               # 4.7 * 1e-9 would be 4.700...01e-09
    assert parse_quantity("0.1u", "F") == 1e-7
    assert parse_quantity("2.2µ", "F") == 2.2e-6
    assert parse_quantity("1e-6", "F") == 1e-6
    assert parse_quantity(" 4.7 k ", "ohm") == 4700.0
    assert parse_quantity(4700, "ohm") == 4700.0 and parse_quantity(2.5, "V") == 2.5
    assert parse_quantity(np.float64(2.5), "V") == 2.5
    assert parse_quantity("0", "ohm") == 0.0 and parse_quantity(0, "V") == 0.0


def test_fraction_units():
    # [std: SI brochure] % = 1e-2, ppm = 1e-6
    assert parse_quantity("5%", "%") == 0.05 and parse_quantity("5 %", "") == 0.05
    assert parse_quantity("0.05", "%") == 0.05
    assert parse_quantity("100ppm", "ppm/K") == 1e-4
    for text in ("100 ppm/K", "100ppm/C", "100 ppm/°C"):
        assert parse_quantity(text, "ppm/K") == 1e-4
    assert parse_quantity("250ppm", "") == 2.5e-4
    assert parse_quantity("25°C", "C") == 25 and parse_quantity("-10 C", "C", allow_negative=True) == -10
    for text, unit in [("5m%", "%"), ("5mC", "C"), ("1k ppm", "ppm/K"), ("5 V", "%")]:
        with pytest.raises(ValueError):
            parse_quantity(text, unit)


@pytest.mark.parametrize("text, unit, says", [
    ("100nF", "ohm", "capacitance"), ("4.7 kΩ", "F", "resistance"), ("5 V", "A", "voltage"),
    ("4K7", "F", "resistance"), ("4n7", "ohm", "capacitance"), ("2 Hz", "s", "frequency"),
    ("4K7", "V", "RKM"), ("5 V", "", "voltage"), ("5%", "V", "fraction")])
def test_unit_mismatch(text, unit, says):
    with pytest.raises(ValueError, match=says):
        parse_quantity(text, unit)


@pytest.mark.parametrize("bad", [
    "", "   ", "abc", "4.7.1k", "1kk", "k", "R", "4K7 kΩ", "4 k7", "1e", "--5", "4.7 x",
    True, False, [1], None, {"a": 1}, "nan", "inf", "-inf", math.nan, math.inf, -math.inf,
    "1e400"])
def test_garbage_rejected(bad):
    with pytest.raises(ValueError):
        parse_quantity(bad, "ohm", allow_negative=True)


def test_negative():
    for text in ("-5", -5, "-4.7k", -0.1):
        with pytest.raises(ValueError, match="negative"):
            parse_quantity(text, "V")
    assert parse_quantity("-0.5", "V", allow_negative=True) == -0.5
    assert parse_quantity("-40", "C", allow_negative=True) == -40.0


# --- formatting ------------------------------------------------------------------------------
def test_format_eng_examples():
    # [std: SI brochure] engineering notation, micro sign for micro
    assert format_eng(4700) == "4.7 k"
    assert format_eng(1e-7) == "100 n"
    assert format_eng(2.05) == "2.05"
    assert format_eng(4700, "ohm") == "4.7 kΩ"
    assert format_eng(1e-7, "F") == "100 nF"
    assert format_eng(2.2e-6, "F") == "2.2 µF"
    assert format_eng(999.96, "V") == "1 kV"                  # rounding carries into the prefix
    assert format_eng(-3.3e-3, "A") == "-3.3 mA"
    assert format_eng(0.05, "%") == "5 %"
    assert format_eng(1e-4, "ppm/K") == "100 ppm/K"
    assert format_eng(25, "C") == "25 °C"
    assert format_eng(math.nan, "V") == ""


UNITS = ["ohm", "F", "V", "A", "Hz", "s", "W", "", "%", "ppm/K", "C"]


@settings(max_examples=300, deadline=None)
@given(st.floats(min_value=1e-16, max_value=1e16), st.booleans(), st.sampled_from(UNITS))
def test_format_eng_round_trip(magnitude, negative, unit):
    # [derived] what format_eng writes, parse_quantity reads back
    v = -magnitude if negative else magnitude
    exact = parse_quantity(format_eng(v, unit, digits=17), unit, allow_negative=True)
    assert exact == v                                          # 17 figures identify a double
    rough = parse_quantity(format_eng(v, unit), unit, allow_negative=True)
    assert rough == pytest.approx(v, rel=5e-3)                 # 3 figures: half a unit in 100
