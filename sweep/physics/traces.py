"""Voltage traces of the timing node and the output from the model's phases.

Between a phase's start v0 and end v1 the node follows the RC law v(t) = V_inf - (V_inf - v0)
exp(-t / tau) [book], with tau = t_phase / ln((V_inf - v0) / (V_inf - v1)), so every switching
instant is exactly the model's. Pure numpy, SI units.
"""
from __future__ import annotations

import numpy as np


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


class Probe:
    """Collects a trace segment by segment: time [s], capacitor [V], output [V]."""

    def __init__(self, n: int):
        self.n, self.t = n, 0.0
        self.ts, self.vs, self.os = [], [], []

    def add(self, t, v, out_v) -> None:
        """Append raw samples (t counted from the trace's current end) and advance."""
        self.ts.append(self.t + np.asarray(t))
        self.vs.append(np.asarray(v))
        self.os.append(np.full(len(self.vs[-1]), out_v))
        self.t += float(np.asarray(t)[-1])

    def seg(self, v_a, v_b, vinf, duration_s, out_v) -> None:
        """One phase from v_a to v_b heading for vinf over duration_s, the output at out_v."""
        self.add(*rc_segment(v_a, v_b, vinf, duration_s, self.n), out_v)

    def arrays(self):
        return np.concatenate(self.ts), np.concatenate(self.vs), np.concatenate(self.os)
