"""The engine: the full-factorial index, its blocks and the broadcast evaluation of a block,
checked against the standard library's own enumeration and the model evaluated one point at a
time."""
from __future__ import annotations

import itertools

import numpy as np
import pytest

from sweep.engine import Variation, axis_values, design_blocks, evaluate_block, flag_text, spec_fail
from sweep.physics import FLAG_BITS, evaluate
from sweep.study import parse_study

STUDY = """[study]
title = "engine check (invented)"
circuit = "astable"
timer = "bipolar"
[design]
ra = ["1k", "4.7k", "22k"]
rb = { series = "E6", min = "10k", max = "100k" }
c = ["10n", "100n"]
[conditions]
vcc = { min = 5, max = 15, steps = 3 }
temperature = [-20, 25, 70]
[parts]
capacitor = "X7R"
capacitor_voltage = "25V"
[spec]
frequency = { min = "100Hz", max = "2kHz" }
[analysis]
monte_carlo = 0
"""


@pytest.fixture(scope="module")
def study():
    return parse_study(STUDY, "engine.toml")


def test_axis_values_number_combinations_as_itertools_product(study):
    # itertools.product enumerates in lexicographic (C) order, the rightmost axis fastest
    # [Python standard library documentation, itertools.product]
    for axes, n in ((study.design, study.n_designs), (study.conditions, study.n_conditions)):
        expected = list(itertools.product(*(a.values for a in axes)))
        assert n == len(expected)
        got = axis_values(axes, np.arange(n))
        assert list(zip(*(got[a.key] for a in axes))) == expected
        # any single number agrees too, not only the whole run in order
        for i in (0, n // 3, n - 1):
            one = axis_values(axes, np.array([i]))
            assert tuple(one[a.key][0] for a in axes) == expected[i]


@pytest.mark.parametrize("chunk,per_design", [(1, None), (7, None), (40, None), (10**6, None),
                                              (100, 3), (100, 1000)])
def test_design_blocks_cover_every_design_exactly_once_in_order(study, chunk, per_design):
    blocks = list(design_blocks(study, chunk, per_design))
    covered = [d for a, b in blocks for d in range(a, b)]
    assert covered == list(range(study.n_designs))
    assert all(b > a for a, b in blocks)                        # no empty block
    per = per_design or study.n_conditions
    # each block holds at most `chunk` points, unless one design alone is more than that
    assert all((b - a) * per <= max(chunk, per) for a, b in blocks)


def _points(study, rng, n):
    d = rng.integers(0, study.n_designs, n)
    c = rng.integers(0, study.n_conditions, n)
    return axis_values(study.design, d), axis_values(study.conditions, c)


@pytest.mark.parametrize("ideal", [False, True])
def test_a_block_equals_the_model_one_point_at_a_time(study, ideal):
    rng = np.random.default_rng(3)
    design = axis_values(study.design, rng.choice(study.n_designs, 5, replace=False))
    cond = axis_values(study.conditions, np.arange(study.n_conditions))
    block = evaluate_block(study.case, design, cond, ideal=ideal, with_spec=False)
    assert block["frequency_hz"].shape == (5, 1, study.n_conditions)
    for i in range(5):
        for j in range(study.n_conditions):
            one = evaluate(study.circuit, study.timer, study.parts, study.load, ideal=ideal,
                           **{k: float(v[i]) for k, v in design.items()},
                           **{k: float(v[j]) for k, v in cond.items()})
            for key, value in one.items():
                want = np.ravel(value)[0]
                got = block[key][i, 0, j] if np.ndim(block[key]) == 3 else np.ravel(block[key])[0]
                if key == "flag_mask":
                    assert int(got) == int(want), (key, i, j)
                else:
                    np.testing.assert_allclose(got, want, rtol=1e-12, equal_nan=True,
                                               err_msg=f"{key} design {i} condition {j}")


def test_a_part_variation_is_the_same_as_evaluating_the_changed_part(study):
    # a build with C 10 % high and RA 1 % low is the nominal design with those values
    design = axis_values(study.design, np.array([4, 17]))
    cond = {k: np.array([v]) for k, v in study.case.nominal.items()}
    var = Variation(part={"c": np.array([[[1.10]]]), "ra": np.array([[[0.99]]])})
    built = evaluate_block(study.case, design, cond, variation=var, with_spec=False)
    changed = dict(design, c=design["c"] * 1.10, ra=design["ra"] * 0.99)
    direct = evaluate_block(study.case, changed, cond, with_spec=False)
    np.testing.assert_allclose(built["high_time_s"], direct["high_time_s"], rtol=1e-12)
    np.testing.assert_allclose(built["supply_current_a"], direct["supply_current_a"], rtol=1e-12)


def test_the_spec_flag_marks_exactly_the_points_outside_the_spec(study):
    design = axis_values(study.design, np.arange(study.n_designs))
    cond = axis_values(study.conditions, np.arange(study.n_conditions))
    out = evaluate_block(study.case, design, cond)
    f = out["frequency_hz"]
    outside = ~((f >= 100.0) & (f <= 2000.0))                    # the study's [spec], NaN misses
    assert outside.any() and (~outside).any()                    # both kinds are present
    miss = (out["flag_mask"] & FLAG_BITS["spec-miss"]) != 0
    assert np.array_equal(miss, outside)
    assert np.array_equal(spec_fail(study.case, out), outside)


def test_flag_text_decodes_every_bit_of_a_mask():
    rng = np.random.default_rng(11)
    codes = list(FLAG_BITS)
    masks = rng.integers(0, 1 << len(codes), 200).astype(np.uint32)
    masks[:2] = 0, (1 << len(codes)) - 1
    texts = flag_text(masks)
    for m, t in zip(masks, texts):
        want = {c for c in codes if int(m) & FLAG_BITS[c]}
        assert set(t.split()) == want
        assert t.split() == [c for c in codes if c in want]      # in the stable order
    assert texts[0] == ""

