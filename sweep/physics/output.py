"""The timer's output stage against its load.

Each state's drop (below the supply when high, above ground when low) is a curve of current,
(A, V) points from the timer-model file, interpolated linearly and extended along the last
segment; the bipolar source drop falls about 4 mV/K (two base-emitter junctions at -2 mV/K)
[book: Sedra & Smith, *Microelectronic Circuits*]. The operating point is where the curve meets
the load line (a resistor, and a fixed forward voltage for an LED) [book: load-line analysis].
A bipolar high stage is an emitter follower: it sources but cannot sink, so a load to the
supply pulls the output above it [book]. Seen from a timing resistor (the output-fed astable)
each state is a Thevenin source: the loaded output voltage behind the stage's incremental
resistance, with a conducting load in parallel [book: Thevenin].

Pure numpy, SI units.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .parts import Load
from .timer import TimerModel


def drop_at(points, current_a, scale=1.0):
    """Drop [V] of a stage at load current current_a [A] (linear between the points, extended
    along the last segment, never below the first point's drop), times scale (a build's or a
    worst-case corner's stage relative to the typical curve)."""
    pts = np.asarray(points, dtype=float)
    i = np.asarray(current_a, dtype=float)
    if len(pts) == 1:
        return np.full_like(i, pts[0, 1]) * scale
    slope = (pts[-1, 1] - pts[-2, 1]) / (pts[-1, 0] - pts[-2, 0])
    return scale * np.where(i > pts[-1, 0], pts[-1, 1] + slope * (i - pts[-1, 0]),
                            np.interp(i, pts[:, 0], pts[:, 1]))


def load_line(points, v_avail_v, r_load_ohm, scale=1.0):
    """Current i >= 0 [A] where v_avail - drop(i) = i R_load, and the stage's incremental
    resistance there [Ω] [derived: the drop is piecewise linear, so each segment is a linear
    equation; the answer lies in the last segment whose start still leaves a positive margin].
    v_avail [V]: what the supply leaves for the stage and the load at zero current; scale: the
    stage's drop relative to the typical curve."""
    pts = np.asarray(points, dtype=float)
    v = np.asarray(v_avail_v, dtype=float)
    xs, ys = pts[:, 0], pts[:, 1]
    if not (np.ndim(scale) == 0 and scale == 1.0):
        return _scaled_load_line(xs, ys, v, r_load_ohm, np.asarray(scale, dtype=float))
    slopes = np.diff(ys) / np.diff(xs) if len(pts) > 1 else np.array([0.0])
    starts = list(zip(xs[:len(slopes)], ys[:len(slopes)], slopes))
    if not np.any(np.isfinite(r_load_ohm)):
        return np.zeros(np.shape(v)), np.full(np.shape(v), float(slopes[0]))
    shape = np.broadcast(v, r_load_ohm).shape             # a swept load resistance broadcasts
    i = np.zeros(shape)
    r = np.full(shape, float(slopes[0]))
    for x0, y0, s in starts:
        on = v - y0 - x0 * r_load_ohm > 0.0
        i = np.where(on, (v - y0 + s * x0) / (s + r_load_ohm), i)
        r = np.where(on, s, r)
    return np.maximum(i, 0.0), r


def _scaled_load_line(xs, ys, v, r_load_ohm, scale):
    """load_line with every drop of the curve multiplied by scale (an array)."""
    slopes = np.diff(ys) / np.diff(xs) if len(xs) > 1 else np.array([0.0])
    shape = np.broadcast(v, r_load_ohm, scale).shape
    r = np.broadcast_to(slopes[0] * scale, shape).copy()
    if not np.any(np.isfinite(r_load_ohm)):
        return np.zeros(shape), r
    i = np.zeros(shape)
    for x0, y0, s in zip(xs[:len(slopes)], ys[:len(slopes)], slopes):
        on = v - y0 * scale - x0 * r_load_ohm > 0.0
        i = np.where(on, (v - y0 * scale + s * scale * x0) / (s * scale + r_load_ohm), i)
        r = np.where(on, s * scale, r)
    return np.maximum(i, 0.0), r


def parallel(v1, r1, v2, r2):
    """Two Thevenin sources in parallel: (V, R) [book]. r1 may be 0 (an ideal source)."""
    with np.errstate(all="ignore"):
        r = np.where(r1 == 0.0, 0.0, r1 * r2 / (r1 + r2))
        v = np.where(r1 == 0.0, v1, (v1 * r2 + v2 * r1) / (r1 + r2))
    return v, r


@dataclass(frozen=True)
class OutputStates:
    """The output in each state under its load: voltages [V] and load currents [A] at rest, and
    the Thevenin source (V, R) a timing resistor sees. Where the high stage cannot sink and a
    load to the supply lifts the output above it, `high_lifted` holds the load's own source
    (V, R) and the stage's open voltage [V] below which the stage conducts again. Where a load to
    ground sits below the low stage's open level (a resistor against a bipolar stage's offset),
    `low_split` holds the load's own source (V, R) and that level: below it only the load sinks
    the timing current."""
    v_high: object
    v_low: object
    i_high: object
    i_low: object
    high: tuple
    low: tuple
    high_lifted: tuple | None = None
    low_split: tuple | None = None


def output_states(timer: TimerModel, load: Load, vcc_v, temperature_c,
                  load_resistance_ohm=None, load_factor=1.0, vf_shift_v=0.0,
                  stage_factor=1.0) -> OutputStates:
    """Both output states of the timer at supply vcc_v [V] and ambient temperature_c [°C].
    load_resistance_ohm [Ω]: the load's resistance as an array that broadcasts (a swept load
    resistor); None or NaN: the study's [load] resistance. load_factor, vf_shift_v [V] and
    stage_factor: a build's or a worst-case corner's load resistor, LED forward voltage and
    output-stage drop relative to their nominal figures."""
    vcc = np.asarray(vcc_v, dtype=float)
    rl = load.resistance_ohm
    if load_resistance_ohm is not None and np.any(np.isfinite(load_resistance_ohm)):
        rl = np.asarray(load_resistance_ohm, dtype=float)
    if not (np.ndim(load_factor) == 0 and load_factor == 1.0):
        rl = rl * np.asarray(load_factor, dtype=float)
    sf = stage_factor
    zero = np.zeros(np.broadcast(vcc, temperature_c, rl, sf, vf_shift_v).shape)
    shift = timer.source_drop_tempco_v_per_k * (np.asarray(temperature_c, dtype=float) - 25.0)
    src, snk = timer.source_drop_points, timer.sink_drop_points
    e_high = vcc - np.maximum(drop_at(src, 0.0, sf) + shift, 0.0)      # open-circuit high level
    e_low = drop_at(snk, 0.0, sf) + zero
    _, r_src0 = load_line(src, zero + 1.0, np.inf, sf)
    _, r_snk0 = load_line(snk, zero + 1.0, np.inf, sf)
    r_src0, r_snk0 = r_src0 + zero, r_snk0 + zero
    if not np.any(np.isfinite(rl)):
        return OutputStates(e_high + zero, e_low, zero, zero, (e_high + zero, r_src0), (e_low, r_snk0))
    vf = load.forward_voltage_v + vf_shift_v + zero
    if load.to == "ground":
        i_h, r_h = load_line(src, vcc - shift - vf, rl, sf)
        v_h = vcc - np.maximum(drop_at(src, i_h, sf) + shift, 0.0)
        high = (v_h, np.where(i_h > 0, parallel(v_h, r_h, v_h, rl)[1], r_h))
        # low: the stage only sinks; a load below its open level holds the output itself at rest
        below = vf <= e_low
        low = parallel(e_low, r_snk0, vf, rl + zero)
        low = (np.where(below, low[0], e_low), np.where(below, low[1], r_snk0))
        split = None
        if np.any(below & (e_low > vf)):
            split = (vf, rl + zero, np.where(below, e_low, np.nan))
        return OutputStates(v_h, np.where(below, vf, e_low), i_h, zero, high, low, None, split)
    # load to the supply: it sinks into the low stage, and meets the high stage from above
    i_l, r_l = load_line(snk, vcc - vf, rl, sf)
    v_l = drop_at(snk, i_l, sf)
    low = (v_l, np.where(i_l > 0, parallel(v_l, r_l, v_l, rl)[1], r_l))
    v_load = vcc - vf                                   # where the load alone holds the output
    above = v_load >= e_high
    v_par, r_par = parallel(e_high, r_src0, v_load, rl + zero)
    if timer.high_can_sink:
        v_h = np.where(above, v_par, e_high)
        i_h = np.where(above, (v_load - v_h) / rl, 0.0)
        high = (v_h, np.where(above, r_par, r_src0))
        return OutputStates(v_h, v_l, i_h, i_l, high, low)
    # an emitter follower cannot sink: the load lifts the output to its own level
    v_h = np.where(above, v_load, e_high)
    high = (np.where(above, v_par, e_high), np.where(above, r_par, r_src0))
    lifted = (v_load + zero, rl + zero, e_high) if np.any(above) else None
    if lifted is not None:
        lifted = tuple(np.where(above, x, np.nan) for x in lifted)
    return OutputStates(v_h, v_l, zero, i_l, high, low, lifted)
