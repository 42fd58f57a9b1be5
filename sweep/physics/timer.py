"""The timer chip as data: one frozen record per model, read from a TOML file in sweep/models/.

Every figure's source is in the data file beside it.
"""
from __future__ import annotations

from dataclasses import dataclass, fields, replace

import numpy as np


@dataclass(frozen=True)
class TimerModel:
    name: str
    kind: str                       # "bipolar" | "cmos" | anything a user's file says
    # supply
    min_v: float
    max_v: float
    abs_max_v: float
    typical_v: float
    quiescent_points: tuple[tuple[float, float], ...]   # (V, A), output low, no load
    quiescent_high_delta_a: float
    quiescent_max_ratio: float       # maximum over typical quiescent current
    # inputs
    threshold_fraction: float
    divider_resistance_ohm: float
    threshold_current_a: float
    threshold_current_max_a: float
    trigger_current_a: float
    trigger_current_sources: bool   # True: flows out of the trigger pin into the node
    reset_v: float
    resistance_derating: float
    # discharge
    saturation_v: float
    saturation_ohm: float
    discharge_max_a: float
    surge_current_a: float           # most the transistor pulls from a capacitor at turn-on
    surge_energy_max_j: float        # energy one turn-on may dump into the transistor
    min_resistance_ohm: float
    # output: drop below the supply (high) or above ground (low) against the load current, as
    # (A, V) points interpolated linearly and extended along the last segment
    source_drop_points: tuple[tuple[float, float], ...]
    sink_drop_points: tuple[tuple[float, float], ...]
    source_drop_tempco_v_per_k: float
    high_can_sink: bool              # can the high stage take current from a load to the supply
    source_max_a: float
    sink_max_a: float
    # timing
    propagation_delay_s: float
    max_frequency_hz: float
    min_capacitance_f: float
    # timing spreads: typical (read as one sigma by default) and maximum (the worst case's bound)
    accuracy_astable: float
    accuracy_astable_max: float
    accuracy_monostable: float
    accuracy_monostable_max: float
    drift_astable_ppm_per_k: float
    drift_astable_max_ppm_per_k: float
    drift_monostable_ppm_per_k: float
    drift_monostable_max_ppm_per_k: float
    supply_sensitivity_astable_per_v: float
    supply_sensitivity_astable_max_per_v: float
    supply_sensitivity_monostable_per_v: float
    supply_sensitivity_monostable_max_per_v: float
    # thermal
    theta_ja_c_per_w: float
    tj_max_c: float
    ambient_min_c: float
    ambient_max_c: float

    @classmethod
    def field_names(cls) -> list[str]:
        return [f.name for f in fields(cls)]

    def idealised(self) -> "TimerModel":
        """No bias current, saturation, delay or output drop: a rail-to-rail output that sources
        and sinks without loss, so the figures equal the textbook formulas."""
        return replace(self, threshold_current_a=0.0, trigger_current_a=0.0, saturation_v=0.0,
                       saturation_ohm=0.0, source_drop_points=((0.0, 0.0),),
                       sink_drop_points=((0.0, 0.0),), source_drop_tempco_v_per_k=0.0,
                       high_can_sink=True, propagation_delay_s=0.0)

    def quiescent_a(self, vcc_v, output_high: bool = False):
        """Quiescent supply current [A] at supply vcc_v [V], no load; linear through the data
        points and extrapolated beyond them, never below zero."""
        pts = np.asarray(self.quiescent_points, dtype=float)
        v = np.asarray(vcc_v, dtype=float)
        if len(pts) == 1:
            i = np.full_like(v, pts[0, 1])
        else:
            slope = (pts[-1, 1] - pts[0, 1]) / (pts[-1, 0] - pts[0, 0])
            i = np.where(v < pts[0, 0], pts[0, 1] + slope * (v - pts[0, 0]),
                         np.where(v > pts[-1, 0], pts[-1, 1] + slope * (v - pts[-1, 0]),
                                  np.interp(v, pts[:, 0], pts[:, 1])))
        if output_high:
            i = i + self.quiescent_high_delta_a
        return np.maximum(i, 0.0)
