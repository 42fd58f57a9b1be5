"""Passive parts: resistor tempco, capacitor technologies (temperature, DC bias, leakage).

Pure numpy, SI units. Every figure carries its source tag (see DOMAIN.md):
[std] standard, [cp] common practice, [mem] from memory, [derived] worked out here.
"""
from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np


@dataclass(frozen=True)
class Capacitor:
    """One capacitor technology.

    temp_points: (temperature [°C], relative change of capacitance) points, interpolated
        linearly and held flat outside; the band of the code is in `temp_band`.
    dc_bias_loss: fractional loss at rated voltage; the loss at voltage V is
        dc_bias_loss * (V / V_rated) ** 1.3 [mem: DOMAIN.md section 3].
    leakage: "electrolytic" (0.01 C V uA or 3 uA), "tantalum" (0.01 C V uA or 0.5 uA),
        or "insulation" (10 GΩ or 500 s / C, whichever is less).
    """
    name: str
    label: str
    temp_points: tuple[tuple[float, float], ...]
    temp_band: tuple[float, float]       # (lowest, highest) relative change over the code's range
    dc_bias_loss: float
    leakage: str
    polarised: bool = False


# EIA-198 [std]: C0G = 0 +-30 ppm/K; X7R, X5R +-15 %; Y5V +22/-82 %.
# The typical curves inside each band (peak near room temperature) are [mem].
# Film: polypropylene about -200 ppm/K, polyester +200..+600 ppm/K [cp].
# Aluminium electrolytic: 10-25 % lower at -40 C, a few % higher when hot [mem].
# DC-bias loss at rated voltage: X7R/X5R 0.5 (30-80 % quoted), Y5V 0.8 (70-90 %) [cp, wide
# spread]; C0G, films and electrolytics none [cp]. The 5 % floor of dc_bias_factor only keeps C
# positive for absurd inputs [derived].
CAPACITORS: dict[str, Capacitor] = {c.name: c for c in [
    Capacitor("C0G", "C0G ceramic (class I)", ((25.0, 0.0),), (-30e-6 * 100, 30e-6 * 100), 0.0,
              "insulation"),
    Capacitor("X7R", "X7R ceramic (class II)", ((-55.0, -0.10), (25.0, 0.0), (125.0, -0.12)),
              (-0.15, 0.15), 0.5, "insulation"),
    Capacitor("X5R", "X5R ceramic (class II)", ((-55.0, -0.10), (25.0, 0.0), (85.0, -0.10)),
              (-0.15, 0.15), 0.5, "insulation"),
    Capacitor("Y5V", "Y5V ceramic (class II)", ((-30.0, -0.60), (10.0, 0.05), (25.0, 0.0),
                                               (85.0, -0.75)), (-0.82, 0.22), 0.8, "insulation"),
    Capacitor("polypropylene", "polypropylene film", ((-55.0, 200e-6 * 80), (125.0, -200e-6 * 100)),
              (-0.02, 0.02), 0.0, "insulation"),
    Capacitor("polyester", "polyester (PET) film", ((-55.0, -400e-6 * 80), (125.0, 400e-6 * 100)),
              (-0.05, 0.06), 0.0, "insulation"),
    Capacitor("electrolytic", "aluminium electrolytic", ((-40.0, -0.15), (20.0, 0.0), (85.0, 0.04)),
              (-0.25, 0.05), 0.0, "electrolytic", True),
    Capacitor("tantalum", "tantalum", ((-55.0, -0.08), (25.0, 0.0), (85.0, 0.05)),
              (-0.10, 0.08), 0.0, "tantalum", True),
]}

#: other spellings a study may use
CAPACITOR_ALIASES = {"np0": "C0G", "cog": "C0G", "c0g": "C0G", "x7r": "X7R", "x5r": "X5R",
                     "y5v": "Y5V", "pp": "polypropylene", "polypropylene": "polypropylene",
                     "pet": "polyester", "polyester": "polyester",
                     "electrolytic": "electrolytic", "aluminium-electrolytic": "electrolytic",
                     "aluminum-electrolytic": "electrolytic", "alu": "electrolytic",
                     "tantalum": "tantalum", "ta": "tantalum"}


def capacitor_named(name: str) -> Capacitor:
    """The technology for a study's `capacitor` key (case-insensitive); KeyError if unknown."""
    key = CAPACITOR_ALIASES.get(str(name).strip().lower())
    if key is None:
        raise KeyError(name)
    return CAPACITORS[key]


@dataclass(frozen=True)
class Parts:
    """Part data shared by every point of a study. SI units."""
    resistor_tolerance: float = 0.05       # fraction; E24 5 % [std IEC 60063]
    resistor_tempco_per_k: float = 100e-6  # thick-film chip, 1 % class [cp]
    resistor_power_w: float = 0.25         # common small resistor rating [cp]
    capacitor: str = "X7R"
    capacitor_tolerance: float = 0.10      # [cp]
    capacitor_voltage_v: float = 50.0      # rating [cp]
    stray_capacitance_f: float = 5e-12     # board and pins [cp: DOMAIN.md section 3]
    diode_drop_v: float = 0.7              # silicon diode forward drop [book]
    dc_bias_loss: float | None = None      # None: the technology's default

    @property
    def technology(self) -> Capacitor:
        return capacitor_named(self.capacitor)

    def idealised(self) -> "Parts":
        """Parts with every non-ideality that moves timing set to zero (DOMAIN.md section 9)."""
        return replace(self, resistor_tempco_per_k=0.0, stray_capacitance_f=0.0, diode_drop_v=0.0,
                       dc_bias_loss=0.0)


@dataclass(frozen=True)
class Load:
    """What the output drives. resistance_ohm = inf means no load."""
    resistance_ohm: float = float("inf")
    to: str = "ground"                     # "ground": output sources; "supply": output sinks
    forward_voltage_v: float = 0.0         # e.g. an LED in series
    kind: str = "resistive"                # resistive | led | relay | inductive | mains-switching


def resistor_at(r_ohm, temperature_c, tempco_per_k):
    """R(T) = R25 (1 + alpha (T - 25 °C)) [cp: DOMAIN.md section 4]. Returns ohms."""
    return r_ohm * (1.0 + tempco_per_k * (temperature_c - 25.0))


def capacitance_temperature_factor(cap: Capacitor, temperature_c):
    """Multiplier on the 25 °C capacitance at temperature_c [°C], from the technology's curve."""
    pts = np.asarray(cap.temp_points, dtype=float)
    if len(pts) == 1:
        return np.ones_like(np.asarray(temperature_c, dtype=float)) * (1.0 + pts[0, 1])
    return 1.0 + np.interp(temperature_c, pts[:, 0], pts[:, 1])


def dc_bias_factor(cap: Capacitor, v_mean_v, v_rated_v, loss: float | None = None):
    """Multiplier for DC-bias loss: 1 - k (V/Vrated)^1.3 [mem: DOMAIN.md section 3]; >= 0.05."""
    k = cap.dc_bias_loss if loss is None else loss
    if k == 0.0:
        return 1.0
    ratio = np.clip(np.asarray(v_mean_v, dtype=float) / v_rated_v, 0.0, None)
    return np.clip(1.0 - k * ratio ** 1.3, 0.05, 1.0)


def leakage_conductance_s(cap: Capacitor, c_f, v_rated_v, temperature_c):
    """Leakage of the timing capacitor as a parallel conductance [S].

    Electrolytic: I <= 0.01 C V [uA, C in uF, V rated] or 3 uA, whichever is greater, after
    2 min at rated voltage [cp; test method in IEC 60384-4]; tantalum the same rule with a 0.5 uA
    floor [cp]. Both rise 2-3x from 20 to 60 °C [mem]: factor 2.5 ** ((T - 20) / 40).
    Ceramics and films: insulation resistance 10 GΩ or 500 s / C, whichever is less [cp, mem].
    """
    c_f = np.asarray(c_f, dtype=float)
    if cap.leakage in ("electrolytic", "tantalum"):
        floor_a = 3e-6 if cap.leakage == "electrolytic" else 0.5e-6
        i_a = np.maximum(0.01e-6 * (c_f * 1e6) * v_rated_v, floor_a)
        return i_a / v_rated_v * 2.5 ** ((np.asarray(temperature_c, dtype=float) - 20.0) / 40.0)
    return 1.0 / np.minimum(10e9, 500.0 / c_f)       # no temperature dependence modelled
