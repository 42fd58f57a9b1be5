"""The sweep engine: a full-factorial index over design and condition axes, evaluated in chunks.

Designs (every combination of the [design] axes) and conditions (every combination of the
[conditions] axes) are two flat indexes. A block is evaluated as a broadcast of a design array of
shape (designs, 1, 1), an optional build axis (designs or 1, builds, 1) and a condition array of
shape (1, 1, conditions), so nothing is ever looped over in Python and work that depends only on
the design axes is never repeated per condition. Memory is bounded by the chunk size.
"""
from __future__ import annotations

import ctypes
from dataclasses import dataclass
from typing import Iterator

import numpy as np

from .case import Case, axis_values
from .physics import FLAG_BITS, REGISTRY, evaluate, flag_names, kernel
from .physics.compiled.steps import INTO, LESS, OVER, PLAIN, TIMES, TIMES_LESS

__all__ = ["Case", "Variation", "axis_values", "battery_life_h", "design_blocks",
           "evaluate_block",
           "flag_text", "keep_freed_heap", "spec_fail"]

def keep_freed_heap(trim_bytes: int = 256 << 20, pad_bytes: int = 64 << 20) -> bool:
    """Ask glibc's allocator to keep freed memory instead of returning the heap's top to the
    system whenever 128 KiB lie free: otherwise every block-sized numpy temporary faults its pages
    in again, and the engine runs about 3x slower (measured with tests/benchmarks/engine.py). The
    memory kept is bounded by trim_bytes. A no-op (False) where the C library is not glibc."""
    try:
        libc = ctypes.CDLL("libc.so.6")
        return bool(libc.mallopt(-1, trim_bytes)) and bool(libc.mallopt(-2, pad_bytes))  # TRIM, TOP_PAD
    except (OSError, AttributeError):
        return False


keep_freed_heap()
DEFAULT_CHUNK = 1 << 14        # points per block: arrays stay in the core's cache (measured: 16k-32k fastest)
#: points per analysis block (each point with its worst-case corners counted, see
#: pipeline.analyse). Blocks of DEFAULT_CHUNK suit one plain sweep; an analysis block makes four
#: model calls, and since the corners are factored (spreads.Corners) its arrays are smaller than
#: its point count says, so bigger blocks spread each call's fixed cost (measured on bike-light's
#: pass 1: 1.10 s in 51 blocks of DEFAULT_CHUNK, 0.33 s in 8 of 8x that; on a 1e8-point astable
#: sweep run by the kernel, blocks of 32x ran at half the speed of 8x).
ANALYSIS_CHUNK = 8 * DEFAULT_CHUNK
TIMING = ("high_time_s", "low_time_s", "period_s", "pulse_width_s", "timeout_s")
SPEC_MISS = np.uint32(FLAG_BITS["spec-miss"])


@dataclass(frozen=True)
class Variation:
    """Part and timer deviations of builds or corners, each an array broadcast against
    (designs, builds, 1): relative part multipliers and the timing error terms."""
    part: dict[str, np.ndarray]          # "ra", "rb", "r", "c" -> multiplier (1 = nominal)
    accuracy: np.ndarray | float = 0.0   # relative timing error at 25 °C, nominal supply
    drift_per_k: np.ndarray | float = 0.0
    supply_per_v: np.ndarray | float = 0.0
    leak: np.ndarray | float = 1.0       # capacitor leakage relative to its typical figure
    dc_bias: np.ndarray | float = 1.0    # class II DC-bias loss relative to its typical curve
    diode_is: np.ndarray | float = 1.0   # diode saturation current relative to its typical figure
    iq: np.ndarray | float = 1.0         # timer quiescent current relative to its typical figure
    load_r: np.ndarray | float = 1.0     # load resistor relative to its nominal value
    led_vf: np.ndarray | float = 0.0     # LED forward voltage less its nominal [V]
    stage: np.ndarray | float = 1.0      # output-stage drop relative to its typical curve


def evaluate_block(case: Case, design: dict[str, np.ndarray], conditions: dict[str, np.ndarray],
                   *, ideal: bool | None = None, variation: Variation | None = None,
                   with_spec: bool = True, compiled: bool | None = None) -> dict[str, np.ndarray]:
    """Evaluate designs x [builds x] conditions of one case. Inputs are 1-D arrays per study
    key; the result arrays have shape (designs, builds, conditions) (builds = 1 without a
    variation), or (designs, spread axes..., conditions) for the worst case's factored corners
    (spreads.Corners) on the numpy model, (designs, corners, conditions) on the kernel. ideal:
    every non-ideality off (default: the case's). compiled: use the compiled kernel (None: when
    the case's sweep is big enough to pay for loading it and the kernel covers the circuit, see
    physics.kernel.wanted)."""
    ideal = case.ideal if ideal is None else ideal
    if case.grades and "grade" in design:      # part grades: each with its own parts
        return _evaluate_graded(case, design, conditions, ideal=ideal, variation=variation,
                                with_spec=with_spec, compiled=compiled)
    factored = variation is not None and _axes(variation) > 1
    if compiled is None:
        # the worst case's factored corners stay on the numpy model, whose broadcasting
        # evaluates each step once per combination of the spreads it depends on; where the
        # kernel runs the sweep, the analysis folds the corners of the circuits in
        # analysis.FOLDED_CORNERS through fold_block instead (tests/benchmarks/corners.py)
        compiled = not factored and kernel.wanted(case.circuit, case.timer, case.parts, case.load,
                                                  ideal, case.points)
    if compiled and factored:
        variation = _one_corner_axis(variation)       # the kernel takes one build axis
    kw, spreads = _inputs(design, conditions, variation)
    model = kernel.evaluate if compiled else evaluate
    out = model(case.circuit, case.timer, case.parts, case.load, ideal=ideal, **spreads, **kw)
    if variation is not None and not ideal:
        # timer accuracy and drift act on every timed phase as a relative error [ds-bip]; the
        # worst case's corners carry none (the analysis adds the timer's band), and multiplying
        # by exactly 1 would change nothing
        err = _timer_error(case, variation, kw)
        if err is not None:
            for k in TIMING:
                out[k] = out[k] * err
            out["frequency_hz"] = out["frequency_hz"] / err
        if "input_period" in kw:
            out["timeout_margin_s"] = out["timeout_s"] - kw["input_period"]
    out["battery_life_h"] = battery_life_h(case, out)
    if with_spec and case.spec:
        out["flag_mask"] = out["flag_mask"] | np.where(spec_fail(case, out), SPEC_MISS, np.uint32(0))
    return out


def _inputs(design: dict, conditions: dict, variation: Variation | None,
            factors: bool = False) -> tuple[dict, dict]:
    """The model's keyword inputs: design arrays on the first axis, conditions on the last,
    builds on one axis between them (the worst case's corners one per spread, spreads.Corners),
    part multipliers applied; and the variation's spreads. factors: the part multipliers go
    with the spreads as the kernel's ra_factor, ... (applied per point) instead."""
    middle = 1 if variation is None else _axes(variation)
    kw: dict[str, np.ndarray] = {}
    for k, v in design.items():
        kw[k] = np.asarray(v, dtype=float).reshape((-1,) + (1,) * (middle + 1))
    for k, v in conditions.items():
        kw[k] = np.asarray(v, dtype=float).reshape((1,) * (middle + 1) + (-1,))
    spreads = {} if variation is None else dict(
        leak_factor=variation.leak, dc_bias_factor=variation.dc_bias,
        diode_is_factor=variation.diode_is, iq_factor=variation.iq, load_factor=variation.load_r,
        vf_shift=variation.led_vf, stage_factor=variation.stage)
    if variation is not None:
        for k, m in variation.part.items():
            if k in kw and factors:
                spreads[f"{k}_factor"] = m
            elif k in kw:
                kw[k] = kw[k] * m
    return kw, spreads


def _timer_error(case: Case, variation: Variation, kw: dict) -> np.ndarray | None:
    """1 + the timer's relative timing error of each build at each condition [ds-bip]; None
    where every term is zero (the worst case's corners)."""
    terms = (variation.accuracy, variation.drift_per_k, variation.supply_per_v)
    if all(np.ndim(x) == 0 and x == 0 for x in terms):
        return None
    dt = kw.get("temperature", 25.0) - 25.0
    dv = kw.get("vcc", case.nominal_vcc_v) - case.nominal_vcc_v
    return 1.0 + variation.accuracy + variation.drift_per_k * dt + variation.supply_per_v * dv


def can_fold(case: Case, design: dict, ideal: bool | None = None) -> bool:
    """Whether fold_block can reduce this case's evaluations inside the compiled kernel: the
    kernel is wanted for its sweep (evaluate_block's choice) and the designs are of one grade."""
    ideal = case.ideal if ideal is None else ideal
    return (not (case.grades and "grade" in design)
            and kernel.wanted(case.circuit, case.timer, case.parts, case.load, ideal, case.points))


def fold_block(case: Case, design: dict[str, np.ndarray], conditions: dict[str, np.ndarray],
               fold, *, ideal: bool | None = None, variation: Variation | None = None) -> None:
    """evaluate_block's outputs for fold.outputs (its `with_spec=False` values, bit for bit
    given the same model outputs) reduced into fold's accumulators (folds.Moments, Extremes) by
    the compiled kernel, tile by tile, instead of returned: the grid is never written to
    memory. The worst case's factored corners go in with their spread axes flattened."""
    ideal = case.ideal if ideal is None else ideal
    if variation is not None and _axes(variation) > 1:
        variation = _one_corner_axis(variation)
    kw, spreads = _inputs(design, conditions, variation, factors=True)
    err = None
    if variation is not None and not ideal:
        err = _timer_error(case, variation, kw)
    recipes = _recipes(case, fold.outputs, err, kw, variation is not None and not ideal)
    fold.recipes = recipes
    # the grid the fold reduces: designs x builds x conditions, whatever the model's inputs span
    fold.grid = np.broadcast_shapes(*(np.shape(x) for x in kw.values()),
                                    *(np.shape(a) for a in ([] if variation is None
                                                            else _arrays(variation))))
    kernel.evaluate(case.circuit, case.timer, case.parts, case.load, ideal=ideal, fold=fold,
                    **spreads, **kw)


def _recipes(case: Case, outputs: list[str], err, kw: dict, varied: bool) -> list[tuple]:
    """How evaluate_block makes each output from the model's: (model output, step, operand a,
    operand b), steps as in physics/compiled/steps.py. err: 1 + the timer's error (None: none);
    varied: a variation in realistic mode (the timeout's margin is taken again after the timer's
    error)."""
    out = []
    for o in outputs:
        if o == "battery_life_h":
            if case.battery_capacity_ah is None:       # NaN: no battery
                out.append(("supply_current_a", TIMES, np.nan, None))
            else:
                current = "idle_current_a" if REGISTRY[case.circuit].waits else "supply_current_a"
                out.append((current, INTO, case.battery_capacity_ah * case.battery_usable, None))
        elif o == "timeout_margin_s" and varied and "input_period" in kw:
            out.append(("timeout_s", LESS if err is None else TIMES_LESS, err, kw["input_period"]))
        elif err is not None and o in TIMING:
            out.append((o, TIMES, err, None))
        elif err is not None and o == "frequency_hz":
            out.append((o, OVER, err, None))
        else:
            out.append((o, PLAIN, None, None))
    return out


def _axes(variation: Variation) -> int:
    """How many build axes a variation's arrays have: 1 for builds, one per spread for the
    factored corners."""
    return max(1, max(np.ndim(a) for a in _arrays(variation)) - 2)


def _one_corner_axis(variation: Variation) -> Variation:
    """The factored corners with their spread axes flattened into one (C order: corner k is
    Corners.signs[:, k]), every corner written out."""
    arrays = [np.asarray(a, dtype=float) for a in _arrays(variation)]
    mid = np.broadcast_shapes(*(a.shape[1:-1] for a in arrays if a.ndim > 2))
    k = int(np.prod(mid))

    def flat(a):
        a = np.asarray(a, dtype=float)
        if a.ndim < 3:
            return a
        full = np.broadcast_to(a, a.shape[:1] + mid + a.shape[-1:])
        return np.ascontiguousarray(full).reshape(a.shape[0], k, a.shape[-1])
    return Variation({p: flat(m) for p, m in variation.part.items()},
                     **{f: flat(getattr(variation, f)) for f in VARIATION_FIELDS})


def _arrays(variation: Variation) -> list:
    """Every array of a Variation (part multipliers and spreads)."""
    return list(variation.part.values()) + [getattr(variation, f) for f in VARIATION_FIELDS]


#: the Variation's fields beyond the part multipliers
VARIATION_FIELDS = ("accuracy", "drift_per_k", "supply_per_v", "leak", "dc_bias", "diode_is", "iq",
                    "load_r", "led_vf", "stage")


def _evaluate_graded(case: Case, design: dict, conditions: dict, **kw) -> dict[str, np.ndarray]:
    """evaluate_block for designs of several part grades (design["grade"], counted from 1):
    each grade evaluated with its own case (its Parts), the results put back in the designs'
    order."""
    g = np.asarray(design["grade"]).astype(int) - 1
    nd = len(g)
    out: dict[str, np.ndarray] = {}
    for gi in np.unique(g):
        sel = g == gi
        part = {k: np.asarray(v)[sel] for k, v in design.items() if k != "grade"}
        res = evaluate_block(case.grades[gi], part, conditions, **kw)
        for k, v in res.items():
            v = np.asarray(v)
            if k not in out:
                out[k] = np.zeros((nd,) + v.shape[1:], dtype=v.dtype)
            if v.shape[1:] != out[k].shape[1:]:          # a figure not varying along an axis
                full = np.broadcast_shapes(v.shape[1:], out[k].shape[1:])
                out[k] = np.broadcast_to(out[k], (nd,) + full).copy()
                v = np.broadcast_to(v, (v.shape[0],) + full)
            out[k][sel] = np.broadcast_to(v, (int(sel.sum()),) + out[k].shape[1:])
    return out


def battery_life_h(case: Case, out: dict[str, np.ndarray]) -> np.ndarray:
    """Hours a battery lasts: capacity [A h] x usable share / mean current [A] [derived]. The
    mean current is the period-averaged supply current of a running timer; a monostable is taken
    to wait for its triggers nearly all the time, so its idle current sets the life (pulses add
    their share on top: see the README). NaN without [study] battery_capacity."""
    if case.battery_capacity_ah is None:        # a read-only view: no memory per point
        return np.broadcast_to(np.float64(np.nan), np.shape(out["supply_current_a"]))
    current = out["idle_current_a"] if REGISTRY[case.circuit].waits else out["supply_current_a"]
    with np.errstate(all="ignore"):
        return case.battery_capacity_ah * case.battery_usable / current


def spec_fail(case: Case, out: dict[str, np.ndarray]) -> np.ndarray:
    """True where any [spec] limit is missed (a NaN output misses)."""
    fail = np.zeros(np.shape(out["flag_mask"]), dtype=bool)
    for s in case.spec:
        v = out[s.column]
        fail |= ~((v >= s.lo) & (v <= s.hi))
    return fail


def flag_text(mask: np.ndarray) -> np.ndarray:
    """Space-separated flag codes for each mask value (vectorised over unique masks)."""
    uniq, inv = np.unique(mask, return_inverse=True)
    labels = np.array([" ".join(flag_names(int(u))) for u in uniq], dtype=object)
    return labels[inv.ravel()]


def design_blocks(study, chunk_points: int = DEFAULT_CHUNK, per_design: int | None = None
                  ) -> Iterator[tuple[int, int]]:
    """(start, stop) ranges of design numbers so that each block holds about chunk_points points."""
    per = per_design or study.n_conditions
    step = max(1, chunk_points // max(per, 1))
    for start in range(0, study.n_designs, step):
        yield start, min(start + step, study.n_designs)
