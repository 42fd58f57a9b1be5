"""Scrambled Sobol points (`sweep.sobol`): bit for bit against an outside library, and the
properties of a Sobol sequence that any correct generator has."""
from __future__ import annotations

import warnings

import numpy as np
import pytest

from sweep.sobol import MAX_DIM, sobol_points

SEEDS = (0, 1, 42, 20240517, 2**32 - 1)
DIMS = (1, 2, 5, 13, 40)
COUNTS = (1, 7, 500, 1024, 1500)


def scipy_sobol(n, d, seed=None, scramble=True):
    # outside library: scipy.stats.qmc.Sobol (Joe-Kuo direction numbers, linear matrix scramble
    # with digital shift, seeded by numpy.random.default_rng)
    from scipy.stats import qmc
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UserWarning)    # counts that are not powers of two
        return qmc.Sobol(d=d, scramble=scramble, seed=seed).random(n)


@pytest.mark.parametrize("seed", SEEDS)
@pytest.mark.parametrize("d", DIMS)
def test_scrambled_points_equal_scipys_bit_for_bit(seed, d):
    for n in COUNTS:
        ours, theirs = sobol_points(n, d, seed), scipy_sobol(n, d, seed)
        assert ours.dtype == theirs.dtype == np.float64
        assert ours.shape == theirs.shape == (n, d)
        assert np.array_equal(ours, theirs), (seed, d, n)


@pytest.mark.parametrize("d", DIMS)
def test_unscrambled_points_equal_scipys_bit_for_bit(d):
    for n in COUNTS:
        assert np.array_equal(sobol_points(n, d, scramble=False), scipy_sobol(n, d, scramble=False))


def test_the_seed_matters_and_repeats():
    # a generator that ignored the seed, or drew from a global state, fails one of these
    a, b, c = sobol_points(64, 5, 3), sobol_points(64, 5, 3), sobol_points(64, 5, 4)
    assert np.array_equal(a, b)
    assert not np.array_equal(a, c)


def test_first_dimension_is_van_der_corput_in_gray_code_order():
    # unscrambled, dimension 1 is the base-2 radical inverse of the Gray code k ^ (k >> 1):
    # 0, 1/2, 3/4, 1/4, 3/8, 7/8, 5/8, 1/8 [mem: the Antonov-Saleev Gray-code order]
    x = sobol_points(8, 1, scramble=False)[:, 0]
    assert x.tolist() == [0.0, 0.5, 0.75, 0.25, 0.375, 0.875, 0.625, 0.125]


@pytest.mark.parametrize("scramble", [False, True])
def test_every_power_of_two_count_fills_each_interval_once(scramble):
    # the first 2**m points of a Sobol sequence put one point in each interval
    # [k / 2**m, (k + 1) / 2**m) of every coordinate, and a linear matrix scramble with a digital
    # shift keeps that [mem: each one-dimensional projection is a (0, m, 1)-net; Matousek 1998]
    for m in (1, 4, 10):
        x = sobol_points(2**m, MAX_DIM, 7, scramble=scramble)
        cells = np.sort(np.floor(x * 2**m).astype(int), axis=0)
        assert (cells == np.arange(2**m)[:, None]).all(), m


def test_every_two_dimensional_projection_is_a_net_of_the_first_dimensions():
    # dimensions 1 and 2 of the first 2**m points form a (0, m, 2)-net in base 2: every
    # elementary box of area 2**-m holds one point, scrambled or not [mem: the first two
    # dimensions of a Sobol sequence are a (0, 2)-sequence]
    m = 6
    x = sobol_points(2**m, 2, 11)
    for a in range(m + 1):
        row = np.floor(x[:, 0] * 2**a).astype(int)
        col = np.floor(x[:, 1] * 2**(m - a)).astype(int)
        cells = row * 2**(m - a) + col
        assert np.unique(cells).size == 2**m, a


@pytest.mark.parametrize("d", [0, MAX_DIM + 1, 100])
def test_dimensions_outside_the_table_are_refused(d):
    with pytest.raises(ValueError, match=f"{d} dimensions"):
        sobol_points(8, d, 1)


def test_counts_beyond_the_distinct_points_are_refused():
    with pytest.raises(ValueError, match="points"):
        sobol_points(2**30 + 1, 1, 1)
    with pytest.raises(ValueError, match="points"):
        sobol_points(-1, 1, 1)


def test_no_points_is_an_empty_array():
    assert sobol_points(0, 3, 1).shape == (0, 3)


def test_monte_carlo_draws_are_the_outside_librarys_points_mapped():
    # the study's deviations are scipy's scrambled Sobol points (outside library) through the
    # normal inverse distribution, or the uniform one, seeded by the study
    from scipy.special import ndtri
    from sweep.analysis import mc_draws
    from sweep.spreads import varied_parts
    from sweep.study import load_study
    for name in ("bike-light", "dosing-pump"):
        s = load_study(f"studies/{name}.toml")
        z = mc_draws(s, 300)
        u = np.clip(scipy_sobol(300, len(z), s.seed).T, 1e-12, 1 - 1e-12)
        for i, (k, v) in enumerate(z.items()):
            want = ndtri(u[i])
            if k in varied_parts(s):
                want = 2 * u[i] - 1 if s.distribution == "uniform" else np.clip(want / 3, -1, 1)
            assert np.array_equal(v, want), (name, k)
