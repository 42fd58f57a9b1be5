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
from .steps import BAND_FREQUENCY, BAND_NONE, BAND_TIMING, INTO, OVER, PLAIN, TIMES, TIMES_LESS


@njit(**OPTS)
def _base(ix, k, d, b):
    """Where operand k's values at design d, build b start in the pool, and their stride along
    the conditions."""
    return ix[k, 0] + d * ix[k, 1] + b * ix[k, 2], ix[k, 3]


@njit(**OPTS)
def values(res, r0, r1, nb, nc, src, op, opa, opb, pool, ix, vals):
    """vals[o, p] for every reduced output o and tile point p: the model output (row src[o] of
    res, or operand -src[o]-1 where negative) taken through step op[o] with operands opa[o],
    opb[o]. Each step is its own loop over a row's conditions."""
    for o in range(src.size):
        s, k = src[o], op[o]
        for r in range(r0, r1):
            d = r // nb
            b = r - d * nb
            p0 = (r - r0) * nc
            out = vals[o, p0:p0 + nc]
            if s >= 0:
                out[:] = res[s, p0:p0 + nc]
            else:
                q, sq = _base(ix, -s - 1, d, b)
                for c in range(nc):
                    out[c] = pool[q + c * sq]
            if k == PLAIN:
                continue
            qa, sa = _base(ix, opa[o], d, b)
            qb, sb = _base(ix, opb[o], d, b)
            if k == TIMES:
                for c in range(nc):
                    out[c] = out[c] * pool[qa + c * sa]
            elif k == OVER:
                for c in range(nc):
                    out[c] = out[c] / pool[qa + c * sa]
            elif k == INTO:
                for c in range(nc):
                    out[c] = pool[qa + c * sa] / out[c]
            elif k == TIMES_LESS:
                for c in range(nc):
                    out[c] = out[c] * pool[qa + c * sa] - pool[qb + c * sb]
            else:
                for c in range(nc):
                    out[c] = out[c] - pool[qb + c * sb]


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
            x = vals[o, p0:p0 + nc]
            m_lo, m_hi = lo[o, d], hi[o, d]
            bad = False
            if w == BAND_NONE:
                for c in range(nc):
                    v = x[c]
                    bad |= v != v
                    m_lo = min(m_lo, v)
                    m_hi = max(m_hi, v)
            elif w == BAND_TIMING:
                for c in range(nc):
                    v_lo = x[c] * (1 - band[c])
                    v_hi = x[c] * (1 + band[c])
                    bad |= (v_lo != v_lo) | (v_hi != v_hi)
                    m_lo = min(m_lo, v_lo)
                    m_hi = max(m_hi, v_hi)
            elif w == BAND_FREQUENCY:
                for c in range(nc):
                    v_lo = x[c] / (1 + band[c])
                    v_hi = x[c] / (1 - band[c])
                    bad |= (v_lo != v_lo) | (v_hi != v_hi)
                    m_lo = min(m_lo, v_lo)
                    m_hi = max(m_hi, v_hi)
            else:
                y = vals[partner[o], p0:p0 + nc]
                for c in range(nc):
                    t = y[c] * band[c]
                    v_lo = x[c] - t
                    v_hi = x[c] + t
                    bad |= (v_lo != v_lo) | (v_hi != v_hi)
                    m_lo = min(m_lo, v_lo)
                    m_hi = max(m_hi, v_hi)
            lo[o, d], hi[o, d] = m_lo, m_hi
            if bad:
                nan[o, d] = True
