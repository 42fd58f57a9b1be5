"""What a probe on the pick's capacitor and output would show.

The traces come from the model's own phases: for each phase the model reports where the node
starts, where it ends and the voltage it heads for (V_inf, see physics.nodes.Phase), and the
phase's length is the model's high or low time. Between start and end the node follows the RC
law v(t) = V_inf - (V_inf - v0) exp(-t / tau) [book], with tau = t_phase / ln((V_inf - v0) /
(V_inf - v1)), so every switching instant is exactly the model's, and with a constant
capacitor and a linear network (the ideal case) tau is R C itself. Where the capacitor loses
capacitance with voltage, or the network is a diode, the curve between the ends is the
exponential that matches the model's time [derived].

Each circuit draws its own trace (`trace` in its module under physics/circuits): astables three
cycles, the monostable one pulse and its recovery, the missing-pulse detector three input pulses
at the input period, then none, until the timeout raises the alarm.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from .case import axis_values
from .engine import evaluate_block
from .physics import REGISTRY
from .physics.traces import Probe
from .study import Study

WAVEFORM_COLUMNS = ["condition", "time_s", "capacitor_v", "output_v"]
NOMINAL, WORST = "nominal", "worst case"


@dataclass(frozen=True)
class Trace:
    """The waveform table (WAVEFORM_COLUMNS) and, per condition label, the thresholds [V] and
    a description of the condition."""
    table: pd.DataFrame
    thresholds: dict[str, tuple[float, float]]
    described: dict[str, str]


def worst_condition(study: Study, design: dict[str, np.ndarray], ideal: bool) -> int | None:
    """Index of the condition where the design's main timing lies farthest (in ratio) from its
    value at the nominal condition, with nominal parts; None where it never times."""
    col = REGISTRY[study.circuit].cycle_output
    cond = axis_values(study.conditions, np.arange(study.n_conditions))
    v = np.broadcast_to(evaluate_block(study.case, design, cond, ideal=ideal, with_spec=False)[col],
                        (1, 1, study.n_conditions))[0, 0]
    nomc = {k: np.array([x]) for k, x in study.case.nominal.items()}
    v0 = float(np.ravel(evaluate_block(study.case, design, nomc, ideal=ideal, with_spec=False)[col])[0])
    with np.errstate(all="ignore"):
        dev = np.abs(np.log(v / v0))
    if not np.isfinite(v0) or not np.isfinite(dev).any():
        return None
    return int(np.nanargmax(np.where(np.isfinite(dev), dev, -1.0)))


def _point(study: Study, design, cond, ideal) -> dict[str, float]:
    out = evaluate_block(study.case, design, cond, ideal=ideal, with_spec=False)
    return {k: float(np.ravel(v)[0]) for k, v in out.items()}


def _thresholds(study: Study, cond: dict[str, np.ndarray]) -> tuple[float, float]:
    vcc = float(cond["vcc"][0]) if "vcc" in cond else study.timer.typical_v
    cv = float(cond["control_voltage"][0]) if "control_voltage" in cond else np.nan
    up = cv if np.isfinite(cv) else study.timer.threshold_fraction * vcc
    return up, 0.5 * up


def trace_of(study: Study, p: dict[str, float], input_period_s: float = np.nan, n: int = 120
             ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(time [s], capacitor [V], output [V]) of one evaluated point `p` (the model's columns)."""
    probe = Probe(n)
    REGISTRY[study.circuit].trace(probe, p, input_period_s)
    return probe.arrays()


def _condition_word(key: str, value: float) -> str:
    from .values import format_eng
    return {"vcc": format_eng(value, "V") + " supply", "temperature": f"{value:g} °C",
            "input_period": "input every " + format_eng(value, "s"),
            "control_voltage": "control pin " + format_eng(value, "V"),
            "load_resistance": "load " + format_eng(value, "ohm")}.get(key, f"{key} = {value:g}")


def pick_waveform(study: Study, designs: pd.DataFrame, ideal: bool = False) -> Trace | None:
    """The pick's traces at the nominal condition and at the worst-case condition (where its
    main timing lies farthest from nominal). None for a latch or a pick that never times."""
    if REGISTRY[study.circuit].trace is None or designs.empty:
        return None
    best = designs.iloc[0]
    design = {a.key: np.array([float(best[a.column])]) for a in study.design}
    worst = worst_condition(study, design, ideal)
    if worst is None:
        return None
    nomc = {k: np.array([x]) for k, x in study.case.nominal.items()}
    wc = {k: v[[worst]] for k, v in axis_values(study.conditions, np.arange(study.n_conditions)).items()}
    frames, thresholds, described = [], {}, {}
    for label, cond in ((NOMINAL, nomc), (WORST, wc)):
        p = _point(study, design, cond, ideal)
        if not np.isfinite(p["wave_v_top_v"]) or not np.isfinite(p[REGISTRY[study.circuit].cycle_output]):
            continue
        t, vc, vo = trace_of(study, p, float(cond["input_period"][0]) if "input_period" in cond else np.nan)
        frames.append(pd.DataFrame({"condition": label, "time_s": t, "capacitor_v": vc, "output_v": vo}))
        thresholds[label] = _thresholds(study, cond)
        described[label] = ", ".join(_condition_word(k, float(v[0])) for k, v in cond.items())
    if not frames:
        return None
    return Trace(pd.concat(frames, ignore_index=True)[WAVEFORM_COLUMNS], thresholds, described)
