"""The standard normal's inverse distribution function (`sweep.normal.ndtri`): bit for bit
against an outside library on millions of inputs, and against facts of the normal distribution
that any correct inverse has."""
from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest
from scipy.special import ndtri as scipy_ndtri   # outside library: Moshier's Cephes ndtri, compiled

from sweep.analysis import mc_draws
from sweep.normal import EXP_M2, _c_log, ndtri
from sweep.study import parse_study

ROOT = Path(__file__).resolve().parents[1]

TINY = np.nextafter(0.0, 1.0)                      # the smallest subnormal, 2**-1074
BELOW_ONE = np.nextafter(1.0, 0.0)


def same_bits(a, b) -> bool:
    """Equal as float64 bit patterns (so -0.0 != 0.0 and a NaN's sign and payload count)."""
    a, b = np.asarray(a), np.asarray(b)
    return (a.dtype == b.dtype == np.float64 and a.shape == b.shape
            and np.array_equal(a.view(np.int64), b.view(np.int64)))


def assert_same_as_scipy(p):
    p = np.asarray(p, dtype=np.float64)
    ours, theirs = ndtri(p), scipy_ndtri(p)
    bad = ours.view(np.int64) != theirs.view(np.int64)
    assert not bad.any(), (int(bad.sum()), p[bad][:5], ours[bad][:5], theirs[bad][:5])
    assert same_bits(ours, theirs)


def neighbours(x: float, k: int = 4) -> np.ndarray:
    """x and its k float64 neighbours on each side."""
    down, up, out = x, x, [x]
    for _ in range(k):
        down, up = np.nextafter(down, -np.inf), np.nextafter(up, np.inf)
        out += [down, up]
    return np.array(out)


def test_dense_grid_and_its_mirror():
    p = np.linspace(0.0, 1.0, 2_000_001)[1:-1]
    assert_same_as_scipy(p)
    assert_same_as_scipy(1.0 - p)


def test_near_zero_and_one():
    k = np.arange(1, 301, dtype=np.float64)
    decades = np.concatenate([10.0 ** -k, 2.5 * 10.0 ** -k, 7.0 * 10.0 ** -k])
    decades = decades[decades > 0.0]
    powers = np.ldexp(1.0, np.arange(-1074, 0))                   # 2**-1074 .. 2**-1
    subnormals = np.random.default_rng(7).integers(1, 2**52, 100_000).view(np.float64)
    ends = np.concatenate([neighbours(TINY, 0), neighbours(BELOW_ONE, 20)[1:],
                           np.nextafter(1.0, 0.0) - np.ldexp(1.0, -np.arange(53, 60))])
    for p in (decades, powers, subnormals, ends):
        assert_same_as_scipy(p)
        assert_same_as_scipy(1.0 - p[p < 0.5])
    assert subnormals.max() < np.finfo(np.float64).tiny      # all of them really are subnormal


def test_the_algorithms_region_boundaries():
    # exp(-2) and 1 - exp(-2) split the central part from the tails; exp(-32) splits the two
    # tail fits (sqrt(-2 ln p) = 8) [book: Moshier 1989, Cephes ndtri]
    assert EXP_M2 == math.exp(-2.0)
    edges = [EXP_M2, 1.0 - EXP_M2, math.exp(-32.0), 1.0 - math.exp(-32.0), 0.5]
    assert_same_as_scipy(np.concatenate([neighbours(e, 200) for e in edges]))
    # the neighbours of exp(-32) include p whose sqrt(-2 ln p) is exactly 8, the switch itself
    assert (np.sqrt(-2.0 * _c_log(neighbours(math.exp(-32.0), 200))) == 8.0).any()


@pytest.mark.parametrize("seed", [0, 1, 42, 20240517, 2**32 - 1])
def test_random_points(seed):
    rng = np.random.default_rng(seed)
    uniform = rng.random(500_000)
    logs = 10.0 ** -rng.uniform(0.0, 320.0, 500_000)               # every tail, far ones too
    tail = rng.uniform(0.0, EXP_M2, 500_000)
    for p in (uniform, logs, tail):
        assert_same_as_scipy(p)
        assert_same_as_scipy(1.0 - p)


def test_special_values():
    p = np.array([0.0, -0.0, 1.0, 0.5, np.nan, -np.nan, -1.0, 2.0, -TINY, np.nextafter(1.0, 2.0),
                  np.inf, -np.inf, 1e300, -1e300])
    assert_same_as_scipy(p)
    z = ndtri(p)
    assert z[0] == z[1] == -np.inf and z[2] == np.inf and z[3] == 0.0
    assert np.isnan(z[4:]).all()


def test_shapes_and_scalars():
    u = np.random.default_rng(3).random((1000, 15))
    assert same_bits(ndtri(u.T), scipy_ndtri(u.T))                 # a transposed view, as drawn
    assert same_bits(ndtri(u[:, ::3]), scipy_ndtri(u[:, ::3]))
    assert same_bits(ndtri(np.zeros((0, 4))), scipy_ndtri(np.zeros((0, 4))))
    s = ndtri(0.975)
    assert isinstance(s, np.float64) and s == scipy_ndtri(0.975)
    assert same_bits(ndtri([0.1, 0.9]), scipy_ndtri([0.1, 0.9]))


def test_the_logarithm_is_the_c_librarys():
    # the standard library's math.log calls the C library's log, as the compiled ndtri does;
    # inputs are the tails' p (down to subnormals) and sqrt(-2 ln p) in [2, 38.6]
    rng = np.random.default_rng(11)
    x = np.concatenate([10.0 ** -rng.uniform(0.0, 323.0, 200_000), rng.uniform(2.0, 38.6, 200_000)])
    expected = np.array([math.log(v) for v in x])
    assert np.array_equal(_c_log(x), expected)


def test_against_normal_tables():
    # the 97.5 % point 1.959963984540054 and the 90 % point 1.2815515655446004 of the standard
    # normal [book: Abramowitz & Stegun, Handbook of Mathematical Functions, 26.2; to 16 digits
    # from memory]
    assert ndtri(0.975) == pytest.approx(1.959963984540054, abs=1e-15)
    assert ndtri(0.025) == pytest.approx(-1.959963984540054, abs=1e-15)
    assert ndtri(0.9) == pytest.approx(1.2815515655446004, abs=1e-15)
    assert ndtri(0.5) == 0.0
    # symmetry: the quantile of 1 - p is minus the quantile of p (both p and 1 - p exact here)
    p = np.ldexp(np.arange(1, 2**12), -12)
    assert np.array_equal(ndtri(1.0 - p), -ndtri(p))


def phi(x: float) -> float:
    """The standard normal distribution function, 0.5 erfc(-x / sqrt 2) [book: Abramowitz &
    Stegun 26.2.29], through the standard library's erfc."""
    return 0.5 * math.erfc(-x / math.sqrt(2.0))


def test_distribution_function_undoes_it():
    p = np.linspace(0.0, 1.0, 20_001)[1:-1]
    back = np.array([phi(x) for x in ndtri(p)])
    assert np.abs(back - p).max() <= 1e-15
    # the far lower tail, relative: the slope there turns x's own rounding (a few 1e-16 of x)
    # into a relative error of about x**2 times it
    q = 10.0 ** -np.arange(1.0, 301.0)
    x = ndtri(q)
    back = np.array([phi(v) for v in x])
    assert (np.abs(back / q - 1.0) <= 1e-15 * (1.0 + x * x)).all()


@pytest.mark.parametrize("name", ["bike-light", "buzzer", "dosing-pump", "missing-pulse"])
def test_the_monte_carlos_draws_are_scipys(monkeypatch, name):
    # every study's draws, bit for bit those scipy's ndtri gives from the same Sobol points
    study = parse_study((ROOT / "studies" / f"{name}.toml").read_text(encoding="utf-8"), "s.toml")
    ours = mc_draws(study, 3000)
    calls = []
    monkeypatch.setattr("sweep.normal.ndtri", lambda u: calls.append(1) or scipy_ndtri(u))
    theirs = mc_draws(study, 3000)
    assert calls                                       # the draws really went through scipy
    assert ours.keys() == theirs.keys()
    assert all(same_bits(ours[k], theirs[k]) for k in ours)
