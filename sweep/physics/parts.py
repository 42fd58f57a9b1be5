"""Passive parts: resistor tempco, capacitor technologies (temperature, DC bias, leakage).

Pure numpy, SI units. Every figure carries its source tag: [std] a published standard, [book] a
published textbook, [cp] common practice in the trade, [mem] from memory (uncertain), [derived]
worked out here from the RC law or Kirchhoff's laws.
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
        dc_bias_loss * (V / V_rated) ** 1.3 [mem], applied to the node voltage as it moves.
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
    stray_capacitance_f: float = 5e-12     # board and pins [cp: a few pF on a board, more on a plug-in breadboard]
    diode: str = "silicon"                 # diode of astable-diode: a DIODES entry
    diode_saturation_current_a: float | None = None   # at 25 °C; None: the diode's figure
    diode_ideality: float | None = None               # None: the diode's figure
    diode_drop_v: float | None = None      # a fixed forward drop instead of the Shockley law
    dc_bias_loss: float | None = None      # None: the technology's default
    discharge_resistor_ohm: float = 0.0    # monostable: in series between discharge pin and C

    @property
    def technology(self) -> Capacitor:
        return capacitor_named(self.capacitor)

    @property
    def diode_model(self) -> "Diode":
        """The diode of astable-diode with any explicit figures of the study applied."""
        d = DIODES[self.diode]
        if self.diode_saturation_current_a is not None:
            d = replace(d, saturation_current_a=self.diode_saturation_current_a)
        if self.diode_ideality is not None:
            d = replace(d, ideality=self.diode_ideality)
        return d

    def idealised(self) -> "Parts":
        """Parts with every non-ideality that moves timing set to zero: no tempco, stray
        capacitance, DC-bias loss or leakage, and an ideal diode (a fixed drop of 0 V)."""
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
    """R(T) = R25 (1 + alpha (T - 25 °C)) [cp: resistor datasheets state the tempco this way]. Returns ohms."""
    return r_ohm * (1.0 + tempco_per_k * (temperature_c - 25.0))


def capacitance_temperature_factor(cap: Capacitor, temperature_c):
    """Multiplier on the 25 °C capacitance at temperature_c [°C], from the technology's curve."""
    pts = np.asarray(cap.temp_points, dtype=float)
    if len(pts) == 1:
        return np.ones_like(np.asarray(temperature_c, dtype=float)) * (1.0 + pts[0, 1])
    return 1.0 + np.interp(temperature_c, pts[:, 0], pts[:, 1])


#: temperature range of each code's band [std EIA-198: X = -55, Y = -30 C; 5 = 85, 7 = 125 C;
#: class I C0G over -55..125 C]; films and electrolytics over their curves' ends [cp]
def code_range_c(cap: Capacitor) -> tuple[float, float]:
    """(low, high) temperature [°C] at which the technology's band applies."""
    pts = cap.temp_points
    if len(pts) < 2:
        return (-55.0, 125.0)
    return (float(pts[0][0]), float(pts[-1][0]))


def temperature_envelope(cap: Capacitor, temperature_c):
    """(lowest, highest) relative change of capacitance [-] a part of this code may have at
    temperature_c [°C]: zero at 25 °C (where the tolerance is specified), widening linearly to
    the code's band at the code's temperature limits, and never narrower than the typical
    curve [std EIA-198 for the band at the limits; the linear widening is derived, a reading of
    the code that a real part's curve stays inside]."""
    t = np.asarray(temperature_c, dtype=float)
    lo_t, hi_t = code_range_c(cap)
    reach = np.where(t < 25.0, (25.0 - t) / (25.0 - lo_t), (t - 25.0) / (hi_t - 25.0))
    reach = np.clip(reach, 0.0, 1.0)
    typ = capacitance_temperature_factor(cap, t) - 1.0
    return np.minimum(cap.temp_band[0] * reach, typ), np.maximum(cap.temp_band[1] * reach, typ)


def dc_bias_factor(cap: Capacitor, v_mean_v, v_rated_v, loss: float | None = None):
    """Multiplier for DC-bias loss: 1 - k (V/Vrated)^1.3 [mem]; >= 0.05."""
    k = cap.dc_bias_loss if loss is None else loss
    if k == 0.0:
        return 1.0
    ratio = np.clip(np.asarray(v_mean_v, dtype=float) / v_rated_v, 0.0, None)
    return np.clip(1.0 - k * ratio ** 1.3, 0.05, 1.0)


#: the technologies whose leakage follows the wet capacitors' rule below (the others: insulation)
WET_LEAKAGE = ("electrolytic", "tantalum")
#: the wet capacitors' leakage rule: I <= 0.01 C V [uA, C in uF, V rated] [cp; IEC 60384-4 method],
#: rising LEAKAGE_RISE times per LEAKAGE_RISE_SPAN_K kelvin [mem] (see leakage_max_a)
LEAKAGE_A_PER_UF_V = 0.01e-6
LEAKAGE_RISE, LEAKAGE_RISE_SPAN_K = 2.5, 40.0
#: ceramics and films: insulation resistance 10 Gohm or 500 s / C, whichever is less [cp, mem]
INSULATION_MAX_OHM, INSULATION_TIME_S = 10e9, 500.0
#: typical leakage of an electrolytic or tantalum at its rated voltage as a share of the
#: specification maximum: typical parts leak several times less than the limit [cp]
LEAKAGE_TYPICAL_SHARE = 0.2
#: exponent of the typical leakage against the working voltage as a share of the rating: the
#: leakage falls steeply when a part is worked below its rating (the usual cure for leakage) [mem]
LEAKAGE_VOLTAGE_EXPONENT = 2.0


def leakage_floor_a(cap: Capacitor) -> float:
    """The floor of leakage_max_a's rule [A]: 3 uA for an aluminium electrolytic, 0.5 uA for a
    tantalum [cp] (specification maxima)."""
    return 3e-6 if cap.leakage == "electrolytic" else 0.5e-6


def leakage_max_a(cap: Capacitor, c_f, v_rated_v, temperature_c):
    """Specification maximum of the leakage current [A] at the rated voltage (a guaranteed bound,
    not a nominal figure).

    Aluminium electrolytic: I <= 0.01 C V [uA, C in uF, V rated] or 3 uA, whichever is greater,
    after 2 min at rated voltage [cp; test method in IEC 60384-4]; tantalum the same rule with a
    0.5 uA floor [cp]. Both rise 2-3x from 20 to 60 °C [mem]: factor 2.5 ** ((T - 20) / 40).
    """
    floor_a = leakage_floor_a(cap)
    i_a = np.maximum(LEAKAGE_A_PER_UF_V * (np.asarray(c_f, dtype=float) * 1e6) * v_rated_v, floor_a)
    return i_a * leakage_temperature_factor(temperature_c)


def leakage_temperature_factor(temperature_c):
    """The wet capacitors' leakage at temperature_c [°C] relative to 20 °C: 2.5x per 40 K [mem]."""
    return LEAKAGE_RISE ** ((np.asarray(temperature_c, dtype=float) - 20.0) / LEAKAGE_RISE_SPAN_K)


def leakage_voltage_factor(v_work_v, v_rated_v):
    """The typical leakage conductance at v_work_v [V] relative to that at the rating v_rated_v
    [V]: (V_work / V_rated) ** (LEAKAGE_VOLTAGE_EXPONENT - 1), the share clipped to [1e-6, 1]."""
    share = np.clip(np.asarray(v_work_v, dtype=float) / v_rated_v, 1e-6, 1.0)
    return share ** (LEAKAGE_VOLTAGE_EXPONENT - 1.0)


def leakage_conductance_s(cap: Capacitor, c_f, v_rated_v, temperature_c, v_work_v=None,
                          maximum: bool = False):
    """Leakage of the timing capacitor as a parallel conductance [S] at temperature_c [°C].

    Electrolytic and tantalum, typical (the nominal figure): the specification maximum
    (`leakage_max_a`) times LEAKAGE_TYPICAL_SHARE at rated voltage, falling as
    (V_work / V_rated) ** LEAKAGE_VOLTAGE_EXPONENT below it; the conductance is that current at
    the working voltage v_work_v [V] (the highest voltage the capacitor sees, the upper
    threshold) divided by it, so it is exact there and errs high below it. At one working voltage
    a higher-rated part leaks less [cp]. maximum=True: the specification maximum at rated
    voltage as a conductance, I_max / V_rated (the worst-case bound), never below the typical.
    Ceramics and films: insulation resistance 10 GΩ or 500 s / C, whichever is less [cp, mem],
    no temperature dependence modelled, the same for typical and maximum.
    """
    c_f = np.asarray(c_f, dtype=float)
    if cap.leakage in WET_LEAKAGE:
        i_max = leakage_max_a(cap, c_f, v_rated_v, temperature_c)
        g_max = i_max / v_rated_v
        if v_work_v is None:
            v_work_v = v_rated_v
        g_typ = LEAKAGE_TYPICAL_SHARE * g_max * leakage_voltage_factor(v_work_v, v_rated_v)
        return g_max if maximum else g_typ
    return 1.0 / np.minimum(INSULATION_MAX_OHM, INSULATION_TIME_S / c_f)


def leakage_spread(cap: Capacitor, v_rated_v, v_work_v):
    """Ratio of the specification maximum to the typical leakage conductance at working voltage
    v_work_v [V] (1 where the technology's leakage is not specified that way): how far the
    worst case and the Monte Carlo may take the leakage above its nominal figure."""
    if cap.leakage not in WET_LEAKAGE:
        return np.ones(np.shape(v_work_v))
    return 1.0 / (LEAKAGE_TYPICAL_SHARE * leakage_voltage_factor(v_work_v, v_rated_v))


# --- the diode of astable-diode ---------------------------------------------------------------
BOLTZMANN_J_PER_K = 1.380649e-23     # exact since the 2019 SI redefinition [std: SI brochure]
ELEMENTARY_CHARGE_C = 1.602176634e-19  # exact [std: SI brochure]
T0_K = 298.15                          # 25 °C, the reference temperature of the diode figures


@dataclass(frozen=True)
class Diode:
    """A small-signal diode as a Shockley device, I = Is (exp(V / (n Vt)) - 1) [book: Sedra &
    Smith, *Microelectronic Circuits*, the diode equation], Vt = k T / q.

    saturation_current_a: Is at 25 °C [A]; ideality: n [-]; gap_ev: the band-gap energy and xti
    the saturation-current temperature exponent of the temperature rule in `saturation_at`;
    reverse_current_a: typical reverse leakage at 25 °C [A] with the diode reverse biased by a few
    volts (it doubles about every 10 K [cp]).
    """
    name: str
    label: str
    saturation_current_a: float
    ideality: float
    gap_ev: float
    xti: float
    reverse_current_a: float


# Small-signal silicon: Is about 2.5 nA, n about 1.75, a common small-signal fit [mem]; band gap
# 1.11 eV and XTI 3 for a silicon junction [book: Massobrio & Antognetti, *Semiconductor Device
# Modeling with SPICE*, diode model]. Small-signal Schottky: about 0.3 V at 1 mA (Is 15 nA,
# n 1.05) [mem], barrier 0.69 eV and XTI 2 [book: same]; reverse leakage 5 nA (silicon) and
# 50 nA (Schottky) at 25 °C and a few volts, typical [mem].
DIODES: dict[str, Diode] = {d.name: d for d in [
    Diode("silicon", "small-signal silicon diode", 2.5e-9, 1.75, 1.11, 3.0, 5e-9),
    Diode("schottky", "small-signal Schottky diode", 15e-9, 1.05, 0.69, 2.0, 50e-9),
]}


def thermal_voltage_v(temperature_c):
    """Vt = k T / q [V] at temperature_c [°C] (25.7 mV at 25 °C) [book]."""
    return BOLTZMANN_J_PER_K * (np.asarray(temperature_c, dtype=float) + 273.15) / ELEMENTARY_CHARGE_C


def saturation_at(diode: Diode, temperature_c):
    """Saturation current [A] at temperature_c [°C]:
    Is(T) = Is(T0) (T/T0)^(XTI/n) exp(q Eg / (n k) (1/T0 - 1/T)) [book: Massobrio & Antognetti,
    *Semiconductor Device Modeling with SPICE*, the diode model's temperature rule]."""
    t_k = np.asarray(temperature_c, dtype=float) + 273.15
    n = diode.ideality
    return diode.saturation_current_a * (t_k / T0_K) ** (diode.xti / n) * np.exp(
        diode.gap_ev * ELEMENTARY_CHARGE_C / (n * BOLTZMANN_J_PER_K) * (1.0 / T0_K - 1.0 / t_k))


def reverse_current_at(diode: Diode, temperature_c):
    """Reverse leakage [A] at temperature_c [°C]: the 25 °C figure doubling every 10 K [cp],
    and never below the Shockley saturation current at that temperature [book]."""
    t = np.asarray(temperature_c, dtype=float)
    return np.maximum(diode.reverse_current_a * 2.0 ** ((t - 25.0) / 10.0), saturation_at(diode, t))


def wright_omega(z):
    """Wright omega function w(z), the solution w of w + ln w = z (so w = W(exp z), Lambert's W
    of exp z without overflow) for real z [book: Corless & Jeffrey, "The Wright omega function",
    2002]. Newton's method on w + ln w - z from a start within a few per cent everywhere: exp z
    below z = -2 (where w ~ exp z), z - ln z above z = 4 (the asymptote), a line between; four
    steps reach 1e-14 (tested against scipy.special.wrightomega). Below z = -35, w = exp z to
    1e-15. Vectorised; only numpy."""
    z = np.asarray(z, dtype=float)
    with np.errstate(all="ignore"):
        w = np.where(z < -2.0, np.exp(z), np.where(z > 4.0, z - np.log(np.abs(z)), 0.12 + 0.22 * (z + 2.0)))
        for _ in range(4):
            w = np.maximum(w, 1e-300)
            w = w - (w + np.log(w) - z) * w / (1.0 + w)
        return np.where(z < -35.0, np.exp(z), w)
