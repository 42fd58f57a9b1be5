"""Scrambled Sobol points in numpy, for the Monte Carlo's common random numbers.

`sobol_points(n, d, seed)` gives the same float64 array, bit for bit, as
``scipy.stats.qmc.Sobol(d, scramble=True, seed=seed).random(n)`` (30 bits, the first point
included, any n up to 2**30, d up to `MAX_DIM`), without importing scipy.stats (about 1 s):

1. Direction numbers from the primitive polynomials and initial numbers of Joe and Kuo's table
   (`_JOE_KUO`), extended by the usual recurrence [paper: Joe & Kuo 2008, eq. (1)]; the first
   dimension has every m_j = 1.
2. Scrambling (`scramble=True`), with ``np.random.default_rng(seed)`` drawing, in this order:
   a digital shift, a (d, 30) array of bits (bit j weighs 2**j), then a (d, 30, 30) array of
   bits kept below the diagonal (the diagonal set to 1), one lower-triangular matrix per
   dimension, most significant bit first, that multiplies every direction number over GF(2)
   (the linear matrix scramble) [paper: J. Matousek, "On the L2-discrepancy for anchored
   boxes", J. Complexity 14 (1998)].
3. Point k is the shift XOR the direction numbers picked by the set bits of k's Gray code,
   k ^ (k >> 1), times 2**-30 (exact in float64).

Everything is vectorised: loops run over at most 30 bits, never over points.
"""
from __future__ import annotations

from functools import cache

import numpy as np

BITS = 30          # bits per coordinate: 2**BITS distinct points
MAX_DIM = 40       # dimensions the embedded table covers

# Primitive polynomials and initial direction numbers of dimensions 2..40, one dimension per
# line: dimension, degree s, the polynomial's inner coefficients a (x^s + a_1 x^(s-1) + ... +
# a_(s-1) x + 1, a_1 the most significant bit of a), then m_1 .. m_s. [paper: S. Joe and
# F. Y. Kuo, "Constructing Sobol sequences with better two-dimensional projections", SIAM J.
# Sci. Comput. 30 (2008) 2635-2654; their table new-joe-kuo-6.21201, first 40 dimensions]
_JOE_KUO = """
2 1 0 1
3 2 1 1 3
4 3 1 1 3 1
5 3 2 1 1 1
6 4 1 1 1 3 3
7 4 4 1 3 5 13
8 5 2 1 1 5 5 17
9 5 4 1 1 5 5 5
10 5 7 1 1 7 11 19
11 5 11 1 1 5 1 1
12 5 13 1 1 1 3 11
13 5 14 1 3 5 5 31
14 6 1 1 3 3 9 7 49
15 6 13 1 1 1 15 21 21
16 6 16 1 3 1 13 27 49
17 6 19 1 1 1 15 7 5
18 6 22 1 3 1 15 13 25
19 6 25 1 1 5 5 19 61
20 7 1 1 3 7 11 23 15 103
21 7 4 1 3 7 13 13 15 69
22 7 7 1 1 3 13 7 35 63
23 7 8 1 3 5 9 1 25 53
24 7 14 1 3 1 13 9 35 107
25 7 19 1 3 1 5 27 61 31
26 7 21 1 1 5 11 19 41 61
27 7 28 1 3 5 3 3 13 69
28 7 31 1 1 7 13 1 19 1
29 7 32 1 3 7 5 13 19 59
30 7 37 1 1 3 9 25 29 41
31 7 41 1 3 5 13 23 1 55
32 7 42 1 3 7 3 13 59 17
33 7 50 1 3 1 3 5 53 69
34 7 55 1 1 5 5 23 33 13
35 7 56 1 1 7 7 1 61 123
36 7 59 1 1 7 9 13 61 49
37 7 62 1 3 3 5 3 55 33
38 8 14 1 3 1 15 31 13 49 245
39 8 21 1 3 5 15 31 59 63 97
40 8 22 1 3 1 11 11 11 77 249
"""


@cache
def _direction_numbers() -> np.ndarray:
    """(MAX_DIM, BITS) uint32: direction number j of each dimension, m_j * 2**(BITS-1-j).

    m_j = 2 a_1 m_(j-1) ^ 4 a_2 m_(j-2) ^ ... ^ 2**(s-1) a_(s-1) m_(j-s+1) ^ 2**s m_(j-s)
    ^ m_(j-s) [paper: Joe & Kuo 2008, eq. (1)]. Once per process, over 40 x 30 integers."""
    m = np.zeros((MAX_DIM, BITS), dtype=np.int64)
    m[0] = 1                               # the first dimension: every m_j = 1
    for row in _JOE_KUO.split("\n"):
        if not row.strip():
            continue
        dim, s, a, *init = (int(x) for x in row.split())
        i = dim - 1
        m[i, :s] = init
        for j in range(s, BITS):
            x = m[i, j - s] ^ (m[i, j - s] << s)
            for k in range(1, s):
                if (a >> (s - 1 - k)) & 1:
                    x ^= m[i, j - k] << k
            m[i, j] = x
    out = (m << (BITS - 1 - np.arange(BITS))).astype(np.uint32)
    out.flags.writeable = False            # cached: shared by every call
    return out


def _scramble(v: np.ndarray, rng: np.random.Generator) -> tuple[np.ndarray, np.ndarray]:
    """(digital shift (d,), scrambled direction numbers (d, BITS)), both uint32.

    The shift's bits come first from `rng`, then the lower-triangular matrices; the order and
    the dtype of the draws fix every bit of the result."""
    d = v.shape[0]
    shift = rng.integers(0, 2, size=(d, BITS), dtype=np.uint32) @ (
        2 ** np.arange(BITS, dtype=np.uint32))
    ltm = np.tril(rng.integers(0, 2, size=(d, BITS, BITS), dtype=np.uint32)).astype(np.int64)
    ltm[:, np.arange(BITS), np.arange(BITS)] = 1
    weight = BITS - 1 - np.arange(BITS)              # bit p counts from the most significant
    bits = (v.astype(np.int64)[:, :, None] >> weight) & 1               # (d, j, k)
    mixed = (bits @ ltm.transpose(0, 2, 1)) & 1                         # (d, j, p) over GF(2)
    return shift.astype(np.uint32), (mixed << weight).sum(axis=-1).astype(np.uint32)


def sobol_points(n: int, d: int, seed: int | None = None, *, scramble: bool = True) -> np.ndarray:
    """The first n points of a d-dimensional Sobol sequence in [0, 1), as an (n, d) float64
    array; scrambled (linear matrix scramble and digital shift drawn from
    ``np.random.default_rng(seed)``) unless ``scramble=False``.

    The point count need not be a power of two (the balance properties then hold only
    approximately). Raises ValueError for d outside 1..MAX_DIM or n outside 0..2**BITS."""
    n, d = int(n), int(d)
    if not 1 <= d <= MAX_DIM:
        raise ValueError(f"Sobol points: {d} dimensions asked for; the embedded direction "
                         f"numbers cover 1 to {MAX_DIM}")
    if not 0 <= n <= 2 ** BITS:
        raise ValueError(f"Sobol points: {n} points asked for; 0 to 2**{BITS} are distinct")
    v = _direction_numbers()[:d]
    if scramble:
        shift, v = _scramble(v, np.random.default_rng(seed))
    else:
        shift = np.zeros(d, dtype=np.uint32)
    k = np.arange(n, dtype=np.uint32)
    gray = k ^ (k >> np.uint32(1))
    x = np.broadcast_to(shift, (n, d)).copy()
    for b in range(max(n - 1, 0).bit_length()):      # only the bits the Gray codes use
        x ^= ((gray >> np.uint32(b)) & np.uint32(1))[:, None] * v[:, b]
    return x * (1.0 / 2 ** BITS)
