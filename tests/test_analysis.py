"""Per-design analysis: worst case, Monte Carlo yield, elasticities, ranking, determinism."""
from __future__ import annotations

import itertools
import re
import math
from dataclasses import replace

import numpy as np
import pandas as pd
import pytest
from scipy.stats import norm

from sweep.analysis import Options, analyse_designs, rank_designs
from sweep.models import SPREADS, spread_max_name
from sweep.physics import FLAG_BITS, evaluate
from sweep.study import parse_study

QUIET_TIMER = {k: 0.0 for k in SPREADS + tuple(map(spread_max_name, SPREADS))}


def study_of(text: str, **timer_changes):
    s = parse_study(text, "t.toml")
    if timer_changes:
        s = replace(s, timer=replace(s.timer, **timer_changes))
    return s


def test_monte_carlo_yield_matches_the_normal_distribution():
    # With only C toleranced (normal, tolerance = 3 sigma) the ideal frequency is f0 / m with
    # m ~ N(1, sigma), so P(lo <= f <= hi) = Phi((f0/lo - 1)/sigma) - Phi((f0/hi - 1)/sigma)
    # [book: any probability text; scipy.stats.norm as the outside reference].
    s = study_of("""
[study]
circuit = "astable"
[design]
ra = "10k"
rb = "47k"
c = "100n"
[parts]
resistor_tolerance = "0%"
capacitor_tolerance = "10%"
[spec]
frequency = { min = "135Hz", max = "145Hz" }
[analysis]
monte_carlo = 100000
seed = 42
""", **QUIET_TIMER)
    df = analyse_designs(s, 0, 1, Options(ideal=True))
    f0 = 1 / (math.log(2) * (10e3 + 2 * 47e3) * 100e-9)
    sigma = 0.10 / 3
    p = norm.cdf((f0 / 135 - 1) / sigma) - norm.cdf((f0 / 145 - 1) / sigma)
    se = math.sqrt(p * (1 - p) / 100000)
    assert abs(df["yield"].iloc[0] - p) < 4 * se, (df["yield"].iloc[0], p)
    assert 0.1 < p < 0.9        # the check means something only away from 0 and 1


def test_uniform_distribution_yield():
    # uniform over +-tol: P(m in [a, b]) = (b - a) / (2 tol) [book]
    s = study_of("""
[study]
circuit = "monostable"
[design]
r = "100k"
c = "1u"
[parts]
resistor_tolerance = "0%"
capacitor_tolerance = "20%"
[spec]
pulse_width = { min = "0.1s", max = "0.12s" }
[analysis]
monte_carlo = 100000
distribution = "uniform"
""", **QUIET_TIMER)
    df = analyse_designs(s, 0, 1, Options(ideal=True))
    t0 = math.log(3) * 100e3 * 1e-6
    a, b = max(0.1 / t0, 0.8), min(0.12 / t0, 1.2)
    p = (b - a) / 0.4
    assert abs(df["yield"].iloc[0] - p) < 4 * math.sqrt(p * (1 - p) / 100000)


SMALL = """
[study]
circuit = "{circuit}"
timer = "{timer}"
[design]
{parts}
[conditions]
vcc = {{ min = {vlo}, max = {vhi}, steps = 2 }}
temperature = {{ min = -20, max = 60, steps = 3 }}
[parts]
resistor_tolerance = "5%"
capacitor_tolerance = "10%"
capacitor = "{cap}"
[spec]
supply_current = {{ max = "1A" }}
[analysis]
monte_carlo = 0
"""


@pytest.mark.slow
@pytest.mark.parametrize("seed", range(6))
def test_worst_case_equals_brute_force_enumeration(seed):
    # Brute force: every corner of every toleranced part at every condition point, each
    # evaluated on its own with the physics function, plus the timer's band at its maximum
    # figures [derived].
    rng = np.random.default_rng(seed)
    circuit = ["astable", "astable-diode", "astable-symmetric", "monostable"][seed % 4]
    timer = ["bipolar", "cmos"][seed % 2]
    parts = ({"ra": rng.choice([1e3, 4.7e3, 22e3]), "rb": rng.choice([10e3, 47e3])}
             if circuit.startswith("astable") and circuit != "astable-symmetric" else
             {"r": rng.choice([10e3, 100e3])})
    parts["c"] = rng.choice([10e-9, 1e-6])
    text = SMALL.format(circuit=circuit, timer=timer, cap=rng.choice(["X7R", "C0G", "electrolytic"]),
                        parts="\n".join(f'{k} = {float(v)!r}' for k, v in parts.items()),
                        vlo=5.0, vhi=12.0)
    s = study_of(text)
    df = analyse_designs(s, 0, 1)
    keys = list(parts)
    tol = {k: (0.10 if k == "c" else 0.05) for k in keys}
    main = "pulse_width_s" if circuit == "monostable" else "period_s"
    acc = s.timer.accuracy_monostable_max if circuit == "monostable" else s.timer.accuracy_astable_max
    drift = (s.timer.drift_monostable_max_ppm_per_k if circuit == "monostable"
             else s.timer.drift_astable_max_ppm_per_k) * 1e-6
    sens = (s.timer.supply_sensitivity_monostable_max_per_v if circuit == "monostable"
            else s.timer.supply_sensitivity_astable_max_per_v)
    vnom = 8.5
    # every spread beyond the tolerances, each at both its bounds: the resistor tempco of either
    # sign (each resistor on its own), the capacitor at either edge of its temperature envelope,
    # its DC-bias curve 1/1.6 or 1.6 x typical, leakage typical/B or x B, the diode's saturation
    # current /3 or x3, the quiescent current /2 or x2 (spreads.py; the bounds are its figures)
    from sweep.physics.parts import (capacitance_temperature_factor, leakage_spread,
                                     temperature_envelope)
    cap = s.parts.technology
    leaky = cap.leakage in ("electrolytic", "tantalum")
    diode = circuit == "astable-diode"
    res = [k for k in keys if k != "c"]
    alpha = s.parts.resistor_tempco_per_k
    lo, hi = {"t": np.inf, "duty": np.inf, "i": np.inf}, {"t": -np.inf, "duty": -np.inf, "i": -np.inf}
    dims = len(keys) + len(res) + 2 + int(leaky) + int(diode) + 1
    for signs in itertools.product((-1, 1), repeat=dims):
        sg = dict(zip(keys, signs))
        tc = dict(zip(res, signs[len(keys):]))
        env, dcb, *rest = signs[len(keys) + len(res):]
        leak_s = rest.pop(0) if leaky else 0
        diode_s = rest.pop(0) if diode else 0
        iq_s = rest.pop(0)
        for v in (5.0, 12.0):
            for t in (-20.0, 20.0, 60.0):
                kw = {}
                for k in res:
                    kw[k] = parts[k] * (1 + sg[k] * tol[k]) * (1 + tc[k] * abs(alpha) * abs(t - 25)) \
                        / (1 + alpha * (t - 25))
                edge = temperature_envelope(cap, t)[0 if env < 0 else 1]
                kw["c"] = parts["c"] * (1 + sg["c"] * tol["c"]) * (1 + float(edge)) \
                    / float(capacitance_temperature_factor(cap, t))
                v_up = 2 / 3 * v
                out = evaluate(circuit, s.timer, s.parts, s.load, vcc=v, temperature=t,
                               dc_bias_factor=1.6 ** dcb,
                               leak_factor=float(leakage_spread(cap, s.parts.capacitor_voltage_v, v_up)) ** leak_s,
                               diode_is_factor=3.0 ** diode_s,
                               iq_factor=s.timer.quiescent_max_ratio ** iq_s, **kw)
                band = acc + drift * abs(t - 25) + sens * abs(v - vnom)
                tt = float(out[main])
                lo["t"], hi["t"] = min(lo["t"], tt * (1 - band)), max(hi["t"], tt * (1 + band))
                lo["i"] = min(lo["i"], float(out["supply_current_a"]))
                hi["i"] = max(hi["i"], float(out["supply_current_a"]))
                if circuit != "monostable":
                    lo["duty"], hi["duty"] = min(lo["duty"], float(out["duty"])), max(hi["duty"], float(out["duty"]))
    if circuit == "monostable":
        assert df["pulse_width_s_wc_min"].iloc[0] == pytest.approx(lo["t"], rel=1e-12)
        assert df["pulse_width_s_wc_max"].iloc[0] == pytest.approx(hi["t"], rel=1e-12)
    else:
        assert df["frequency_hz_wc_max"].iloc[0] == pytest.approx(1 / lo["t"], rel=1e-12)
        assert df["frequency_hz_wc_min"].iloc[0] == pytest.approx(1 / hi["t"], rel=1e-12)
        assert df["duty_wc_min"].iloc[0] == pytest.approx(lo["duty"], rel=1e-12)
        assert df["duty_wc_max"].iloc[0] == pytest.approx(hi["duty"], rel=1e-12)
    # the supply current follows the ramp's mean voltage, which a class II curve with a mixed
    # DC-bias/capacitance corner moves by a few parts per million more than the combined corner:
    # close, not exact [derived]
    assert df["supply_current_a_wc_min"].iloc[0] == pytest.approx(lo["i"], rel=1e-4)
    assert df["supply_current_a_wc_max"].iloc[0] == pytest.approx(hi["i"], rel=1e-4)


def test_zero_tolerance_worst_case_is_the_condition_range_and_yield_is_0_or_1():
    text = """
[study]
circuit = "astable"
[design]
ra = ["1k", "10k"]
rb = ["10k", "100k"]
c = "100n"
[conditions]
vcc = { min = 6, max = 12, steps = 3 }
temperature = { min = -20, max = 70, steps = 4 }
[parts]
resistor_tolerance = "0%"
capacitor_tolerance = "0%"
[spec]
frequency = { min = "60Hz", max = "500Hz" }
[analysis]
monte_carlo = 200
"""
    # in ideal mode the only spreads left are the tolerances (no tempco, temperature envelope,
    # DC bias, leakage or quiescent spread), so with none the worst case is the sweep's range
    s = study_of(text, **QUIET_TIMER)
    df = analyse_designs(s, 0, s.n_designs, Options(ideal=True))
    for o in ("frequency_hz", "duty", "supply_current_a"):
        assert np.allclose(df[f"{o}_wc_min"], df[f"{o}_min"], rtol=1e-12)
        assert np.allclose(df[f"{o}_wc_max"], df[f"{o}_max"], rtol=1e-12)
    y = df["yield"].to_numpy()
    assert set(np.unique(y)) <= {0.0, 1.0}
    inside = (df["frequency_hz_min"] >= 60) & (df["frequency_hz_max"] <= 500)
    assert ((y == 1.0) == inside.to_numpy()).all()
    assert inside.any() and (~inside).any()


def test_elasticities_of_the_ideal_astable_match_the_derivatives():
    # f = 1/(ln2 (RA + 2 RB) C): d ln f / d ln RA = -RA/(RA+2RB), RB: -2RB/(RA+2RB), C: -1 [book]
    s = study_of("""
[study]
circuit = "astable"
[design]
ra = ["1k", "33k", "470k"]
rb = ["2.2k", "100k"]
c = ["1n", "10u"]
[analysis]
monte_carlo = 0
""")
    df = analyse_designs(s, 0, s.n_designs, Options(ideal=True))
    ra, rb = df["ra_ohm"].to_numpy(), df["rb_ohm"].to_numpy()
    assert np.allclose(df["sens_ra"], -ra / (ra + 2 * rb), atol=1e-6)
    assert np.allclose(df["sens_rb"], -2 * rb / (ra + 2 * rb), atol=1e-6)
    assert np.allclose(df["sens_c"], -1.0, atol=1e-6)


def test_same_seed_same_results_and_block_split_does_not_matter():
    s = study_of(open("studies/buzzer.toml", encoding="utf-8").read().replace("monte_carlo = 500", "monte_carlo = 64"))
    whole = analyse_designs(s, 0, 300)
    again = analyse_designs(s, 0, 300)
    pd.testing.assert_frame_equal(whole, again)
    parts = pd.concat([analyse_designs(s, a, b) for a, b in ((0, 7), (7, 150), (150, 300))],
                      ignore_index=True)
    pd.testing.assert_frame_equal(whole, parts)
    other = replace(s, seed=s.seed + 1)
    moved = analyse_designs(other, 0, 300)
    assert not np.allclose(moved["frequency_hz_mc_mean"].fillna(0), whole["frequency_hz_mc_mean"].fillna(0))


def test_ranking_puts_feasible_first_and_ties_within_the_yield_interval_by_margin():
    s = study_of(open("studies/buzzer.toml", encoding="utf-8").read().replace("monte_carlo = 500", "monte_carlo = 64"))
    df = analyse_designs(s, 0, s.n_designs)
    df["rank"] = rank_designs(df)
    r = df.sort_values("rank").reset_index(drop=True)
    assert sorted(r["rank"]) == list(range(1, len(r) + 1))
    feas = r["feasible"].to_numpy()
    assert not np.any(np.diff(feas.astype(int)) > 0)          # no feasible after an infeasible
    f = r[r["feasible"]]
    best = f.loc[f["yield"].idxmax()]
    lead = f["yield_hi"] >= best["yield_lo"]                  # overlaps the best's interval
    assert lead.to_numpy()[: lead.sum()].all() and 1 < lead.sum() < len(f)
    # the leaders by worst-case margin (a regulated study without a current spec) ...
    assert np.all(np.diff(f.loc[lead, "wc_margin"].to_numpy()) <= 0)
    # ... the rest by yield
    assert np.all(np.diff(f.loc[~lead, "yield"].fillna(-1).to_numpy()) <= 1e-15)
    # the pick is in spec at the nominal condition and its worst case is reported
    pick = r.iloc[0]
    assert 2700 * 0.92 <= pick["frequency_hz_nom"] <= 2700 * 1.08
    assert pick["frequency_hz_wc_min"] <= pick["frequency_hz_nom"] <= pick["frequency_hz_wc_max"]


def _ties_table():
    # five feasible designs, 500 builds: 99.2 % and 98.0 % are a tie, 90 % is not [derived]
    d = pd.DataFrame({"design": [1, 2, 3, 4, 5], "feasible": [True] * 4 + [False],
                      "yield": [0.992, 0.980, 0.900, 0.986, 1.0],
                      "wc_margin": [-0.10, -0.11, 0.05, -0.20, 0.3],
                      "supply_current_a_max": [2.41e-3, 1.67e-3, 0.2e-3, 1.9e-3, 0.1e-3],
                      "series_need": [3] * 5, "distinct_values": [2] * 5, "uncommon": [""] * 5})
    from sweep.analysis import yield_bounds
    d["yield_lo"], d["yield_hi"] = yield_bounds(d["yield"], 500, np.ones(5, bool))
    return d


def test_ties_within_the_interval_go_by_supply_current_in_a_battery_study():
    d = _ties_table()
    order = d.sort_values("design")["design"].to_numpy()[np.argsort(rank_designs(d, by_current=True))]
    assert list(order) == [2, 4, 1, 3, 5]       # 1.67 mA beats 2.41 mA; 90 % stays behind
    order = d["design"].to_numpy()[np.argsort(rank_designs(d, by_current=False))]
    assert list(order) == [1, 2, 4, 3, 5]       # regulated: the wider worst-case margin
    # a tie never hands the pick to a design whose verdict is not a pass, when one passes
    order = d["design"].to_numpy()[np.argsort(rank_designs(d, by_current=True,
                                                           eligible=d["design"].to_numpy() != 2))]
    assert list(order[:2]) == [4, 1]


def test_a_yield_target_picks_the_lowest_current_design_that_reaches_it():
    d = _ties_table()
    order = d["design"].to_numpy()[np.argsort(rank_designs(d, yield_min=0.99))]
    # 98.6 % of 500 reaches 99 % within its interval (upper end 99.4 %), 98.0 % does not
    assert d.loc[d["design"] == 2, "yield_hi"].iloc[0] < 0.99 < d.loc[d["design"] == 4, "yield_hi"].iloc[0]
    assert list(order[:2]) == [4, 1] and order[-1] == 5


def test_wilson_interval_matches_scipy():
    # 95 % Wilson score interval against scipy.stats.binomtest(...).proportion_ci("wilson")
    # [book: Wilson 1927; scipy as the outside reference]
    from scipy.stats import binomtest
    from sweep.analysis import wilson_interval
    for n in (10, 100, 500, 1000):
        k = np.array([0, 1, n // 3, n // 2, n - 1, n])
        lo, hi = wilson_interval(k, n)
        for i, kk in enumerate(k):
            ci = binomtest(int(kk), n).proportion_ci(confidence_level=0.95, method="wilson")
            assert lo[i] == pytest.approx(ci.low, abs=1e-9) and hi[i] == pytest.approx(ci.high, abs=1e-9)


@pytest.mark.parametrize("typical_sigma", [1.0, 2.0])
def test_timer_accuracy_alone_gives_the_normal_yield(typical_sigma):
    # Every part ideal (no tolerance), only the timer's typical accuracy varied, one condition:
    # the pulse is t0 (1 + e) with e ~ N(0, sigma), sigma = typical / typical_sigma, clipped
    # at the maximum, so a +-s spec yields 2 Phi(s / sigma) - 1 for s below the maximum
    # [book: any probability text; scipy.stats.norm as the outside reference].
    quiet = dict(QUIET_TIMER, accuracy_monostable=0.02, accuracy_monostable_max=0.06)
    text = """
[study]
circuit = "monostable"
[design]
r = "100k"
c = "10n"
[parts]
resistor_tolerance = "0%%"
capacitor_tolerance = "0%%"
capacitor = "C0G"
[spec]
pulse_width = { target = %r, tolerance = "2.5%%" }
[analysis]
monte_carlo = 4000
typical_sigma = %r
"""
    s0 = study_of(text % (1e-3, typical_sigma), **quiet)
    t0 = float(evaluate("monostable", s0.timer, s0.parts, s0.load, r=100e3, c=10e-9, vcc=9.0,
                        temperature=25.0)["pulse_width_s"])
    s = study_of(text % (t0, typical_sigma), **quiet)
    df = analyse_designs(s, 0, 1)
    sigma = 0.02 / typical_sigma
    p = 2 * norm.cdf(0.025 / sigma) - 1
    se = math.sqrt(p * (1 - p) / 4000)
    assert abs(df["yield"].iloc[0] - p) < 4 * se, (df["yield"].iloc[0], p)
    assert df["yield_lo"].iloc[0] <= p <= df["yield_hi"].iloc[0]
    assert 0.5 < p < 0.999


@pytest.mark.slow
def test_monte_carlo_builds_stay_inside_the_brute_force_worst_case():
    # every Monte Carlo build (parts clipped at their tolerance, timer terms at their maximum)
    # lies inside the worst case, which equals brute-force corner enumeration [derived]
    from sweep.analysis import mc_draws, mc_variation
    from sweep.engine import axis_values, evaluate_block
    for name in ("buzzer", "dosing-pump", "bike-light"):
        s = study_of(open(f"studies/{name}.toml", encoding="utf-8").read())
        s = replace(s, monte_carlo=3000)
        df = analyse_designs(s, 0, 40, Options(monte_carlo=0))
        design = {a.key: df[a.column].to_numpy() for a in s.design}
        cond = axis_values(s.conditions, np.arange(s.n_conditions))
        out = evaluate_block(s.case, design, cond, variation=mc_variation(s, mc_draws(s, 3000), slice(None)),
                             with_spec=False)
        for o in ("frequency_hz", "pulse_width_s", "supply_current_a"):
            if f"{o}_wc_min" not in df:
                continue
            v = out[o].reshape(len(df), -1)
            ok = np.isfinite(df[f"{o}_wc_min"]).to_numpy()
            assert ok.any()
            assert (np.nanmin(v[ok], 1) >= df.loc[ok, f"{o}_wc_min"].to_numpy() * (1 - 1e-12)).all(), (name, o)
            assert (np.nanmax(v[ok], 1) <= df.loc[ok, f"{o}_wc_max"].to_numpy() * (1 + 1e-12)).all(), (name, o)


def test_taguchi_signal_to_noise_is_mean_square_over_variance():
    s = study_of(open("studies/buzzer.toml", encoding="utf-8").read().replace("monte_carlo = 500", "monte_carlo = 64"))
    df = analyse_designs(s, 0, 50)
    m, sd = df["frequency_hz_mc_mean"], df["frequency_hz_mc_std"]
    ok = m.notna()
    # nominal-the-best S/N = 10 log10(mean^2 / s^2) [book: Taguchi methods]
    assert np.allclose(df.loc[ok, "sn_db"], 10 * np.log10(m[ok] ** 2 / sd[ok] ** 2))


def test_latch_monte_carlo_covers_every_condition():
    # a latch has no timing part, but its builds still differ in the chip's quiescent current
    # (typical to its maximum): every build at every condition lies between the latch with the
    # least and the most quiescent current, and the spread shows in the standard deviation
    # [derived]
    s = study_of(open("studies/jig-latch.toml", encoding="utf-8").read())
    df = analyse_designs(s, 0, 1)
    assert df["yield"].iloc[0] == 1.0          # every figure sits inside the spec
    from sweep.engine import Variation, axis_values, evaluate_block
    cond = axis_values(s.conditions, np.arange(s.n_conditions))
    ratio = s.timer.quiescent_max_ratio
    lo = evaluate_block(s.case, {}, cond, with_spec=False, variation=Variation({}, iq=1 / ratio))
    hi = evaluate_block(s.case, {}, cond, with_spec=False, variation=Variation({}, iq=ratio))
    mean = df["supply_current_a_mc_mean"].iloc[0]
    assert lo["supply_current_a"].mean() < mean < hi["supply_current_a"].mean()
    nom = evaluate_block(s.case, {}, cond, with_spec=False)["supply_current_a"].ravel()
    assert df["supply_current_a_mc_std"].iloc[0] > nom.std() * 1.01


def test_uncommon_parts_carry_a_note_and_rank_after_plainer_ties():
    # C0G/NP0 above 100 nF, film below 1 nF, electrolytic below 1 uF are uncommon or costly
    # [cp: distributors' ranges]
    from sweep.analysis import uncommon_parts
    def note(cap, c):
        s = study_of(BASE_UNCOMMON.replace("X7R", cap))
        return uncommon_parts(s, pd.DataFrame({"c_f": [c], "ra_ohm": [1e3], "rb_ohm": [1e3]}))[0]
    assert "C0G" in note("C0G", 470e-9) and note("C0G", 100e-9) == ""
    assert note("polypropylene", 470e-12) and note("polypropylene", 10e-9) == ""
    assert note("electrolytic", 470e-9) and note("electrolytic", 10e-6) == ""
    assert note("X7R", 470e-9) == ""
    d = _ties_table()
    d.loc[d["design"] == 1, "uncommon"] = "C0G ceramic above 100 nF is uncommon and costly"
    d.loc[d["design"] == 2, "wc_margin"] = -0.10                 # tied with design 1 on margin
    order = d["design"].to_numpy()[np.argsort(rank_designs(d))]
    assert list(order[:2]) == [2, 1]


BASE_UNCOMMON = """
[study]
circuit = "astable"
[design]
ra = "1k"
rb = "1k"
c = "470n"
[parts]
capacitor = "X7R"
"""


def test_a_stalling_design_says_where_it_stalls():
    # Electrolytic leakage outruns the charging current of large R and C, hot: the capacitor
    # never reaches the threshold [book: the RC law with a leakage sink]. Each message is
    # checked by evaluating the physics at the condition and corner it names, and a design
    # without one is checked at every corner and condition (brute force) [derived].
    s = study_of("""
[study]
circuit = "monostable"
[design]
r = ["10k", "100k", "1M", "10M"]
c = ["10u", "100u", "1m"]
[conditions]
vcc = [5, 12]
temperature = [25, 85]
[parts]
capacitor = "electrolytic"
capacitor_voltage = "16V"
[spec]
pulse_width = { min = "1", max = "50000" }
[analysis]
monte_carlo = 20
""")
    df = analyse_designs(s, 0, s.n_designs)
    stall_bit = 1 << list(FLAG_BITS).index("timing-stalls")
    from sweep.physics.parts import (capacitance_temperature_factor, leakage_spread,
                                     temperature_envelope)
    cap = s.parts.technology
    kinds = set()
    for _, d in df.iterrows():
        text = d["stalls_at"]
        # the verdict says stalls when the nominal parts stall; a corner's stall is named too
        assert (text.endswith("with nominal parts")) == (d["verdict"] == "stalls")
        assert d["verdict"] != "stalls" or text
        if text:
            m = re.fullmatch(r"stalls at (\d+) V, (\d+) °C with (nominal parts|R at ([+-]\d+) %, "
                             r"C at ([+-]\d+) % and the (low|high) edge of its temperature band, "
                             r"leakage at its (maximum|least), quiescent current at its "
                             r"(maximum|least))", text)
            assert m, text
            kinds.add("nominal" if m.group(3) == "nominal parts" else "corner")
            v, t = float(m.group(1)), float(m.group(2))
            r = d["r_ohm"] * (1 + float(m.group(4) or 0) / 100)
            c = d["c_f"] * (1 + float(m.group(5) or 0) / 100)
            leak = 1.0
            if m.group(4):
                edge = temperature_envelope(cap, t)[0 if m.group(6) == "low" else 1]
                c *= (1 + float(edge)) / float(capacitance_temperature_factor(cap, t))
                b = float(leakage_spread(cap, s.parts.capacitor_voltage_v, 2 / 3 * v))
                leak = b if m.group(7) == "maximum" else 1 / b
            out = evaluate("monostable", s.timer, s.parts, s.load, r=r, c=c, vcc=v, temperature=t,
                           leak_factor=leak)
            assert int(out["flag_mask"]) & stall_bit, text
        else:
            # brute force over every spread that can stall it: tolerances, the temperature
            # envelope's edges and the leakage bounds
            tr, tc = s.parts.resistor_tolerance, s.parts.capacitor_tolerance
            for sr, sc, edge_i, leak_s, v, t in itertools.product(
                    (1 - tr, 1 + tr), (1 - tc, 1 + tc), (0, 1), (-1, 1), (5.0, 12.0), (25.0, 85.0)):
                edge = temperature_envelope(cap, t)[edge_i]
                c = d["c_f"] * sc * (1 + float(edge)) / float(capacitance_temperature_factor(cap, t))
                b = float(leakage_spread(cap, s.parts.capacitor_voltage_v, 2 / 3 * v))
                out = evaluate("monostable", s.timer, s.parts, s.load, r=d["r_ohm"] * sr,
                               c=c, vcc=v, temperature=t, leak_factor=b ** leak_s)
                assert not int(out["flag_mask"]) & stall_bit
    assert kinds == {"nominal", "corner"}          # both wordings are exercised


def test_latch_varies_its_load_led_and_output_stage():
    # the latch has no timing part; what sets its output current is the load resistor (its
    # tolerance), the LED's forward voltage (+-0.15 V, from memory) and the output stage's drop
    # (1/1.2 to 1.2 x typical, from memory). The worst case takes all three towards the
    # strongest or the weakest load current, with the quiescent current at its bounds: brute
    # force over both directions at every condition gives the same extremes [derived: the load
    # line is monotonic in each]
    s = study_of(open("studies/jig-latch.toml", encoding="utf-8").read())
    df = analyse_designs(s, 0, 1)
    from sweep.engine import axis_values
    cond = axis_values(s.conditions, np.arange(s.n_conditions))
    tol, vf = s.parts.resistor_tolerance, 0.15 if s.load.forward_voltage_v > 0 else 0.0
    currents = []
    for strong in (True, False):
        out = evaluate("bistable", s.timer, s.parts, s.load, vcc=cond["vcc"],
                       temperature=cond.get("temperature", 25.0),
                       load_factor=1 - tol if strong else 1 + tol,
                       vf_shift=-vf if strong else vf, stage_factor=1 / 1.2 if strong else 1.2)
        currents.append(np.asarray(out["output_current_a"]))
    assert df["output_current_a_wc_max"].iloc[0] == pytest.approx(currents[0].max(), rel=1e-12)
    assert df["output_current_a_wc_min"].iloc[0] == pytest.approx(currents[1].min(), rel=1e-12)
    assert df["output_current_a_wc_max"].iloc[0] > df["output_current_a_max"].iloc[0] * 1.05
    # and the Monte Carlo builds differ: a spread beyond the conditions' own
    assert df["output_current_a_mc_std"].iloc[0] > 0
