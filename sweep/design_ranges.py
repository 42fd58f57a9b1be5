"""Design ranges from the spec: the timing closed forms inverted for standard part values.

Given a timing target (frequency and duty, or a pulse width), the supply and temperature ranges,
a timer model and a capacitor technology, `propose` finds, for each capacitor value of a series,
the resistors that hit the target exactly, keeps the capacitors whose resistors all land inside
the timer's usable resistance range, snaps the resistors to an IEC 60063 series with one
neighbour on each side, and returns [design] ranges that bracket every solution, with one line
per choice saying why. Pure functions, SI units; nothing here reads or writes files.

Closed forms [book: any circuits text, e.g. Horowitz & Hill, *The Art of Electronics*, the 555
timer; the diode and one-resistor forms are derived from the same RC law]:
  astable            tH = ln2 (RA + RB) C,  tL = ln2 RB C
  astable-diode      tH = RA C ln((V - Vd - Vc/2) / (V - Vd - Vc)),  tL = ln2 RB C
  astable-symmetric  tH = R C ln((VOH - Vc/2) / (VOH - Vc)),  tL = R C ln(Vc / (Vc/2)) = ln2 R C
  monostable         t  = ln3 R C
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field, replace

import numpy as np

from . import values as qv
from .physics.parts import Capacitor, leakage_conductance_s
from .physics.timer import TimerModel

LN2 = math.log(2.0)          # [book]
LN3 = math.log(3.0)          # [book]
#: a timing resistor above 10 MOhm is hard to buy and picks up board leakage [cp]
R_COMMON_MAX_OHM = 10e6
#: the timing resistance kept below this share of the capacitor's typical leakage resistance, so
#: the leakage moves the timing by a few per cent at most [derived: a parallel path of 20 R]; the
#: sweep itself then models the leakage
LEAKAGE_RATIO = 20.0
#: stray capacitance kept below 1 % of C [derived] with the 5 pF default of the parts [cp]
STRAY_F = 5e-12
#: diode drop bracket of astable-diode at the microamps to milliamps of a timing network: a
#: small-signal silicon diode drops about 0.3-0.7 V, a Schottky 0.1-0.4 V [cp]; the realistic
#: model's Shockley diode sits inside these
DIODE_DROP_V = {"silicon": (0.3, 0.7), "schottky": (0.1, 0.4)}
#: the common range of each capacitor technology [cp: distributors' ranges], farads
TECH_RANGE_F = {"C0G": (1e-12, 100e-9), "X7R": (100e-12, 100e-6), "X5R": (100e-12, 100e-6),
                "Y5V": (1e-9, 100e-6), "polypropylene": (1e-9, 10e-6),
                "polyester": (1e-9, 10e-6), "electrolytic": (1e-6, 10e-3),
                "tantalum": (100e-9, 1e-3)}


_KEYS = {"astable": ("ra", "rb"), "astable-diode": ("ra", "rb"), "astable-symmetric": ("r",),
         "monostable": ("r",)}
#: the circuits whose closed forms this module inverts (a spec-first study: `from_spec`, `new`)
INVERTIBLE = tuple(_KEYS)


@dataclass(frozen=True)
class Target:
    """What the timing must do. frequency_hz with duty_lo..duty_hi (astables) or pulse_width_s
    (monostable); duty_lo/duty_hi may be None (then a usual default is taken)."""
    frequency_hz: float | None = None
    duty_lo: float | None = None
    duty_hi: float | None = None
    pulse_width_s: float | None = None
    tolerance: float = 0.0        # relative tolerance of the frequency or pulse width


@dataclass
class Proposal:
    values: dict[str, np.ndarray]             # "ra", "rb", "r", "c" -> ascending SI values
    bounds: dict[str, tuple[float, float]]    # key -> (min, max) written in the study
    series: dict[str, str]                    # key -> IEC 60063 series
    notes: list[str] = field(default_factory=list)   # how each range was chosen, one line each
    duty: float | None = None                 # the duty the inversion aimed at
    capacitors_all: np.ndarray = field(default_factory=lambda: np.zeros(0))  # every C that fits


def usable_resistance(timer: TimerModel, vcc_lo: float, vcc_hi: float) -> tuple[float, float, list[str]]:
    """(lowest, highest) timing resistance [ohm] the timer takes over vcc_lo..vcc_hi [V], and why.

    Highest: the bias-current limit at the lowest supply, derating x (VCC - Vc) / I_th,max (the
    realistic model's resistance-too-large flag) and at most R_COMMON_MAX_OHM [cp]. Lowest: the
    timer's minimum resistance, and the steady discharge current VCC / R at the highest supply
    within the discharge transistor's limit."""
    v_up = timer.threshold_fraction * vcc_lo
    hi_bias = (timer.resistance_derating * (vcc_lo - v_up) / timer.threshold_current_max_a
               if timer.threshold_current_max_a > 0 else math.inf)
    hi = min(hi_bias, R_COMMON_MAX_OHM)
    lo = max(timer.min_resistance_ohm, vcc_hi / timer.discharge_max_a)
    why = [f"usable resistance {qv.format_eng(lo, 'Ω')} to {qv.format_eng(hi, 'Ω')}: at least the "
           f"timer's minimum ({qv.format_eng(timer.min_resistance_ohm, 'Ω')}) and VCC / "
           f"{qv.format_eng(timer.discharge_max_a, 'A')} discharge limit at {vcc_hi:g} V; at most "
           + (f"the bias-current limit {qv.format_eng(hi_bias, 'Ω')} at {vcc_lo:g} V "
              f"(derating {timer.resistance_derating:g} x (VCC - Vc) / "
              f"{qv.format_eng(timer.threshold_current_max_a, 'A')} maximum)"
              + (" and 10 MΩ, above which timing resistors are hard to buy" if hi < hi_bias else ""))]
    return lo, hi, why


def _duty_aim(circuit: str, t: Target) -> float:
    """The duty the inversion aims at: the middle of the spec's window; a one-sided window is
    closed with the circuit's natural limit (above 50 % for the plain astable) [derived]."""
    if circuit == "astable-symmetric":
        return 0.5
    lo, hi = t.duty_lo, t.duty_hi
    if circuit == "astable":
        lo = max(lo if lo is not None else 0.5, 0.5)
        hi = min(hi if hi is not None else (0.8 if t.duty_lo is None else 0.95), 0.95)
        if hi <= lo:
            hi = lo + 0.01
        return 0.5 * (lo + hi)
    lo = lo if lo is not None else (0.5 * hi if hi is not None else 0.3)
    hi = hi if hi is not None else min(0.95, lo + 0.4 if t.duty_lo is not None else 0.7)
    return 0.5 * (lo + hi)


def exact_resistors(circuit: str, t: Target, c_f, *, vcc_v: float = 5.0, diode_drop_v: float = 0.0,
                    threshold_fraction: float = 2.0 / 3.0, output_drop_v: float = 0.0,
                    duty: float | None = None) -> dict[str, np.ndarray]:
    """The exact resistors [ohm] that meet target t with capacitors c_f [F] (vectorised over c_f),
    from the closed forms in the module docstring."""
    c = np.asarray(c_f, dtype=float)
    if circuit == "monostable":
        return {"r": t.pulse_width_s / (LN3 * c)}
    period = 1.0 / t.frequency_hz
    d = _duty_aim(circuit, t) if duty is None else duty
    vc = threshold_fraction * vcc_v
    if circuit == "astable":
        return {"ra": (2.0 * d - 1.0) * period / (LN2 * c), "rb": (1.0 - d) * period / (LN2 * c)}
    if circuit == "astable-diode":
        k_high = math.log((vcc_v - diode_drop_v - vc / 2) / (vcc_v - diode_drop_v - vc))
        return {"ra": d * period / (k_high * c), "rb": (1.0 - d) * period / (LN2 * c)}
    if circuit == "astable-symmetric":
        voh = vcc_v - output_drop_v
        k = math.log((voh - vc / 2) / (voh - vc)) + math.log(vc / (vc / 2))
        return {"r": period / (k * c)}
    raise ValueError(f"circuit {circuit!r} has no timing to invert")


def snap(series: str, lo: float, hi: float) -> np.ndarray:
    """Values of an IEC 60063 series from the nearest (by ratio) to lo to the nearest to hi, plus
    one neighbour on each side."""
    vals = qv.series_values(series, lo / 100.0, hi * 100.0)
    logs = np.log(vals)
    i = int(np.argmin(np.abs(logs - math.log(lo))))
    j = int(np.argmin(np.abs(logs - math.log(hi))))
    return vals[max(0, i - 1):j + 2]


def propose(circuit: str, t: Target, timer: TimerModel, tech: Capacitor, *,
            vcc: tuple[float, float], temperature: tuple[float, float] = (25.0, 25.0),
            r_series: str = "E24", c_series: str = "E6", capacitor_voltage_v: float = 50.0,
            diode: str = "silicon", capacitors: int | None = None) -> Proposal:
    """[design] ranges around the exact solutions of target t (see the module docstring).

    The inversion is repeated at the supply's ends and, for astable-diode, at both ends of the
    diode-drop bracket, so the ranges hold the solution wherever the supply and diode sit; the
    capacitors kept are those (of series c_series, within the technology's common range) whose
    resistors all land in the usable range at every one of those corners; of them, the
    `capacitors` values with resistors nearest the middle of the usable range (logarithmically)
    are written (default: 2 for the two-resistor astables, 1 for the one-resistor circuits, whose
    resistor ranges for two capacitors would hardly overlap), so the sweep stays small and most of
    its designs sit on the target."""
    if capacitors is None:
        capacitors = 2 if circuit in ("astable", "astable-diode") else 1
    if circuit not in ("astable", "astable-diode", "astable-symmetric", "monostable"):
        raise ValueError(f"circuit {circuit!r} has no timing parts to choose")
    vlo, vhi = float(min(vcc)), float(max(vcc))
    r_lo, r_hi, notes = usable_resistance(timer, vlo, vhi)
    t_lo, t_hi = TECH_RANGE_F.get(tech.name, (1e-12, 1.0))
    c_min = max(t_lo, timer.min_capacitance_f, 100.0 * STRAY_F)
    # the turn-on dump of C from the upper threshold into the discharge pin, at most
    # 1/2 C Vc^2 [book], within the transistor's energy limit
    c_max = min(t_hi, 2.0 * timer.surge_energy_max_j / (timer.threshold_fraction * vhi) ** 2)
    cs = qv.series_values(c_series, c_min, c_max) if c_max >= c_min else np.zeros(0)
    notes.append(f"capacitors: {c_series} values of {tech.label} from {qv.format_eng(c_min, 'F')} "
                 f"(its common range, the timer's minimum and 100 x 5 pF stray) to "
                 f"{qv.format_eng(c_max, 'F')} (common range; turn-on dump 1/2 C Vc^2 within "
                 f"{qv.format_eng(timer.surge_energy_max_j, 'J')} at {vhi:g} V)")
    drops = DIODE_DROP_V.get(diode, (0.3, 0.7)) if circuit == "astable-diode" else (0.0,)
    out_drop = timer.source_drop_points[0][1]
    # one-resistor circuits: every resistor whose ideal timing lands in the spec's window
    spread = (1.0 - t.tolerance, 1.0 + t.tolerance) if "ra" not in _KEYS[circuit] else (1.0,)
    aims = [replace(t, frequency_hz=t.frequency_hz * s) if t.frequency_hz else
            replace(t, pulse_width_s=t.pulse_width_s * s) for s in spread]
    corners = [exact_resistors(circuit, a, cs, vcc_v=v, diode_drop_v=vd,
                               threshold_fraction=timer.threshold_fraction, output_drop_v=out_drop)
               for v in (vlo, vhi) for vd in drops for a in aims]
    keys = list(corners[0])
    lo = {k: np.min([cr[k] for cr in corners], axis=0) for k in keys}
    hi = {k: np.max([cr[k] for cr in corners], axis=0) for k in keys}
    # the capacitor's leakage resistance (typical, at the upper threshold) caps R [derived]
    g_leak = leakage_conductance_s(tech, cs, capacitor_voltage_v, 25.0,
                                   timer.threshold_fraction * vhi) if len(cs) else np.zeros(0)
    r_cap = np.minimum(r_hi, 1.0 / (LEAKAGE_RATIO * np.maximum(g_leak, 1e-300)))
    r_charge = {k: hi[k] for k in keys}
    if circuit == "astable":          # the bias current flows through RA + RB while charging
        r_charge = {"ra": hi["ra"] + hi["rb"], "rb": hi["ra"] + hi["rb"]}
    fits = np.ones(len(cs), dtype=bool)
    for k in keys:
        fits &= (lo[k] >= r_lo) & (r_charge[k] <= r_cap) & (lo[k] > 0)
    if not fits.any():
        raise ValueError("no " + c_series + f" capacitor of {tech.label} puts every timing "
                         f"resistor inside {qv.format_eng(r_lo, 'Ω')} to "
                         f"{qv.format_eng(r_hi, 'Ω')}: try another capacitor technology or timer")
    kept_all = cs[fits]
    # rank the fitting capacitors by how central their resistors sit (log scale) [derived]
    centre = 0.5 * (math.log(r_lo) + math.log(min(r_hi, float(np.max(r_cap)))))
    off = np.max([np.abs(0.5 * (np.log(lo[k][fits]) + np.log(hi[k][fits])) - centre) for k in keys],
                 axis=0)
    pick = np.sort(np.argsort(off, kind="stable")[:max(1, capacitors)])
    c_keep = kept_all[pick]
    idx = np.flatnonzero(fits)[pick]
    notes.append(f"{len(kept_all)} {c_series} capacitor(s) put every resistor in range "
                 f"({qv.format_eng(kept_all[0], 'F')} to {qv.format_eng(kept_all[-1], 'F')}); "
                 f"kept the {len(c_keep)} whose resistors sit nearest the middle of the usable "
                 "range (a wider list multiplies the designs, most of them off target)")
    values = {"c": c_keep}
    bounds = {"c": (float(c_keep[0]), float(c_keep[-1]))}
    series = {"c": c_series}
    aim = _duty_aim(circuit, t) if circuit != "monostable" else None
    for k in keys:
        a, b = float(np.min(lo[k][idx])), float(np.max(hi[k][idx]))
        v = np.unique(np.concatenate([snap(r_series, lo[k][i], hi[k][i]) for i in idx]))
        values[k] = v
        bounds[k] = (float(v[0]), float(v[-1]))
        series[k] = r_series
        what = ("the exact solutions at both supply ends" +
                (f" and both ends of the +-{t.tolerance:.3g} window" if len(spread) > 1 else "") +
                (f" and diode drops {drops[0]:g}-{drops[-1]:g} V" if len(drops) > 1 else ""))
        notes.append(f"{k}: {what} span {qv.format_eng(a, 'Ω')} to {qv.format_eng(b, 'Ω')} over "
                     f"the kept capacitors; snapped to {r_series} with one neighbour each side")
    if aim is not None:
        notes.append(f"aimed at duty {aim:.3g} (middle of the spec's window) and "
                     f"{qv.format_eng(t.frequency_hz, 'Hz')}")
    else:
        notes.append(f"aimed at a pulse of {qv.format_eng(t.pulse_width_s, 's')} (ln 3 R C)")
    return Proposal(values, bounds, series, notes, aim, kept_all)
