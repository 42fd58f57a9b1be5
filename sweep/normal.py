"""The standard normal's inverse distribution function in numpy, for the Monte Carlo's draws.

`ndtri(p)` gives the same float64 array, bit for bit, as ``scipy.special.ndtri(p)`` without
importing scipy.special (about 0.2 s). Both are Moshier's algorithm [book: S. L. Moshier,
"Methods and Programs for Mathematical Functions", 1989; Cephes Mathematical Library, ndtri]:

1. Central part, exp(-2) < p < 1 - exp(-2): with y = p - 0.5,
   x = sqrt(2 pi) (y + y * y^2 P0(y^2) / Q0(y^2)).
2. Tails (p at most exp(-2), or 1 - p at most exp(-2), the upper tail mirrored): with
   x = sqrt(-2 ln p), z = 1/x, the result is -(x - ln(x)/x - z P(z) / Q(z)), P/Q = P1/Q1 for
   x < 8 (p above exp(-32)) and P2/Q2 beyond.
3. Each P is evaluated by Horner's rule from its leading coefficient and each Q has a leading
   coefficient of 1 (Cephes' ``polevl`` and ``p1evl``): one multiply then one add per step,
   each rounded, which numpy's separate ufuncs do too, so every rounding falls where it does
   in the C library.

p = 0 gives -inf, p = 1 gives +inf, p outside [0, 1] or NaN gives NaN (a NaN input with its
sign bit flipped, as in the C code; a scalar gives a numpy scalar).

The natural logarithms must be the C library's ``log``, which the compiled ndtri calls: numpy's
own vectorised float64 log (on processors with the widest vector instructions) differs from it by one unit in the last
place on about one input in a thousand, enough to move the tail's result by one unit too.
numpy's vectorised loop takes only outputs of positive stride; `_c_log` writes into a reversed
view, so numpy calls the C library's log element by element (still one ufunc call, no Python
loop). `tests/test_normal.py` holds `_c_log` equal to the standard library's ``math.log`` (the C
library's) and the whole function bit for bit equal to scipy's on millions of inputs: a numpy
that vectorised this loop too would fail there, not pass silently.
"""
from __future__ import annotations

import numpy as np

# Boundaries and constants [book: Moshier 1989, Cephes ndtri]
EXP_M2 = 0.13533528323661269189          # exp(-2): the central part's edge
S2PI = 2.50662827463100050242            # sqrt(2 pi)

# Central part, |p - 0.5| <= 0.5 - exp(-2): P0 (degree 4), Q0 (degree 8, leading 1 omitted)
P0 = (-5.99633501014107895267e1, 9.80010754185999661536e1, -5.66762857469070293439e1,
      1.39312609387279679503e1, -1.23916583867381258016e0)
Q0 = (1.95448858338141759834e0, 4.67627912898881538453e0, 8.63602421390890590575e1,
      -2.25462687854119370527e2, 2.00260212380060660359e2, -8.20372256168333339912e1,
      1.59056225126211695515e1, -1.18331621121330003142e0)

# Tail, 2 <= sqrt(-2 ln p) < 8 (exp(-32) < p <= exp(-2)): P1 (degree 8), Q1 (degree 8)
P1 = (4.05544892305962419923e0, 3.15251094599893866154e1, 5.71628192246421288162e1,
      4.40805073893200834700e1, 1.46849561928858024014e1, 2.18663306850790267539e0,
      -1.40256079171354495875e-1, -3.50424626827848203418e-2, -8.57456785154685413611e-4)
Q1 = (1.57799883256466749731e1, 4.53907635128879210584e1, 4.13172038254672030440e1,
      1.50425385692907503408e1, 2.50464946208309415979e0, -1.42182922854787788574e-1,
      -3.80806407691578277194e-2, -9.33259480895457427372e-4)

# Far tail, 8 <= sqrt(-2 ln p) <= 64 (p down to the smallest subnormal): P2, Q2
P2 = (3.23774891776946035970e0, 6.91522889068984211695e0, 3.93881025292474443415e0,
      1.33303460815807542389e0, 2.01485389549179081538e-1, 1.23716634817820021358e-2,
      3.01581553508235416007e-4, 2.65806974686737550832e-6, 6.23974539184983293730e-9)
Q2 = (6.02427039364742014255e0, 3.67983563856160859403e0, 1.37702099489081330271e0,
      2.16236993594496635890e-1, 1.34204006088543189037e-2, 3.28014464682127739104e-4,
      2.89247864745380683936e-6, 6.79019408009981274425e-9)


def _polevl(x: np.ndarray, coef: tuple[float, ...]) -> np.ndarray:
    """coef[0] x^n + ... + coef[n] by Horner's rule, leading coefficient first (ans = ans x + c,
    multiply then add, each rounded)."""
    ans = coef[0] * x
    ans += coef[1]
    for c in coef[2:]:
        ans *= x
        ans += c
    return ans


def _p1evl(x: np.ndarray, coef: tuple[float, ...]) -> np.ndarray:
    """x^n + coef[0] x^(n-1) + ... + coef[n-1]: Horner's rule with a leading 1."""
    ans = x + coef[0]
    for c in coef[1:]:
        ans *= x
        ans += c
    return ans


def _c_log(x: np.ndarray) -> np.ndarray:
    """Natural logarithm of a 1-D array through the C library's log (see the module docstring):
    numpy's log written into a view of negative stride, read back in order."""
    backwards = np.empty_like(x)[::-1]
    np.log(x, out=backwards)              # backwards[i] = log(x[i]), stored last to first
    return np.ascontiguousarray(backwards)


def _tail(y: np.ndarray) -> np.ndarray:
    """ndtri of the lower tail, 0 < y <= exp(-2) (a negative result)."""
    x = np.sqrt(-2.0 * _c_log(y))
    x0 = x - _c_log(x) / x
    z = 1.0 / x
    near = x < 8.0
    x1 = np.empty_like(x)
    zn, zf = z[near], z[~near]
    x1[near] = zn * _polevl(zn, P1) / _p1evl(zn, Q1)
    x1[~near] = zf * _polevl(zf, P2) / _p1evl(zf, Q2)
    return -(x0 - x1)


def ndtri(p: np.ndarray) -> np.ndarray:
    """The standard normal deviate whose lower-tail probability is p (float64, any shape)."""
    p = np.asarray(p, dtype=np.float64)
    flat = p.ravel()
    upper = flat > 1.0 - EXP_M2
    y = np.where(upper, 1.0 - flat, flat)              # the upper tail mirrored onto the lower
    central = y > EXP_M2                               # there y = p: no mirror
    tail = (y > 0.0) & ~central
    yc = flat - 0.5                  # the central formula on every point, kept where central
    with np.errstate(invalid="ignore", over="ignore"):     # infinite p: replaced below
        y2 = yc * yc
        out = y2 * _polevl(y2, P0)
        out /= _p1evl(y2, Q0)
    out *= yc
    out += yc
    out *= S2PI
    out[~central] = np.nan
    t = _tail(y[tail])
    out[tail] = np.where(upper[tail], -t, t)
    out[flat == 0.0] = -np.inf
    out[flat == 1.0] = np.inf
    nan = np.isnan(flat)
    out[nan] = -flat[nan]      # the C code carries a NaN through the lower tail's sign change
    return out.reshape(p.shape)[()]
