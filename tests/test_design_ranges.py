"""Design ranges from the spec: the proposed [design] ranges hold the exact textbook solution,
use only IEC 60063 values, and a study written by `new --frequency ...` runs with most of its
designs near the target."""
import math

import eseries
import numpy as np
import pandas as pd
import pytest

from sweep.design_ranges import Target, propose
from sweep.models import load_timer
from sweep.physics import capacitor_named
from sweep.study import load_study, parse_study

from .cli_helpers import cli

RNG = np.random.default_rng(20261202)
ESERIES = {"E6": eseries.E6, "E12": eseries.E12, "E24": eseries.E24, "E96": eseries.E96}


def in_series(value, name):
    """[std IEC 60063, via the outside `eseries` package] value is a member of the series."""
    return math.isclose(eseries.find_nearest(ESERIES[name], value), value, rel_tol=1e-9)


def brackets(values, exact):
    """The sorted proposed values hold a value at or below and one at or above `exact`."""
    v = np.sort(values)
    return v[0] <= exact * (1 + 1e-12) and v[-1] >= exact * (1 - 1e-12)


@pytest.mark.parametrize("trial", range(12))
def test_astable_ranges_hold_the_ln2_solution(trial):
    # [book] astable: tH = ln2 (RA + RB) C, tL = ln2 RB C, so for frequency f and duty d
    # RB = (1 - d) / (f ln2 C), RA = (2 d - 1) / (f ln2 C)
    f = 10 ** RNG.uniform(0, 4)
    d_lo = RNG.uniform(0.55, 0.75)
    d_hi = d_lo + RNG.uniform(0.02, 0.15)
    series = ["E12", "E24", "E96"][trial % 3]
    p = propose("astable", Target(f, d_lo, d_hi), load_timer("bipolar"), capacitor_named("X7R"),
                vcc=(4.5, 5.5), r_series=series)
    d = 0.5 * (d_lo + d_hi)            # the middle of the window is the aim
    for c in p.values["c"]:
        assert brackets(p.values["ra"], (2 * d - 1) / (f * math.log(2) * c))
        assert brackets(p.values["rb"], (1 - d) / (f * math.log(2) * c))
    for k in ("ra", "rb"):
        assert all(in_series(r, series) for r in p.values[k])
    assert all(in_series(c, "E6") for c in p.values["c"])


@pytest.mark.parametrize("trial", range(12))
def test_monostable_ranges_hold_the_ln3_solution(trial):
    # [book] monostable: t = ln3 R C
    t = 10 ** RNG.uniform(-4, 1)
    p = propose("monostable", Target(pulse_width_s=t, tolerance=0.05), load_timer("cmos"),
                capacitor_named("X7R"), vcc=(4.5, 5.5), capacitors=3)
    for c in p.values["c"]:
        assert brackets(p.values["r"], t / (math.log(3) * c))
    assert all(in_series(r, "E24") for r in p.values["r"])


@pytest.mark.parametrize("trial", range(6))
def test_symmetric_ranges_hold_the_rail_to_rail_solution(trial):
    # [book, derived from the RC law] one resistor from a rail-to-rail output: tH = tL = ln2 R C
    f = 10 ** RNG.uniform(1, 4)
    p = propose("astable-symmetric", Target(f, tolerance=0.05), load_timer("cmos"),
                capacitor_named("C0G"), vcc=(4.5, 5.5))
    for c in p.values["c"]:
        assert brackets(p.values["r"], 1 / (2 * math.log(2) * f * c))


@pytest.mark.parametrize("trial", range(6))
def test_diode_ranges_hold_the_solution_for_any_drop_in_the_bracket(trial):
    # [derived from the RC law] tH = RA C ln((V - Vd - Vc/2)/(V - Vd - Vc)),
    # tL = ln2 RB C; a small-signal silicon diode drops 0.3-0.7 V [cp]
    f = 10 ** RNG.uniform(-0.5, 3)
    vd = RNG.uniform(0.3, 0.7)
    v = RNG.uniform(6.0, 8.4)
    p = propose("astable-diode", Target(f, 0.2, 0.3), load_timer("cmos"), capacitor_named("X7R"),
                vcc=(6.0, 8.4), r_series="E12")
    vc = 2 * v / 3
    for c in p.values["c"]:
        assert brackets(p.values["ra"], 0.25 / f / (c * math.log((v - vd - vc / 2) / (v - vd - vc))))
        assert brackets(p.values["rb"], 0.75 / f / (c * math.log(2)))
    assert all(in_series(r, "E12") for k in ("ra", "rb") for r in p.values[k])


def test_resistors_stay_in_the_usable_range():
    # [ds-cmos / model file] the bias-current limit R <= derating (VCC - Vc) / I_th,max at the
    # lowest supply and the discharge limit VCC / I_max at the highest, plus one neighbour
    tm = load_timer("bipolar")
    p = propose("astable", Target(1.0, 0.6, 0.7), tm, capacitor_named("electrolytic"),
                vcc=(4.5, 15.0), capacitors=12)
    r_max = tm.resistance_derating * (4.5 / 3) / tm.threshold_current_max_a
    assert (p.values["ra"] + p.values["rb"]).max() < 1.6 * r_max     # one E24 step at most
    assert p.values["ra"].min() > 15.0 / tm.discharge_max_a / 1.2


NEW_ARGS = {
    "astable": ["--frequency", "1kHz", "--duty-max", "0.7", "--timer", "bipolar", "--vcc", "4.5..5.5"],
    "astable-diode": ["--frequency", "2Hz", "--tolerance", "15%", "--duty-min", "0.15",
                      "--duty-max", "0.35", "--vcc", "6..8.4", "--temperature", "-10..40",
                      "--supply", "battery"],
    "astable-symmetric": ["--frequency", "440Hz", "--capacitor", "C0G"],
    "monostable": ["--pulse-width", "100ms", "--timer", "bipolar", "--vcc", "12"],
}


@pytest.mark.slow
@pytest.mark.parametrize("circuit", list(NEW_ARGS))
def test_new_from_spec_runs_and_a_quarter_is_on_target(circuit, tmp_path, capsys):
    path = tmp_path / "s.toml"
    code, out, err = cli(["new", circuit, *NEW_ARGS[circuit], "-o", str(path)], capsys)
    assert code == 0, err
    text = path.read_text()
    assert "# timer-sweep study written from the spec" in text and "[spec]" in text
    code, out, err = cli(["run", str(path), "-o", str(tmp_path / "out"), "-q"], capsys)
    assert code == 0, err
    st = load_study(path)
    d = pd.read_parquet(tmp_path / "out" / "designs.parquet")
    ok = np.ones(len(d), dtype=bool)
    for s in st.spec:                  # the nominal figures against the spec the options gave
        v = d[f"{s.column}_nom"].to_numpy()
        ok &= (v >= s.lo) & (v <= s.hi)
    assert len(d) == st.n_designs and ok.mean() >= 0.25, (ok.sum(), len(d))


def test_from_spec_in_a_study():
    text = """
[study]
circuit = "monostable"
timer = "cmos"
[design]
c = { series = "E6", from_spec = true }
[conditions]
vcc = { min = 4.5, max = 5.5, steps = 3 }
[spec]
pulse_width = { target = "250ms", tolerance = "5%" }
"""
    st = parse_study(text)
    axes = {a.key: a for a in st.design}
    assert set(axes) == {"c", "r"} and axes["c"].series == "E6"
    for c in axes["c"].values:         # [book] t = ln3 R C
        assert brackets(axes["r"].values, 0.25 / (math.log(3) * c))
    assert all(in_series(r, "E24") for r in axes["r"].values)


@pytest.mark.parametrize("args,words", [
    (["new", "monostable", "--frequency", "1kHz"], "--pulse-width"),
    (["new", "astable", "--frequency", "1kHz", "--duty-max", "0.4"], "astable-diode"),
    (["new", "astable", "--frequency", "fast"], "--frequency"),
    (["new", "astable", "--frequency", "1kHz", "--vcc", "5..x"], "--vcc"),
    (["new", "astable", "--frequency", "1kHz", "--series", "E7"], "--series"),
    (["new", "astable", "--frequency", "1THz"], "--frequency"),
])
def test_new_from_spec_bad_options(args, words, tmp_path, capsys):
    out = tmp_path / "x.toml"
    code, _, err = cli([*args, "-o", str(out)], capsys)
    assert code == 2 and words in err and "Traceback" not in err
    assert not out.exists()


def test_from_spec_without_a_target_is_refused():
    text = """
[study]
circuit = "astable"
[design]
c = { from_spec = true }
[spec]
duty = { max = 0.7 }
"""
    with pytest.raises(Exception) as e:
        parse_study(text, "s.toml")
    assert "design.c.from_spec" in str(e.value) and "frequency" in str(e.value)
