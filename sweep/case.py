"""What the engine evaluates: one case, built once from a study, and the axes a study sweeps.

`Case` holds the circuit, the timer, the parts, the load, the spec, the nominal conditions and
the battery: everything the model and the spec check need, and nothing of the study's text. The
study module builds it once (`Study.case`); the engine, the analysis and the workers receive it.
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from . import values as qv
from .physics import TIMING_PARTS, Load, Parts, TimerModel


@dataclass(frozen=True)
class Axis:
    """One swept key: its values in SI units, whether it is a design choice or a condition, the
    IEC 60063 series it came from and its nominal value (conditions)."""
    key: str                 # study key, e.g. "ra"
    column: str              # machine column, e.g. "ra_ohm"
    values: np.ndarray       # SI units, ascending unless the user listed them otherwise
    role: str                # "design" | "condition"
    series: str | None = None
    nominal: float | None = None

    series_rank: np.ndarray = field(init=False, repr=False, compare=False)

    def __post_init__(self):
        # for each value, the coarsest IEC 60063 series holding it: 0 = E3 ... 6 = E192, 7 = none
        rank = qv.series_rank(self.values) if self.key in TIMING_PARTS else \
            np.full(len(self.values), len(qv.SERIES))
        object.__setattr__(self, "series_rank", rank)


@dataclass(frozen=True)
class SpecLimit:
    """One [spec] limit on an output column: lo..hi (open ends infinite), and its target."""
    key: str
    column: str
    lo: float
    hi: float
    target: float | None = None


@dataclass(frozen=True)
class Case:
    """Everything the model and the spec check need for one set of parts.

    nominal: each condition's nominal value by study key (the supply's defaults to the timer's
    typical supply where the study does not sweep it); grades: one Case per part grade of a
    study with grades as design axes, in the grade plan's order, else ()."""
    circuit: str
    timer: TimerModel
    parts: Parts
    load: Load
    spec: tuple[SpecLimit, ...] = ()
    nominal: dict = field(default_factory=dict)
    battery_capacity_ah: float | None = None
    battery_usable: float = 1.0
    ideal: bool = False
    grades: tuple["Case", ...] = ()
    points: int = 0           # points of the whole sweep: decides whether the compiled kernel pays

    @property
    def nominal_vcc_v(self) -> float:
        return float(self.nominal.get("vcc", self.timer.typical_v))


def axis_values(axes: tuple[Axis, ...], index: np.ndarray) -> dict[str, np.ndarray]:
    """Values of each axis (by study key) for flat combination numbers `index` (C order)."""
    if not axes:
        return {}
    shape = tuple(len(a.values) for a in axes)
    subs = np.unravel_index(index, shape)
    return {a.key: a.values[s] for a, s in zip(axes, subs)}
