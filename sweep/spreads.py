"""What varies between builds of one design, and how far: the worst case's corners and the
Monte Carlo's draws beyond the part tolerances and the timer's own spreads.

Every spread has a typical figure (the nominal sweep uses it) and a bound (the worst case uses
it; a Monte Carlo build draws inside it, the bound read as 3 sigma [cp]):

- each timing part: its tolerance, and its temperature behaviour: a resistor's tempco of either
  sign up to the study's figure, a capacitor anywhere inside its code's temperature envelope
  (`parts.temperature_envelope`) and, for class II ceramics, a DC-bias curve from 1/1.6 to 1.6
  times the typical loss [cp: 30-80 % at rated voltage against 50 % typical];
- electrolytic and tantalum leakage: from typical up to the specification maximum
  (`parts.leakage_spread`), and as far below;
- the Shockley diode's saturation current: a factor 3 either way [mem];
- the timer's quiescent current: up to its file's maximum-over-typical ratio [ds-bip], [ds-cmos];
- the load: its resistor's tolerance (the study's resistor tolerance [cp]), an LED's forward
  voltage +-0.15 V [mem] and the output stage's drop 1/1.2 to 1.2 x typical [mem]. The worst case
  moves the three together towards the stronger or the weaker load current (monotonic in each
  [derived]); a Monte Carlo build draws each on its own.

In the worst case a part's corner moves its tolerance, tempco and envelope (and a capacitor's
DC-bias curve) together in the direction that moves its value the same way, so a corner is the
extreme of the part's value at every temperature [derived: timing is monotonic in each part's
value]; the other spreads are corners of their own.
"""
from __future__ import annotations

import itertools
from dataclasses import dataclass

import numpy as np

from .engine import Variation
from .physics import CIRCUIT_PARTS
from .physics.parts import (WET_LEAKAGE, capacitance_temperature_factor, leakage_spread,
                            temperature_envelope)
from .study import Study

DC_BIAS_SPREAD = 1.6       # DC-bias loss from 1/1.6 to 1.6 x typical [cp: 30-80 % vs 50 %]
DIODE_IS_SPREAD = 3.0      # diode saturation current a factor 3 either way [mem]
LED_VF_SPREAD_V = 0.15     # an LED's forward voltage +-0.15 V within one colour and current [mem]
STAGE_SPREAD = 1.2         # output-stage drop from 1/1.2 to 1.2 x typical [mem]
RESISTORS = ("ra", "rb", "r")
#: the engine.Variation field that carries each spread that is a factor on its typical figure
FIELD = {"leakage": "leak", "diode": "diode_is", "quiescent": "iq"}


def varied_parts(study: Study) -> list[str]:
    """Parts that carry a tolerance in this circuit."""
    return list(CIRCUIT_PARTS[study.circuit])


def tolerance_of(study: Study, part: str) -> float:
    return study.parts.capacitor_tolerance if part == "c" else study.parts.resistor_tolerance


def extra_spreads(study: Study, ideal: bool) -> list[str]:
    """The spreads beyond the part values that this study has: 'leakage', 'diode', 'quiescent'."""
    if ideal:
        return []
    out = []
    if study.parts.technology.leakage in WET_LEAKAGE:
        out.append("leakage")
    if study.circuit == "astable-diode" and study.parts.diode_drop_v is None:
        out.append("diode")
    if study.timer.quiescent_max_ratio > 1.0:
        out.append("quiescent")
    if has_load(study):
        out.append("load")
    return out


def has_load(study: Study) -> bool:
    """True when the output drives a load (a [load] resistance or a swept load resistor)."""
    import math
    return (math.isfinite(study.load.resistance_ohm)
            or any(a.key == "load_resistance" for a in study.design + study.conditions))


def _conditions(study: Study, cond: dict[str, np.ndarray]):
    """Temperature and upper threshold [°C, V] of each condition, shaped (1, 1, conditions)."""
    nc = len(next(iter(cond.values()))) if cond else 1
    t = np.broadcast_to(np.asarray(cond.get("temperature", 25.0), dtype=float), (nc,))
    vcc = np.broadcast_to(np.asarray(cond.get("vcc", study.timer.typical_v), dtype=float), (nc,))
    cv = np.broadcast_to(np.asarray(cond.get("control_voltage", np.nan), dtype=float), (nc,))
    v_up = np.where(np.isnan(cv), study.timer.threshold_fraction * vcc, cv)
    return t[None, None, :], v_up[None, None, :]


def _part_extremes(study: Study, part: str, t: np.ndarray, ideal: bool):
    """(low, high) multipliers of a part's value relative to its nominal at each temperature:
    tolerance together with the tempco's other sign or the capacitor's envelope [derived]."""
    tol = tolerance_of(study, part)
    if ideal:
        return np.full_like(t, 1.0 - tol), np.full_like(t, 1.0 + tol)
    if part in RESISTORS:
        a = study.parts.resistor_tempco_per_k
        nominal = 1.0 + a * (t - 25.0)
        swing = abs(a) * np.abs(t - 25.0)
        return (1.0 - tol) * (1.0 - swing) / nominal, (1.0 + tol) * (1.0 + swing) / nominal
    cap = study.parts.technology
    typ = capacitance_temperature_factor(cap, t)
    lo, hi = temperature_envelope(cap, t)
    return (1.0 - tol) * (1.0 + lo) / typ, (1.0 + tol) * (1.0 + hi) / typ


def _bound(study: Study, name: str, v_up: np.ndarray):
    """Bound of an extra spread (a factor over its typical figure; as far below)."""
    if name == "leakage":
        return leakage_spread(study.parts.technology, study.parts.capacitor_voltage_v, v_up)
    if name == "diode":
        return DIODE_IS_SPREAD
    return study.timer.quiescent_max_ratio


@dataclass(frozen=True)
class Corners:
    """The worst case's corners, every spread on an axis of its own: the Variation's arrays have
    shape (1, 2 or 1 per spread, conditions or 1), so an array that does not depend on a spread
    keeps length 1 on that spread's axis. Broadcasting then evaluates each step of the model once
    per combination of the spreads it depends on: the charge of an astable-diode's capacitor,
    say, once per corner of RA, RB (in parallel with the diode), C and the diode rather than once
    per corner of all six spreads.
    Every corner's figures are computed with the same arithmetic as when every corner is evaluated
    in full (tests/test_analysis_corners.py compares both element by element); only the
    repetitions are gone.

    signs: the sign of every spread at every corner (dims x corners), corner k being the C-order
    (row-major) flattening of the spread axes; dims: the spreads' names."""
    variation: Variation
    signs: np.ndarray
    dims: list[str]

    @property
    def count(self) -> int:
        """How many corners there are (2 ** spreads)."""
        return self.signs.shape[1]

    @property
    def axes(self) -> tuple[int, ...]:
        """The shape of the spread axes, every corner written out: 2 per spread (one axis of
        length 1 without any spread)."""
        return (2,) * len(self.dims) or (1,)

    def words(self, study: Study, k: int) -> str:
        """Plain words for corner k, e.g. 'R at +5 %, C at -10 % and its envelope's low edge,
        leakage at its maximum'."""
        out = []
        for name, sign in zip(self.dims, self.signs[:, k]):
            if name in RESISTORS or name == "c":
                tol = tolerance_of(study, name) * 100 * sign
                edge = ("" if name in RESISTORS else
                        f" and the {'low' if sign < 0 else 'high'} edge of its temperature band")
                out.append(f"{name.upper()} at {tol:+g} %{edge}")
            elif name == "leakage":
                out.append("leakage at its maximum" if sign > 0 else "leakage at its least")
            elif name == "load":
                out.append("the load at its " + ("strongest" if sign > 0 else "weakest")
                           + " (resistor, LED and output stage)")
            elif name == "diode":
                out.append(f"diode saturation current {'3x' if sign > 0 else '1/3 of'} typical")
            else:
                out.append(f"quiescent current at its {'maximum' if sign > 0 else 'least'}")
        return ", ".join(out)


def worst_case_corners(study: Study, cond: dict[str, np.ndarray], ideal: bool) -> Corners:
    """Every corner of every spread at every condition (see the module's docstring), each spread
    on an axis of its own (see Corners)."""
    parts = varied_parts(study)
    extras = extra_spreads(study, ideal)
    dims = parts + extras
    signs = (np.array(list(itertools.product((-1.0, 1.0), repeat=len(dims)))).T if dims
             else np.zeros((0, 1)))
    axes = max(len(dims), 1)
    t, v_up = (x.reshape((1,) * (axes + 1) + (-1,)) for x in _conditions(study, cond))

    def sign(i: int) -> np.ndarray:
        """-1 and +1 along spread i's own axis."""
        shape = [1] * (axes + 2)
        shape[1 + i] = 2
        return np.array([-1.0, 1.0]).reshape(shape)
    part = {}
    for i, p in enumerate(parts):
        lo, hi = _part_extremes(study, p, t, ideal)
        part[p] = np.where(sign(i) < 0, lo, hi)
    kw = {}
    if "c" in parts and not ideal:
        # a lower capacitor also has its DC-bias loss at the high end of its spread [derived]
        kw["dc_bias"] = np.where(sign(parts.index("c")) < 0, DC_BIAS_SPREAD, 1.0 / DC_BIAS_SPREAD)
    for j, name in enumerate(extras):
        sg = sign(len(parts) + j)
        if name == "load":        # stronger: lower resistor, lower LED drop, lower stage drop
            tol = study.parts.resistor_tolerance
            kw["load_r"] = np.where(sg > 0, 1.0 - tol, 1.0 + tol)
            if study.load.forward_voltage_v > 0:
                kw["led_vf"] = np.where(sg > 0, -LED_VF_SPREAD_V, LED_VF_SPREAD_V)
            kw["stage"] = np.where(sg > 0, 1.0 / STAGE_SPREAD, STAGE_SPREAD)
            continue
        b = _bound(study, name, v_up)
        kw[FIELD[name]] = np.where(sg > 0, b, 1.0 / b)
    return Corners(Variation(part, **kw), signs, dims)


def draw_names(study: Study, ideal: bool = False) -> list[str]:
    """The Monte Carlo's dimensions beyond the part tolerances and the timer's three terms."""
    names = []
    if not ideal and any(p in RESISTORS for p in varied_parts(study)) and study.parts.resistor_tempco_per_k:
        names.append("tempco")
    if not ideal and "c" in varied_parts(study):
        names += ["envelope", "dc_bias"]
    extras = extra_spreads(study, ideal)
    if "load" in extras:
        extras = [e for e in extras if e != "load"] + ["load_r", "led_vf", "stage"]
    return names + extras


def build_spreads(study: Study, z: dict[str, np.ndarray], builds: slice,
                  cond: dict[str, np.ndarray]) -> tuple[dict[str, np.ndarray], dict]:
    """Each build's draw of the spreads beyond the tolerances: (part multipliers on top of the
    tolerance, Variation keywords). Standard normal z read with the bound as 3 sigma, clipped at
    the bound [cp]."""
    t, v_up = _conditions(study, cond)

    def unit(name):
        return np.clip(z[name][builds] / 3.0, -1.0, 1.0)[None, :, None]
    part: dict[str, np.ndarray] = {}
    if "tempco" in z:
        a = study.parts.resistor_tempco_per_k
        a_b = abs(a) * unit("tempco")          # this build's tempco, either sign [cp]
        m = (1.0 + a_b * (t - 25.0)) / (1.0 + a * (t - 25.0))
        for p in varied_parts(study):
            if p in RESISTORS:
                part[p] = m
    kw = {}
    if "envelope" in z:
        cap = study.parts.technology
        typ = capacitance_temperature_factor(cap, t) - 1.0
        lo, hi = temperature_envelope(cap, t)
        u = unit("envelope")
        part["c"] = 1.0 + np.where(u < 0, u * (typ - lo), u * (hi - typ)) / (1.0 + typ)
        kw["dc_bias"] = DC_BIAS_SPREAD ** unit("dc_bias")
    for name in ("leakage", "diode", "quiescent"):
        if name in z:
            kw[FIELD[name]] = _bound(study, name, v_up) ** unit(name)
    if "load_r" in z:
        kw["load_r"] = 1.0 + study.parts.resistor_tolerance * unit("load_r")
        if study.load.forward_voltage_v > 0:
            kw["led_vf"] = LED_VF_SPREAD_V * unit("led_vf")
        kw["stage"] = STAGE_SPREAD ** unit("stage")
    return part, kw
