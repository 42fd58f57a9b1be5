"""The estimate before a run and the size guard: counts against independent enumeration, the
thinned timing sample, the guard's limits."""
from __future__ import annotations

import dataclasses
import math

import eseries
import pytest

from sweep.errors import InputError
from sweep.estimate import (LIMIT_POINTS, LIMIT_SECONDS, Estimate, _thinned, clearly_small,
                            estimate, evaluations, guard, human_time, over_limits)
from sweep.study import parse_study

STUDY = """[study]
title = "estimate check (invented)"
circuit = "astable"
timer = "cmos"
[design]
ra = { series = "E12", min = "10k", max = "100k" }
rb = { series = "E6", min = "1k", max = "1M" }
c = ["10n", "22n", "47n"]
[conditions]
vcc = { min = 3, max = 15, steps = 5 }
temperature = { min = -40, max = 85, steps = 6 }
[spec]
frequency = { target = "1kHz", tolerance = "10%" }
[analysis]
monte_carlo = 100
"""


@pytest.fixture(scope="module")
def study():
    return parse_study(STUDY, "estimate.toml")


def test_the_point_count_is_the_product_of_the_axis_lengths(study):
    # the axis lengths from the eseries package, a library timer-sweep did not write
    # [std IEC 60063; erange is inclusive of both ends]
    ra = len(list(eseries.erange(eseries.E12, 10e3, 100e3)))        # 13
    rb = len(list(eseries.erange(eseries.E6, 1e3, 1e6)))            # 19
    designs, conditions = ra * rb * 3, 5 * 6
    assert (study.n_designs, study.n_conditions) == (designs, conditions)
    est = estimate(study)
    assert est.points == designs * conditions == study.n_points
    # every point is evaluated at least once, and the Monte Carlo adds its builds on top
    assert evaluations(study) > est.points
    more = dataclasses.replace(study, monte_carlo=200)
    # the Monte Carlo is linear in its builds: 100 more builds of at most every design at
    # every condition [derived]
    added = evaluations(more) - evaluations(study)
    assert 0 < added <= 100 * designs * conditions and added % (100 * conditions) == 0
    assert est.seconds > est.write_seconds > 0 and est.rate > 0 and est.bytes > 0


def test_the_timing_sample_keeps_every_axis_end_and_stays_under_its_size(study):
    # (the ends are kept, so two axes never go below 2 x 2 conditions)
    for most in (1000, 30, 7, 4):
        thin = _thinned(study, most)
        n = math.prod(len(a.values) for a in thin.conditions)
        assert n <= most
        for full, part in zip(study.conditions, thin.conditions):
            assert set(part.values) <= set(full.values)                 # a subset, never new
            assert part.values[0] == full.values[0] and part.values[-1] == full.values[-1]
    assert _thinned(study, 10**6).conditions == study.conditions        # nothing to thin


def test_a_clearly_small_study_is_inside_every_limit(study):
    assert clearly_small(study)
    assert over_limits(estimate(study)) == []


def test_the_guard_names_each_limit_crossed_and_the_largest_axis(study):
    ok = Estimate(points=10, evaluations=10, bytes=1, seconds=1.0, rate=1.0)
    guard(study, ok)                                                     # no refusal
    big = dataclasses.replace(ok, points=LIMIT_POINTS + 1, seconds=LIMIT_SECONDS * 2)
    assert len(over_limits(big)) == 2
    with pytest.raises(InputError) as e:
        guard(study, big)
    msg = e.value.problem
    assert f"{LIMIT_POINTS + 1:,} points" in msg and "--yes" in msg
    longest = max(study.axes, key=lambda a: len(a.values))
    assert f"'{longest.key}' with {len(longest.values):,} values" in msg


@pytest.mark.parametrize("seconds,words", [(0.2, "under a second"), (45, "about 45 s"),
                                           (600, "about 10 min"), (5400, "about 90 min"),
                                           (36000, "about 10.0 h")])
def test_human_time_converts_with_60_s_a_minute_and_3600_s_an_hour(seconds, words):
    # [std: the minute and the hour, BIPM SI brochure table 8]
    assert human_time(seconds) == words


def test_the_memory_counts_the_kernel_where_it_runs(study, monkeypatch):
    # numba and the cached stages take about 61 MiB once loaded [measured]; the estimate adds
    # them only where the kernel runs the sweep
    from sweep.estimate import KERNEL_BYTES
    from sweep.physics import kernel
    monkeypatch.setenv(kernel.ENV, "0")
    without = estimate(study, sample=200).bytes
    monkeypatch.setenv(kernel.ENV, "1")
    monkeypatch.setattr(kernel, "MIN_POINTS", 1)
    with_kernel = estimate(study, sample=200).bytes
    assert with_kernel - without == (KERNEL_BYTES if kernel.available() else 0)
