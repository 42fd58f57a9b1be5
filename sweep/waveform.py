"""What a probe on the pick's capacitor and output would show.

The traces come from the model's own phases: for each phase the model reports where the node
starts, where it ends and the voltage it heads for (V_inf, see physics.nodes.Phase), and the
phase's length is the model's high or low time. Between start and end the node follows the RC
law v(t) = V_inf - (V_inf - v0) exp(-t / tau) [book], with tau = t_phase / ln((V_inf - v0) /
(V_inf - v1)), so every switching instant is exactly the model's, and with a constant
capacitor and a linear network (the ideal case) tau is R C itself. Where the capacitor loses
capacitance with voltage, or the network is a diode, the curve between the ends is the
exponential that matches the model's time [derived].

Astables: three cycles. Monostable: one pulse and its recovery. Missing-pulse detector: three
input pulses at the input period, then none, until the timeout raises the alarm.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from .engine import axis_values, evaluate_block, nominal_conditions
from .physics import ASTABLES
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


def rc_segment(v0, v1, vinf, duration_s, n: int):
    """n instants [s] from 0 to duration_s and the node voltage [V] at each, on the RC law from
    v0 to v1 heading for vinf [book]; a straight line where vinf is not finite [derived]."""
    t = np.linspace(0.0, duration_s, n)
    with np.errstate(all="ignore"):
        ratio = (vinf - v0) / (vinf - v1)
        if not np.isfinite(vinf) or not ratio > 0 or ratio == 1.0:
            return t, v0 + (v1 - v0) * t / duration_s
        tau = duration_s / np.log(ratio)
        return t, vinf - (vinf - v0) * np.exp(-t / tau)


def _main_timing(circuit: str) -> str:
    if circuit in ASTABLES:
        return "period_s"
    return "timeout_s" if circuit == "missing-pulse" else "pulse_width_s"


def worst_condition(study: Study, design: dict[str, np.ndarray], ideal: bool) -> int | None:
    """Index of the condition where the design's main timing lies farthest (in ratio) from its
    value at the nominal condition, with nominal parts; None where it never times."""
    col = _main_timing(study.circuit)
    cond = axis_values(study.conditions, np.arange(study.n_conditions))
    v = np.broadcast_to(evaluate_block(study, design, cond, ideal=ideal, with_spec=False)[col],
                        (1, 1, study.n_conditions))[0, 0]
    nomc = {k: np.array([x]) for k, x in nominal_conditions(study).items()}
    v0 = float(np.ravel(evaluate_block(study, design, nomc, ideal=ideal, with_spec=False)[col])[0])
    with np.errstate(all="ignore"):
        dev = np.abs(np.log(v / v0))
    if not np.isfinite(v0) or not np.isfinite(dev).any():
        return None
    return int(np.nanargmax(np.where(np.isfinite(dev), dev, -1.0)))


def _point(study: Study, design, cond, ideal) -> dict[str, float]:
    out = evaluate_block(study, design, cond, ideal=ideal, with_spec=False)
    return {k: float(np.ravel(v)[0]) for k, v in out.items()}


def _thresholds(study: Study, cond: dict[str, np.ndarray]) -> tuple[float, float]:
    vcc = float(cond["vcc"][0]) if "vcc" in cond else study.timer.typical_v
    cv = float(cond["control_voltage"][0]) if "control_voltage" in cond else np.nan
    up = cv if np.isfinite(cv) else study.timer.threshold_fraction * vcc
    return up, 0.5 * up


def trace_of(study: Study, p: dict[str, float], input_period_s: float = np.nan, n: int = 120
             ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(time [s], capacitor [V], output [V]) of one evaluated point `p` (the model's columns)."""
    v0, v1 = p["wave_v_start_v"], p["wave_v_top_v"]
    hi, lo = p["output_high_v"], p["output_low_v"]
    ts, vs, os_ = [], [], []

    def seg(t0, v_a, v_b, vinf, dur, out_v):
        t, v = rc_segment(v_a, v_b, vinf, dur, n)
        ts.append(t0 + t)
        vs.append(v)
        os_.append(np.full(n, out_v))
        return t0 + dur
    if study.circuit in ASTABLES:
        t = 0.0
        for _ in range(3):
            t = seg(t, v0, v1, p["wave_vinf_high_v"], p["high_time_s"], hi)
            t = seg(t, v1, v0, p["wave_vinf_low_v"], p["low_time_s"], lo)
    elif study.circuit == "monostable":
        pw = p["pulse_width_s"]
        dump = p["discharge_dump_s"] if np.isfinite(p["discharge_dump_s"]) and p["discharge_dump_s"] > 0 \
            else 1e-3 * pw
        t = seg(0.0, v0, v0, np.nan, 0.1 * pw, lo)                       # waiting
        t = seg(t, v0, v1, p["wave_vinf_high_v"], pw, hi)                 # the pulse
        # the capacitor dumps into the discharge transistor (to a tenth in the model's dump
        # time, so to a thousandth in three of them [derived]), then the timer waits again
        t = seg(t, v1, v0 + 1e-3 * (v1 - v0), v0, 3.0 * dump, lo)
        t = seg(t, v0, v0, np.nan, 0.4 * pw, lo)
    else:                                                                 # missing-pulse
        to = p["timeout_s"]
        period = input_period_s if np.isfinite(input_period_s) and input_period_s < to else 0.5 * to
        vinf = p["wave_vinf_high_v"]
        t = 0.0
        for _ in range(2):                   # each input pulse discharges C and retriggers
            tt, vv = rc_segment(v0, v1, vinf, to, n)
            keep = tt <= period
            ts.append(t + np.append(tt[keep], period))
            vs.append(np.append(vv[keep], np.interp(period, tt, vv)))
            os_.append(np.full(keep.sum() + 1, hi))
            t += period
        t = seg(t, v0, v1, vinf, to, hi)          # the third pulse, then the one that never comes
        t = seg(t, v0, v0, np.nan, 0.5 * to, lo)                          # alarm: C held, output low
    return np.concatenate(ts), np.concatenate(vs), np.concatenate(os_)


def _condition_word(key: str, value: float) -> str:
    from .values import format_eng
    return {"vcc": format_eng(value, "V") + " supply", "temperature": f"{value:g} °C",
            "input_period": "input every " + format_eng(value, "s"),
            "control_voltage": "control pin " + format_eng(value, "V"),
            "load_resistance": "load " + format_eng(value, "ohm")}.get(key, f"{key} = {value:g}")


def pick_waveform(study: Study, designs: pd.DataFrame, ideal: bool = False) -> Trace | None:
    """The pick's traces at the nominal condition and at the worst-case condition (where its
    main timing lies farthest from nominal). None for a latch or a pick that never times."""
    if study.circuit == "bistable" or designs.empty:
        return None
    best = designs.iloc[0]
    design = {a.key: np.array([float(best[a.column])]) for a in study.design}
    worst = worst_condition(study, design, ideal)
    if worst is None:
        return None
    nomc = {k: np.array([x]) for k, x in nominal_conditions(study).items()}
    wc = {k: v[[worst]] for k, v in axis_values(study.conditions, np.arange(study.n_conditions)).items()}
    frames, thresholds, described = [], {}, {}
    for label, cond in ((NOMINAL, nomc), (WORST, wc)):
        p = _point(study, design, cond, ideal)
        if not np.isfinite(p["wave_v_top_v"]) or not np.isfinite(p[_main_timing(study.circuit)]):
            continue
        t, vc, vo = trace_of(study, p, float(cond["input_period"][0]) if "input_period" in cond else np.nan)
        frames.append(pd.DataFrame({"condition": label, "time_s": t, "capacitor_v": vc, "output_v": vo}))
        thresholds[label] = _thresholds(study, cond)
        described[label] = ", ".join(_condition_word(k, float(v[0])) for k, v in cond.items())
    if not frames:
        return None
    return Trace(pd.concat(frames, ignore_index=True)[WAVEFORM_COLUMNS], thresholds, described)
