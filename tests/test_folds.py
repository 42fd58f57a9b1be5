"""Reductions folded into the compiled kernel (sweep/folds.py, engine.fold_block): the Monte
Carlo's counts and sums and the worst case's extremes, taken tile by tile so the grid is never
written to memory, must give the figures the numpy model's full grid gives when reduced by numpy
(analysis._summed_monte_carlo, analysis._worst_case): the same good builds and first stalls,
means, deviations and extremes within the kernel's 1e-12 [derived: the same arithmetic in
another order of summation]. The numpy model is itself checked against published formulas and
scipy's ODE solver in tests/reference."""
from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

pytest.importorskip("numba")

from sweep import analysis                                  # noqa: E402
from sweep.case import axis_values                          # noqa: E402
from sweep.physics import kernel                            # noqa: E402
from sweep.spreads import worst_case_corners               # noqa: E402
from sweep.study import load_study, parse_study             # noqa: E402

from .test_analysis_corners import VARIANTS                 # noqa: E402

EXAMPLES = sorted(Path("studies").glob("*.toml"))
RTOL = 1e-12

#: a study whose big resistors against an electrolytic's leakage stall at some corners only
STALLS = """
[study]
circuit = "astable"
timer = "cmos"
[design]
ra = { series = "E6", min = "100k", max = "4.7M" }
rb = { series = "E6", min = "100k", max = "4.7M" }
c = ["47u", "100u"]
[conditions]
vcc = { min = 5, max = 15, steps = 3 }
temperature = { min = 0, max = 60, steps = 3 }
[parts]
capacitor = "electrolytic"
capacitor_voltage = "16V"
[spec]
frequency = { target = "0.05Hz", tolerance = "50%" }
[analysis]
monte_carlo = 60
"""


#: every part given as a condition: no design axis at all, one design
NO_DESIGN = """
[study]
circuit = "astable"
timer = "cmos"
[design]
[conditions]
vcc = [5, 12]
ra = ["10k"]
rb = ["47k"]
c = ["100n"]
[analysis]
monte_carlo = 40
"""


def _compiled_studies():
    out = [pytest.param(load_study(p), id=p.stem) for p in EXAMPLES]
    out += [pytest.param(parse_study(t, f"{k}.toml"), id=k) for k, t in VARIANTS.items()]
    out.append(pytest.param(parse_study(STALLS, "stalls.toml"), id="stalls"))
    out.append(pytest.param(parse_study(NO_DESIGN, "no-design.toml"), id="no-design"))
    return [p for p in out if p.values[0].circuit in kernel.COMPILED]


def _close(got, want, what):
    got, want = np.asarray(got, float), np.asarray(want, float)
    assert np.array_equal(np.isnan(got), np.isnan(want)), what
    assert np.allclose(got, want, rtol=RTOL, atol=0, equal_nan=True), (what, got, want)


def _block(study, n):
    design = axis_values(study.design, np.arange(min(n, study.n_designs)))
    cond = axis_values(study.conditions, np.arange(study.n_conditions))
    return design, cond


@pytest.mark.parametrize("ideal", [False, True], ids=["realistic", "ideal"])
@pytest.mark.parametrize("study", _compiled_studies())
def test_the_folded_worst_case_equals_the_full_grid_reduced(study, ideal):
    design, cond = _block(study, 300)       # several tiles of whole rows
    corners = worst_case_corners(study, cond, ideal)
    outs = analysis.summary_outputs(study)
    lo, hi, stall = analysis._worst_case(study, design, cond, corners, outs, ideal)
    f_lo, f_hi, f_stall = analysis._folded_worst_case(study, design, cond, corners, outs, ideal)
    for o in outs:
        _close(f_lo[o], lo[o], f"{o} min")
        _close(f_hi[o], hi[o], f"{o} max")
    assert np.array_equal(f_stall, stall)


def test_the_stall_study_stalls_at_corners_only():
    # the stall comparison above must not pass on "never stalls" alone
    study = parse_study(STALLS, "stalls.toml")
    design, cond = _block(study, 300)
    corners = worst_case_corners(study, cond, False)
    _, _, stall = analysis._folded_worst_case(study, design, cond, corners,
                                              analysis.summary_outputs(study), False)
    assert 0 < (stall >= 0).sum() < len(stall)
    assert len(np.unique(stall[stall >= 0])) > 1        # not always the same corner


def _reached(study, n=40):
    """Up to n designs the worst-case screening lets into the Monte Carlo, those in spec with
    nominal parts first (their yields lie between 0 and 1 more often)."""
    df, _ = analysis.analyse_block(study, 0, min(study.n_designs, 3000))
    df = df[df["reach"]] if df["reach"].any() else df
    df = df.sort_values(["feasible", "wc_margin"], ascending=False, kind="stable")
    return np.sort(df["design"].to_numpy()[:n])


@pytest.mark.parametrize("ideal", [False, True], ids=["realistic", "ideal"])
@pytest.mark.parametrize("study", _compiled_studies())
def test_the_folded_monte_carlo_equals_the_full_grid_summed(study, ideal, monkeypatch):
    designs = _reached(study)
    opt = analysis.Options(ideal=ideal, monte_carlo=min(study.monte_carlo, 120) or 50)
    monkeypatch.setattr(analysis, "can_fold", lambda *a, **k: False)
    want = analysis.monte_carlo_block(study, designs, opt)
    monkeypatch.setattr(analysis, "can_fold", lambda *a, **k: True)
    got = analysis.monte_carlo_block(study, designs, opt)
    assert np.array_equal(got["yield"].to_numpy(), want["yield"].to_numpy())
    for c in want.columns[2:]:
        _close(got[c], want[c], c)


def test_some_yields_lie_strictly_between_nothing_and_everything(monkeypatch):
    # the yield comparison above must see builds both pass and fail
    study = load_study("studies/bike-light.toml")
    monkeypatch.setattr(analysis, "can_fold", lambda *a, **k: True)
    y = analysis.monte_carlo_block(study, _reached(study), analysis.Options(monte_carlo=120))["yield"]
    assert ((y > 0) & (y < 1)).any()


def test_the_folded_sums_do_not_depend_on_how_builds_are_split(monkeypatch):
    # the fold adds builds in order whatever the kernel call holds: bit for bit the same
    study = load_study("studies/bike-light.toml")
    designs = _reached(study)
    monkeypatch.setattr(analysis, "can_fold", lambda *a, **k: True)
    whole = analysis.monte_carlo_block(study, designs, analysis.Options(monte_carlo=200))
    monkeypatch.setattr(analysis, "FOLD_CHUNK", 3 * len(designs) * study.n_conditions)
    split = analysis.monte_carlo_block(study, designs, analysis.Options(monte_carlo=200))
    assert whole.equals(split)


def test_a_big_sweep_folds_inside_the_kernel(monkeypatch):
    # where the kernel runs the sweep, the Monte Carlo and the astable's corners take the folds
    study = load_study("studies/bike-light.toml")
    calls = []
    real = analysis.fold_block
    monkeypatch.setattr(analysis, "fold_block", lambda *a, **k: calls.append(a[3]) or real(*a, **k))
    monkeypatch.setattr(kernel, "MIN_POINTS", 1)
    assert analysis.can_fold(study.case, {}, False) == (study.circuit in kernel.COMPILED)
    analysis.analyse_block(study, 0, 50)
    analysis.monte_carlo_block(study, np.arange(1, 51), analysis.Options(monte_carlo=20))
    kinds = {type(f).__name__ for f in calls}
    assert "Moments" in kinds
    assert ("Extremes" in kinds) == (study.circuit in analysis.FOLDED_CORNERS)


def test_graded_blocks_grow_only_where_every_grade_folds(monkeypatch):
    # each grade's sub-study counts only its own points: where they fall under the kernel's
    # threshold they keep the factored corners, and with them the smaller blocks
    study = parse_study("""
[study]
circuit = "astable"
timer = "cmos"
[design]
ra = { series = "E12", min = "1k", max = "1M" }
rb = { series = "E12", min = "1k", max = "1M" }
c = ["1n", "10n"]
resistor_tolerance = ["1%", "5%"]
[conditions]
vcc = [5, 15]
""", "grades.toml")
    assert len(study.grade_plan) == 2
    monkeypatch.setattr(kernel, "MIN_POINTS", study.n_points)          # the whole study, no grade
    assert not analysis.folds_corners(study, False)
    assert analysis.block_points(study, False) == analysis.ANALYSIS_CHUNK
    monkeypatch.setattr(kernel, "MIN_POINTS", 1)
    assert analysis.folds_corners(study, False)
    assert analysis.block_points(study, False) == analysis.FOLDED_CHUNK
