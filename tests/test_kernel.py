"""The compiled kernel against the numpy model it compiles, and against the textbook.

`sweep.physics.model.evaluate` is the reference: it is checked against published formulas and
scipy's ODE solver in tests/reference. The kernel must return the same keys, shapes and dtypes,
values within 1e-12 relative (NaN where the reference has NaN) and bit-identical flags, for every
circuit it covers, both timers, every capacitor technology and load, the ideal mode, the
variation factors as broadcast arrays, and inputs built to trip every flag. In ideal mode its
timing must equal the textbook formulas [book: Horowitz & Hill, *The Art of Electronics*, the
555 astable t_high = ln 2 (RA + RB) C, t_low = ln 2 RB C, and monostable t = ln 3 R C].
"""
from __future__ import annotations

import math
import zlib

import numpy as np
import pytest

pytest.importorskip("numba")

from sweep.models import load_timer                                   # noqa: E402
from sweep.physics import FLAG_BITS, Load, Parts, kernel, model       # noqa: E402

TIMERS = {name: load_timer(name) for name in ("bipolar", "cmos")}
LOADS = {
    "none": Load(),
    "led-ground": Load(resistance_ohm=330.0, forward_voltage_v=2.0, kind="led"),
    "resistor-supply": Load(resistance_ohm=1e3, to="supply"),
    "heavy-ground": Load(resistance_ohm=10.0),                  # trips the output-current limit
    "led-supply": Load(resistance_ohm=470.0, to="supply", forward_voltage_v=1.8, kind="led"),
}
CAPACITORS = ("X7R", "C0G", "Y5V", "electrolytic", "polyester")
RTOL = 1e-12
#: every compiled circuit, and astable-diode a second time with a fixed diode drop (the default
#: is the Shockley diode): (circuit, diode_drop_v)
VARIANTS = [(c, None) for c in kernel.COMPILED] + [("astable-diode", 0.7)]
VARIANT_IDS = [c if d is None else f"{c}-drop" for c, d in VARIANTS]


def variants():
    return pytest.mark.parametrize("circuit, drop", VARIANTS, ids=VARIANT_IDS)


def assert_same(want: dict, got: dict) -> None:
    """Same keys in the same order, shapes and dtypes; values within RTOL (NaN where NaN);
    flags bit for bit."""
    assert list(got) == list(want)
    for k in want:
        w, g = np.asarray(want[k]), np.asarray(got[k])
        assert g.shape == w.shape, k
        assert g.dtype == w.dtype, k
        if k == "flag_mask":
            bad = w != g
            assert not bad.any(), (k, w[bad][:5], g[bad][:5])
        else:
            np.testing.assert_allclose(g, w, rtol=RTOL, atol=0.0, equal_nan=True, err_msg=k)


def assert_agree(circuit, timer, parts, load, **kw):
    want = model.evaluate(circuit, timer, parts, load, **kw)
    got = kernel.evaluate(circuit, timer, parts, load, **kw)
    assert_same(want, got)
    return want


def grid(timer, seed, n_designs=40):
    """Random designs (d, 1, 1) over every part's whole range and conditions (1, 1, c) that
    include the timer's supply and temperature limits and beyond, so every limit is crossed."""
    rng = np.random.default_rng(seed)

    def logu(lo, hi):
        return (10.0 ** rng.uniform(math.log10(lo), math.log10(hi), n_designs))[:, None, None]
    vcc = np.array([timer.min_v - 0.5, timer.min_v + 0.5, 9.0, timer.max_v + 0.5,
                    timer.abs_max_v + 1.0])
    temperature = np.array([timer.ambient_min_c - 10.0, 25.0, 160.0])
    vcc, temperature = (a.ravel()[None, None, :] for a in np.meshgrid(vcc, temperature))
    return dict(ra=logu(100.0, 3e7), rb=logu(100.0, 3e7), r=logu(100.0, 3e7), c=logu(1e-11, 1e-3),
                vcc=vcc, temperature=temperature)


@pytest.mark.parametrize("timer", TIMERS)
@variants()
@pytest.mark.parametrize("cap", CAPACITORS)
def test_agrees_on_random_designs(circuit, drop, timer, cap):
    tm = TIMERS[timer]
    for i, load in enumerate(LOADS.values()):
        kw = grid(tm, seed=zlib.crc32(f"{circuit} {drop} {timer} {cap} {i}".encode()))
        if circuit == "missing-pulse":
            kw["input_period"] = np.array([1e-5, 1e-3, 0.1, 10.0])[None, :, None]
        assert_agree(circuit, tm, Parts(capacitor=cap, diode_drop_v=drop), load, **kw)


@pytest.mark.parametrize("timer", TIMERS)
@variants()
def test_agrees_in_ideal_mode(circuit, drop, timer):
    kw = grid(TIMERS[timer], seed=3)
    kw["input_period"] = 1e-3
    assert_agree(circuit, TIMERS[timer], Parts(diode_drop_v=drop), LOADS["led-ground"], ideal=True,
                 **kw)


@pytest.mark.parametrize("timer", TIMERS)
@variants()
def test_agrees_with_variation_factors_as_arrays(circuit, drop, timer):
    """Builds on their own axis (d, b, 1), as the worst case and the Monte Carlo pass them."""
    tm = TIMERS[timer]
    rng = np.random.default_rng(11)
    kw = grid(tm, seed=5, n_designs=12)
    b = 6
    shape = (12, b, 1)
    kw.update(leak_factor=rng.uniform(1.0, 5.0, shape), dc_bias_factor=rng.uniform(0.5, 1.5, shape),
              iq_factor=rng.uniform(0.5, 2.0, (1, b, 1)), load_factor=rng.uniform(0.9, 1.1, shape),
              vf_shift=rng.uniform(-0.1, 0.1, (1, b, 1)), stage_factor=rng.uniform(0.8, 1.3, shape),
              diode_is_factor=rng.uniform(0.5, 2.0, shape), input_period=2e-3)
    for load in ("led-ground", "resistor-supply", "none"):
        for cap in ("X7R", "electrolytic"):
            assert_agree(circuit, tm, Parts(capacitor=cap, capacitor_voltage_v=16.0,
                                            diode_drop_v=drop), LOADS[load], **kw)


@pytest.mark.parametrize("timer", TIMERS)
@variants()
@pytest.mark.parametrize("cap", CAPACITORS)
def test_part_multipliers_given_apart_equal_their_product(circuit, drop, timer, cap):
    """ra=x, ra_factor=m (the kernel applies m per point, as its folds pass a build's or a
    corner's parts) gives what the reference gives for ra=x*m: every capacitor's leakage and
    the part-limit flags follow the multiplied values."""
    tm = TIMERS[timer]
    rng = np.random.default_rng(zlib.crc32(f"{circuit} {drop} {timer} {cap}".encode()))
    kw = grid(tm, seed=7, n_designs=12)
    b = 5
    factors = {k: rng.uniform(0.5, 1.5, (1, b, kw["vcc"].shape[-1])) for k in ("ra", "rb", "r", "c")}
    factors["c"][0, 0, :] = 1e-3          # some capacitors pushed below the timer's minimum
    factors["ra"][0, 1, :] = 1e-4         # and some resistors below theirs
    factors["r"][0, 1, :] = 1e-4
    leak = rng.uniform(1.0, 5.0, (1, b, 1))
    parts = Parts(capacitor=cap, capacitor_voltage_v=16.0, diode_drop_v=drop)
    extra = dict(input_period=2e-3) if circuit == "missing-pulse" else {}
    want = model.evaluate(circuit, tm, parts, LOADS["led-ground"], leak_factor=leak,
                          **{k: (kw[k] * factors[k] if k in factors else kw[k]) for k in kw}, **extra)
    got = kernel.evaluate(circuit, tm, parts, LOADS["led-ground"], leak_factor=leak, **kw, **extra,
                          **{f"{k}_factor": m for k, m in factors.items()})
    assert_same(want, got)
    bits = FLAG_BITS["capacitor-too-small"] | FLAG_BITS["resistor-too-small"]
    assert (np.asarray(want["flag_mask"]) & bits).any()


@variants()
@pytest.mark.parametrize("builds", [3, 4], ids=["builds-divide-a-tile", "builds-straddle-tiles"])
def test_agrees_across_many_tiles(circuit, drop, builds):
    """Enough points for many tiles, with builds whose factors vary along the builds and the
    conditions: the kernel gathers an input that lays out the same in every tile only once,
    which must hold whether a tile holds whole periods of builds (273 rows of 15 conditions,
    3 builds) or not (4 builds)."""
    tm = TIMERS["cmos"]
    rng = np.random.default_rng(21)
    kw = grid(tm, seed=9, n_designs=1000)
    kw["c"] = np.array(4.7e-6)          # one capacitor: C lays out the same in every tile too
    nc = kw["vcc"].shape[-1]
    assert kernel.TILE_POINTS // nc % 3 == 0 and kernel.TILE_POINTS // nc % 4 != 0
    cond_build = (1, builds, nc)
    kw.update(iq_factor=rng.uniform(0.5, 2.0, cond_build), load_factor=rng.uniform(0.9, 1.1, cond_build),
              stage_factor=rng.uniform(0.8, 1.3, (1, builds, 1)), leak_factor=rng.uniform(1, 5, cond_build),
              input_period=2e-3)
    factors = {"c": rng.uniform(0.8, 1.2, cond_build), "ra": rng.uniform(0.9, 1.1, (1, builds, 1))}
    parts = Parts(capacitor="electrolytic", capacitor_voltage_v=16.0, diode_drop_v=drop)
    want = model.evaluate(circuit, tm, parts, LOADS["led-ground"],
                          **{k: (v * factors[k] if k in factors else v) for k, v in kw.items()})
    got = kernel.evaluate(circuit, tm, parts, LOADS["led-ground"], **kw,
                          **{f"{k}_factor": m for k, m in factors.items()})
    assert np.prod(np.shape(got["flag_mask"])) > 8 * kernel.TILE_POINTS
    assert_same(want, got)


@variants()
def test_agrees_on_swept_load_control_voltage_and_odd_shapes(circuit, drop):
    tm = TIMERS["bipolar"]
    parts = Parts(capacitor="X7R", discharge_resistor_ohm=47.0, diode_drop_v=drop)
    # a swept load resistor and control voltage (NaN: the internal divider; above the supply:
    # the node never reaches it)
    assert_agree(circuit, tm, parts, LOADS["led-ground"], ra=np.array([1e3, 1e4, 1e5])[:, None],
         rb=4.7e4, r=np.array([1e3, 1e4, 1e5])[:, None], c=1e-7, vcc=np.array([5.0, 9.0, 12.0]),
         temperature=25.0, load_resistance=np.array([100.0, 1e3, np.nan]),
         control_voltage=np.array([np.nan, 4.0, 20.0]), input_period=1e-3)
    # scalars, one axis, and four axes
    assert_agree(circuit, tm, parts, Load(), ra=1e4, rb=4.7e4, r=1e4, c=1e-7, vcc=9.0, temperature=25.0)
    assert_agree(circuit, tm, parts, Load(), ra=1e4, rb=4.7e4, r=1e4, c=np.array([1e-9, 1e-7]), vcc=9.0,
         temperature=25.0)
    assert_agree(circuit, tm, parts, Load(), ra=np.full((2, 1, 1, 1), 1e4), rb=4.7e4, r=1e4,
         c=np.array([1e-9, 1e-7])[:, None, None], vcc=np.array([5.0, 9.0])[:, None],
         temperature=np.array([0.0, 25.0, 50.0]))
    # nothing at all
    assert_agree(circuit, tm, parts, Load(), ra=np.zeros((0, 1, 1)), rb=4.7e4, r=np.zeros((0, 1, 1)),
         c=1e-7, vcc=np.array([9.0]), temperature=25.0)


@pytest.mark.parametrize("timer", TIMERS)
def test_every_flag_is_provoked_and_identical(timer):
    """Inputs built to trip each flag; the reference must raise every one somewhere (so this
    test means something) and the kernel the same bits everywhere."""
    tm = TIMERS[timer]
    seen = {}
    for circuit, drop in VARIANTS:
        for load in ("heavy-ground", "none"):
            kw = grid(tm, seed=7, n_designs=60)
            # 10 pF with 1 kOhm runs far above any top frequency; 100 uF at 100 Ohm overloads the
            # discharge transistor and RA
            kw["ra"][:2, 0, 0] = [1e3, 100.0]
            kw["rb"][:2, 0, 0] = [1e3, 100.0]
            kw["r"][:2, 0, 0] = [1e3, 100.0]
            kw["c"][:2, 0, 0] = [1e-11, 1e-4]
            kw["control_voltage"] = np.array([np.nan, 40.0])[None, :, None]   # 40 V: it stalls
            kw["input_period"] = np.array([1e-6, 100.0])[None, :, None]       # 100 s: false alarm
            want = assert_agree(circuit, tm, Parts(capacitor="X7R", diode_drop_v=drop), LOADS[load],
                                **kw)
            mask = int(np.bitwise_or.reduce(want["flag_mask"], axis=None))
            seen[circuit, drop] = seen.get((circuit, drop), 0) | mask
    # every flag somewhere, and every flag but the detector's on each variant of its own
    missing = [name for name, bit in FLAG_BITS.items()
               if not any(m & bit for m in seen.values()) and name != "spec-miss"]
    assert missing == []
    for (circuit, drop), m in seen.items():
        own = {"astable": "frequency-too-high", "astable-diode": "frequency-too-high",
               "missing-pulse": "false-alarm"}.get(circuit)
        absent = [name for name, bit in FLAG_BITS.items() if not m & bit
                  and name not in ("spec-miss", "false-alarm", "frequency-too-high")]
        assert absent == [], (circuit, drop)
        if own is not None:
            assert m & FLAG_BITS[own], (circuit, drop, own)


@pytest.mark.parametrize("timer", TIMERS)
def test_ideal_timing_is_the_textbook_formula(timer):
    """[book: Horowitz & Hill] astable high ln 2 (RA + RB) C, low ln 2 RB C; monostable
    ln 3 R C; rtol 1e-12 is rounding."""
    rng = np.random.default_rng(1)
    ra, rb, c = (10.0 ** rng.uniform(3, 6, 50), 10.0 ** rng.uniform(3, 6, 50),
                 10.0 ** rng.uniform(-9, -5, 50))
    tm = TIMERS[timer]
    out = kernel.evaluate("astable", tm, Parts(), Load(), ra=ra, rb=rb, c=c, vcc=9.0,
                          temperature=25.0, ideal=True)
    np.testing.assert_allclose(out["high_time_s"], math.log(2.0) * (ra + rb) * c, rtol=1e-12)
    np.testing.assert_allclose(out["low_time_s"], math.log(2.0) * rb * c, rtol=1e-12)
    out = kernel.evaluate("monostable", tm, Parts(), Load(), r=ra, c=c, vcc=9.0, temperature=25.0,
                          ideal=True)
    np.testing.assert_allclose(out["pulse_width_s"], math.log(3.0) * ra * c, rtol=1e-12)


@pytest.mark.parametrize("circuit", ["astable-symmetric", "bistable"])
def test_other_circuits_fall_back_to_the_reference(circuit):
    tm = TIMERS["cmos"]
    assert not kernel.supports(circuit, tm, Parts(), Load(), False)
    kw = dict(ra=1e4, rb=4.7e4, r=1e4, c=1e-7, vcc=np.array([5.0, 9.0]), temperature=25.0)
    want = model.evaluate(circuit, tm, Parts(), Load(), **kw)
    got = kernel.evaluate(circuit, tm, Parts(), Load(), **kw)
    assert list(got) == list(want)
    for k in want:
        np.testing.assert_array_equal(got[k], want[k])


def test_the_switch(monkeypatch):
    tm, parts, load = TIMERS["bipolar"], Parts(), Load()
    monkeypatch.delenv(kernel.ENV, raising=False)
    assert kernel.available()
    assert kernel.wanted("astable", tm, parts, load, False, kernel.MIN_POINTS)
    assert not kernel.wanted("astable", tm, parts, load, False, kernel.MIN_POINTS - 1)
    assert kernel.wanted("astable-diode", tm, parts, load, False, kernel.MIN_POINTS)
    assert not kernel.wanted("astable-symmetric", tm, parts, load, False, 10 * kernel.MIN_POINTS)
    monkeypatch.setenv(kernel.ENV, "0")
    assert not kernel.wanted("astable", tm, parts, load, False, 10 * kernel.MIN_POINTS)


@pytest.mark.parametrize("circuit, parts", [("astable", ""), ("astable-diode", ""),
                                            ("astable-diode", '[parts]\ndiode_drop = "0.6V"\n')],
                         ids=["astable", "astable-diode", "astable-diode-drop"])
def test_engine_gives_the_same_block_either_way(circuit, parts):
    from sweep.engine import axis_values, evaluate_block
    from sweep.study import parse_study
    study = parse_study(f"""
[study]
circuit = "{circuit}"
timer = "bipolar"
{parts}[design]
ra = {{ series = "E12", min = "1k", max = "1M" }}
rb = {{ series = "E12", min = "1k", max = "1M" }}
c = ["1n", "100n"]
[conditions]
vcc = {{ min = 5, max = 15, steps = 3 }}
temperature = {{ min = -40, max = 85, steps = 3 }}
[load]
resistance = "470"
forward_voltage = "2.0V"
[spec]
frequency = {{ target = "1kHz", tolerance = "20%" }}
""")
    design = axis_values(study.design, np.arange(study.n_designs))
    cond = axis_values(study.conditions, np.arange(study.n_conditions))
    want = evaluate_block(study.case, design, cond, compiled=False)
    got = evaluate_block(study.case, design, cond, compiled=True)
    assert_same(want, got)
