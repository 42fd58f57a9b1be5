"""Per-design reductions that the compiled kernel folds in tile by tile (`engine.fold_block`),
so the grid of a Monte Carlo's builds or the worst case's corners is never written to memory.

`Moments` keeps what `analysis._monte_carlo` sums on the numpy model (the count of good builds,
shifted sums and sums of squares of each output); `Extremes` what `analysis.analyse_block` takes
of the worst case (each output's minimum and maximum widened by the timer's band, and where a
design first stalls). Each reduced output is made from a model output by the engine's own step
(`Recipe`, built by `engine.fold_block`); the compiled arithmetic is in
`physics/compiled/fold.py`.
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

#: a reduced output: (model output, step, operand a, operand b)
Recipe = tuple


def _compiled():
    from .physics.compiled import fold      # imports numba: only here
    return fold


@dataclass
class _Fold:
    """What both folds share: the outputs, their recipes and the tile's operands."""
    outputs: list[str]
    designs: int
    recipes: list[Recipe] = field(default_factory=list)
    grid: tuple = (1, 1, 1)            # (designs, builds, conditions) of the next kernel call

    def start(self, st, rows: dict[str, int], extra: dict, shape3: tuple, width: int):
        """The tile function of one kernel call: rows are the stages' output rows, extra the
        outputs at the condition level (physics.kernel._rows, _extra)."""
        from .physics.kernel import operand_pool
        fd = _compiled()
        operands: list = []

        def operand(x) -> int:
            operands.append(x)
            return len(operands) - 1
        n = len(self.recipes)
        src, op = np.zeros(n, np.int64), np.zeros(n, np.int64)
        opa, opb = np.zeros(n, np.int64), np.zeros(n, np.int64)
        for o, (base, step, a, b) in enumerate(self.recipes):
            src[o] = rows[base] if base in rows else -operand(extra[base]) - 1
            op[o] = step
            opa[o] = operand(1.0 if a is None else a)
            opb[o] = operand(0.0 if b is None else b)
        pool, ix = operand_pool(operands)
        vals = np.empty((n, width))
        nb, nc = shape3[1], shape3[2]
        fold = self._tile(fd, nb, nc)

        def tile(res, flags, r0, r1):
            fd.values(res, r0, r1, nb, nc, src, op, opa, opb, pool, ix, vals)
            fold(vals, flags, r0, r1)
        return tile


@dataclass
class Moments(_Fold):
    """A Monte Carlo's per-design sums over builds x conditions (analysis._monte_carlo):
    good builds (every condition within every spec limit, or a finite main output without
    limits), and each output's sum and sum of squares less its shift (its first value)."""
    spec: list[tuple[int, float, float]] = field(default_factory=list)  # (output, lo, hi)
    main: int = -1

    def __post_init__(self):
        n, nd = len(self.outputs), self.designs
        self.ok = np.zeros(nd)
        self.s1, self.s2 = np.zeros((n, nd)), np.zeros((n, nd))
        self.shift = np.zeros((n, nd))
        self.have = np.zeros((n, nd), dtype=np.bool_)

    def _tile(self, fd, nb, nc):
        so = np.array([s[0] for s in self.spec], dtype=np.int64)
        lo = np.array([s[1] for s in self.spec], dtype=np.float64)
        hi = np.array([s[2] for s in self.spec], dtype=np.float64)

        def fold(vals, flags, r0, r1):
            fd.moments(vals, r0, r1, nb, nc, so, lo, hi, self.main, self.ok, self.s1, self.s2,
                       self.shift, self.have)
        return fold


@dataclass
class Extremes(_Fold):
    """The worst case's per-design minimum and maximum of each output over corners x
    conditions, widened by the timer's band at each condition (widen: physics.compiled.steps.BAND_*,
    partner: the output whose value times the band widens a margin), NaN where any value is
    NaN; and the first corner x condition (corner * conditions + condition) that stalls, -1 for
    none."""
    band: np.ndarray = field(default_factory=lambda: np.zeros(1))
    widen: list[int] = field(default_factory=list)
    partner: list[int] = field(default_factory=list)

    def __post_init__(self):
        n, nd = len(self.outputs), self.designs
        self.lo, self.hi = np.full((n, nd), np.inf), np.full((n, nd), -np.inf)
        self.nan = np.zeros((n, nd), dtype=np.bool_)
        self.stall = np.full(nd, -1, dtype=np.int64)

    def _tile(self, fd, nb, nc):
        band = np.ascontiguousarray(np.broadcast_to(np.asarray(self.band, float).ravel(), (nc,)))
        widen = np.array(self.widen or [0] * len(self.outputs), dtype=np.int64)
        partner = np.array(self.partner or [0] * len(self.outputs), dtype=np.int64)

        def fold(vals, flags, r0, r1):
            fd.extremes(vals, flags, r0, r1, nb, nc, band, widen, partner, self.lo, self.hi,
                        self.nan, self.stall)
        return fold

    def minimum(self, o: int) -> np.ndarray:
        return np.where(self.nan[o], np.nan, self.lo[o])

    def maximum(self, o: int) -> np.ndarray:
        return np.where(self.nan[o], np.nan, self.hi[o])
