"""The worst case's corners are evaluated factored (each spread on an axis of its own, so numpy
evaluates each step of the model once per combination of the spreads it depends on). Every
corner's figures must equal, element by element, those of every corner evaluated in full, as
the corners were before they were factored: a brute-force enumeration of all 2^k corners
[derived: the same arithmetic on the same inputs gives the same floating-point result]."""
from __future__ import annotations

import itertools
from pathlib import Path

import numpy as np
import pytest

from sweep.analysis import analyse_block
from sweep.case import axis_values
from sweep.engine import Variation, _one_corner_axis, evaluate_block
from sweep import spreads
from sweep.spreads import worst_case_corners
from sweep.study import load_study, parse_study

EXAMPLES = sorted(Path("studies").glob("*.toml"))

#: variants that switch on the spreads and the circuit the examples lack: electrolytic leakage,
#: a fixed diode drop, a bipolar timer, a swept load resistor, a control voltage, the
#: one-resistor astable (charged from the output, so its stage spread times it)
VARIANTS = {
    "symmetric-led": """
[study]
circuit = "astable-symmetric"
timer = "bipolar"
[design]
r = { series = "E12", min = "1k", max = "1M" }
c = ["10n", "100n"]
[conditions]
vcc = { min = 5, max = 15, steps = 3 }
temperature = { min = -20, max = 70, steps = 3 }
[parts]
capacitor = "X7R"
[load]
resistance = "1k"
to = "ground"
forward_voltage = "2.0V"
kind = "led"
""",
    "electrolytic-bipolar": """
[study]
circuit = "astable"
timer = "bipolar"
[design]
ra = { series = "E12", min = "1k", max = "100k" }
rb = { series = "E12", min = "10k", max = "1M" }
c = ["10u", "47u"]
[conditions]
vcc = { min = 5, max = 15, steps = 3 }
temperature = { min = -20, max = 70, steps = 3 }
control_voltage = { min = 2, max = 4, steps = 2 }
[parts]
capacitor = "electrolytic"
capacitor_voltage = "25V"
[load]
resistance = "1k"
to = "ground"
""",
    "diode-drop-swept-load": """
[study]
circuit = "astable-diode"
timer = "cmos"
[design]
ra = { series = "E6", min = "10k", max = "1M" }
rb = { series = "E6", min = "10k", max = "1M" }
c = ["100n"]
load_resistance = ["330", "1k"]
[conditions]
vcc = { min = 5, max = 12, steps = 3 }
temperature = { min = -10, max = 50, steps = 2 }
[parts]
capacitor = "X5R"
diode_drop = "0.6V"
[load]
forward_voltage = "2.0V"
kind = "led"
""",
}


def _studies():
    out = [pytest.param(load_study(p), id=p.stem) for p in EXAMPLES]
    out += [pytest.param(parse_study(t, f"{k}.toml"), id=k) for k, t in VARIANTS.items()]
    return out


def _enumerated(study, cond, ideal: bool) -> Variation:
    """Every corner written out one by one from the rules of spreads.py's docstring (a part at
    its low or high extreme; a low capacitor with the high DC-bias loss; the load's resistor,
    LED and stage together; the other spreads at their bound or its inverse), without the
    factored arrays: the brute-force reference."""
    parts, extras = spreads.varied_parts(study), spreads.extra_spreads(study, ideal)
    t, v_up = spreads._conditions(study, cond)                  # (1, 1, conditions)
    rows = []
    for signs in itertools.product((-1.0, 1.0), repeat=len(parts + extras)):
        part, kw = {}, {}
        for p, sg in zip(parts, signs):
            lo, hi = spreads._part_extremes(study, p, t, ideal)
            part[p] = lo if sg < 0 else hi
            if p == "c" and not ideal:
                kw["dc_bias"] = spreads.DC_BIAS_SPREAD if sg < 0 else 1 / spreads.DC_BIAS_SPREAD
        for name, sg in zip(extras, signs[len(parts):]):
            if name == "load":
                tol = study.parts.resistor_tolerance
                kw["load_r"] = 1 - tol if sg > 0 else 1 + tol
                if study.load.forward_voltage_v > 0:
                    kw["led_vf"] = -spreads.LED_VF_SPREAD_V if sg > 0 else spreads.LED_VF_SPREAD_V
                kw["stage"] = 1 / spreads.STAGE_SPREAD if sg > 0 else spreads.STAGE_SPREAD
            else:
                b = spreads._bound(study, name, v_up)
                kw[spreads.FIELD[name]] = b if sg > 0 else 1 / b
        rows.append((part, kw))
    nc = t.shape[-1]

    def stack(values):
        return np.concatenate([np.broadcast_to(np.asarray(x, dtype=float), (1, 1, nc))
                               for x in values], axis=1)
    part = {p: stack([r[0][p] for r in rows]) for p in parts}
    keys = sorted({k for r in rows for k in r[1]})
    return Variation(part, **{k: stack([r[1][k] for r in rows]) for k in keys})


@pytest.mark.parametrize("ideal", [False, True], ids=["realistic", "ideal"])
@pytest.mark.parametrize("study", _studies())
def test_factored_corners_equal_every_corner_evaluated_in_full(study, ideal):
    rng = np.random.default_rng(5)
    d_idx = np.unique(np.r_[np.arange(min(20, study.n_designs)),
                            rng.integers(0, study.n_designs, 20)])
    design = axis_values(study.design, d_idx)
    cond = axis_values(study.conditions, np.arange(study.n_conditions))
    corners = worst_case_corners(study, cond, ideal)
    factored = evaluate_block(study.case, design, cond, ideal=ideal, variation=corners.variation,
                              with_spec=False, compiled=False)
    full = evaluate_block(study.case, design, cond, ideal=ideal,
                          variation=_enumerated(study, cond, ideal), with_spec=False,
                          compiled=False)
    nd, nc = len(d_idx), study.n_conditions
    assert set(factored) == set(full)
    axes = (2,) * len(corners.dims) or (1,)
    for key, want in full.items():
        got = np.broadcast_to(factored[key], (nd,) + axes + (nc,)).reshape(nd, corners.count, nc)
        want = np.broadcast_to(want, (nd, corners.count, nc))
        assert np.array_equal(got, want, equal_nan=True), key


def test_a_corners_parts_follow_its_signs():
    # corner k of the flattened axes is the corner Corners.signs[:, k] names: a part sits at the
    # low end of its spread where its sign is negative [derived]
    study = load_study("studies/bike-light.toml")
    cond = axis_values(study.conditions, np.arange(study.n_conditions))
    corners = worst_case_corners(study, cond, False)
    full = _one_corner_axis(corners.variation)
    for i, p in enumerate(corners.dims[:3]):
        m = np.broadcast_to(full.part[p], (1, corners.count, study.n_conditions))[0]
        low = corners.signs[i] < 0
        assert low.sum() == corners.count // 2
        assert (m[low] < m[~low]).all()        # every low corner under every high one


def test_the_worst_case_is_the_extreme_of_every_corner_evaluated_in_full():
    # the analysis reduces the factored corners; the extremes must be those of the corners in
    # full (outputs the timer's band does not widen)
    study = load_study("studies/bike-light.toml")
    df, _ = analyse_block(study, 0, 30)
    design = axis_values(study.design, np.arange(30))
    cond = axis_values(study.conditions, np.arange(study.n_conditions))
    full = evaluate_block(study.case, design, cond,
                          variation=_enumerated(study, cond, False), with_spec=False,
                          compiled=False)
    for o in ("supply_current_a", "junction_temp_c", "duty", "output_current_a"):
        v = np.broadcast_to(full[o], (30,) + full[o].shape[1:]).reshape(30, -1)
        assert np.array_equal(df[f"{o}_wc_min"].to_numpy(), v.min(1)), o
        assert np.array_equal(df[f"{o}_wc_max"].to_numpy(), v.max(1)), o


@pytest.mark.parametrize("study", _studies())
def test_the_kernel_on_every_corner_in_full_agrees_with_the_factored_corners(study):
    # asked to run the corners, the compiled kernel evaluates them flattened into one axis: the
    # same figures as the factored numpy evaluation, to the kernel's 1e-12
    from sweep.physics import kernel
    if study.circuit not in kernel.COMPILED or not kernel.available():
        pytest.skip("the kernel does not cover this circuit")
    design = axis_values(study.design, np.arange(min(30, study.n_designs)))
    cond = axis_values(study.conditions, np.arange(study.n_conditions))
    corners = worst_case_corners(study, cond, False)
    numpy_ = evaluate_block(study.case, design, cond, variation=corners.variation,
                            with_spec=False, compiled=False)
    compiled = evaluate_block(study.case, design, cond, variation=corners.variation,
                              with_spec=False, compiled=True)
    nd = len(next(iter(design.values())))
    for key, got in compiled.items():
        want = np.broadcast_to(numpy_[key], (nd,) + (2,) * len(corners.dims) + (study.n_conditions,))
        want = want.reshape(got.shape)
        if key == "flag_mask":
            assert np.array_equal(got, want)
        else:
            assert np.allclose(got, want, rtol=1e-12, atol=0, equal_nan=True), key
