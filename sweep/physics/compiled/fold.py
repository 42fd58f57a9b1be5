"""Reductions folded into the compiled kernel (numba): per-design sums and extremes of a tile's
outputs, taken while the tile is in the cache, so the grid of builds or corners is never written
to memory.

A tile holds grid rows r0..r1 (row = design x build, all conditions) of the stages' output
matrix. Each reduced output is made from one model output (a row of that matrix, or a value of
the condition level) by one step of the engine's own arithmetic (`sweep.engine.evaluate_block`:
the timer's error on a timing, a battery's hours from its current, a timeout's margin), with
operands read from a pool of float64 values by (offset, strides along designs, builds,
conditions), the layout `stages.gather` reads. Each step is the engine's numpy expression
written in the same order, so a value here equals the engine's bit for bit, given the same model
output.

`values` makes a tile's reduced outputs; `moments` folds them into the Monte Carlo's counts and
sums, `extremes` into the worst case's minima and maxima. Nothing here is new physics.
"""
from __future__ import annotations

import numpy as np
from numba import njit

from .stages import OPTS, STALLS
from .steps import (BAND_FREQUENCY, BAND_NONE, BAND_TIMING, INTO, LESS, OVER, TIMES,  # noqa: F401
                    TIMES_LESS)


@njit(**OPTS)
def _at(pool, ix, k, d, b, c):
    """Operand k at design d, build b, condition c."""
    return pool[ix[k, 0] + d * ix[k, 1] + b * ix[k, 2] + c * ix[k, 3]]


@njit(**OPTS)
def values(res, r0, r1, nb, nc, src, op, opa, opb, pool, ix, vals):
    """vals[o, p] for every reduced output o and tile point p: the model output (row src[o] of
    res, or operand -src[o]-1 where negative) taken through step op[o] with operands opa[o],
    opb[o]."""
    for o in range(src.size):
        s, k, a, bb = src[o], op[o], opa[o], opb[o]
        for r in range(r0, r1):
            d = r // nb
            b = r - d * nb
            p0 = (r - r0) * nc
            for c in range(nc):
                x = res[s, p0 + c] if s >= 0 else _at(pool, ix, -s - 1, d, b, c)
                if k == TIMES:
                    x = x * _at(pool, ix, a, d, b, c)
                elif k == OVER:
                    x = x / _at(pool, ix, a, d, b, c)
                elif k == INTO:
                    x = _at(pool, ix, a, d, b, c) / x
                elif k == TIMES_LESS:
                    x = x * _at(pool, ix, a, d, b, c) - _at(pool, ix, bb, d, b, c)
                elif k == LESS:
                    x = x - _at(pool, ix, bb, d, b, c)
                vals[o, p0 + c] = x


@njit(**OPTS)
def moments(vals, r0, r1, nb, nc, spec_o, spec_lo, spec_hi, main_o, ok, s1, s2, shift, have):
    """Fold a tile's values into each design's count of good builds (every condition within
    every spec limit; without limits, a finite main output) and its shifted sums and sums of
    squares (shift: the design's first value, taken at its first point)."""
    for r in range(r0, r1):
        d = r // nb
        p0 = (r - r0) * nc
        for o in range(vals.shape[0]):
            if not have[o, d]:
                shift[o, d] = vals[o, p0]
                have[o, d] = True
            h = shift[o, d]
            t1 = 0.0
            t2 = 0.0
            for c in range(nc):
                x = vals[o, p0 + c] - h
                t1 += x
                t2 += x * x
            s1[o, d] += t1
            s2[o, d] += t2
        good = True
        if spec_o.size > 0:
            for s in range(spec_o.size):
                lo, hi = spec_lo[s], spec_hi[s]
                for c in range(nc):
                    x = vals[spec_o[s], p0 + c]
                    if not (x >= lo and x <= hi):
                        good = False
        elif main_o >= 0:
            for c in range(nc):
                if not np.isfinite(vals[main_o, p0 + c]):
                    good = False
        if good:
            ok[d] += 1.0


@njit(**OPTS)
def extremes(vals, flags, r0, r1, nb, nc, band, widen, partner, lo, hi, nan, stall):
    """Fold a tile's values into each design's minimum and maximum over its corners (builds)
    and conditions, each widened by the timer's relative band at the condition (widen[o]: none;
    a timing x (1 -/+ band); a frequency / (1 +/- band); a margin -/+ its timeout (output
    partner[o]) x band); nan[o, d] marks a NaN met (the extreme is then NaN). stall[d]: the
    first corner x condition (b * nc + c) whose point stalls, -1 while none has."""
    for r in range(r0, r1):
        d = r // nb
        b = r - d * nb
        p0 = (r - r0) * nc
        if stall[d] < 0:
            for c in range(nc):
                if flags[p0 + c] & STALLS:
                    stall[d] = b * nc + c
                    break
        for o in range(vals.shape[0]):
            w = widen[o]
            m_lo, m_hi = lo[o, d], hi[o, d]
            bad = False
            for c in range(nc):
                x = vals[o, p0 + c]
                if w == BAND_NONE:
                    x_lo = x
                    x_hi = x
                elif w == BAND_TIMING:
                    x_lo = x * (1 - band[c])
                    x_hi = x * (1 + band[c])
                elif w == BAND_FREQUENCY:
                    x_lo = x / (1 + band[c])
                    x_hi = x / (1 - band[c])
                else:
                    t = vals[partner[o], p0 + c] * band[c]
                    x_lo = x - t
                    x_hi = x + t
                if x_lo != x_lo or x_hi != x_hi:
                    bad = True
                if x_lo < m_lo:
                    m_lo = x_lo
                if x_hi > m_hi:
                    m_hi = x_hi
            lo[o, d], hi[o, d] = m_lo, m_hi
            if bad:
                nan[o, d] = True
