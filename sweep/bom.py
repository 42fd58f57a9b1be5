"""The bill of materials of the top designs: every part a board needs, not only the timing parts.

Per design: the timing resistors and capacitor, the diode of astable-diode, the transistor that
empties the capacitor of the missing-pulse detector, the load resistor
(and the LED, or a flyback diode across a coil), the decoupling capacitors (100 nF across the
supply at the timer, 10 nF from the control pin to ground [cp]) and the timer itself. Each part
has its value, IEC 60062 RKM code, IEC 60063 series, tolerance, technology, a rating with its
margin over the worst figure the sweep found, a quantity and its role. Ratings follow the
common practice of at least twice the worst voltage or power [cp].
"""
from __future__ import annotations

import numpy as np
import pandas as pd

from . import values as qv
from .physics import REGISTRY, TIMING_PARTS
from .variables import REFS
from .study import Study

#: the columns of bom.csv, in order
BOM_COLUMNS = ["design", "role", "reference", "value", "rkm", "series", "tolerance", "technology",
               "rating", "quantity"]
#: what the workbook's Parts sheet carries per row (BOM plus rank, verdict and the SI value)
PARTS_COLUMNS = ["rank", "design", "verdict", "ref", "value", "unit", "value_text", "rkm", "series",
                 "tolerance", "technology", "rating", "note", "role", "quantity"]
DERATE = 2.0                 # rate parts for at least twice the worst stress [cp]
#: common resistor power ratings [W] and capacitor voltage ratings [V] [cp]
POWER_RATINGS = (0.063, 0.1, 0.125, 0.25, 0.5, 1.0, 2.0, 3.0, 5.0)
VOLTAGE_RATINGS = (6.3, 10.0, 16.0, 25.0, 35.0, 50.0, 63.0, 100.0)
DECOUPLING_SUPPLY_F = 100e-9     # across the supply pins, as close as possible [cp]
DECOUPLING_CONTROL_F = 10e-9     # control pin to ground, against noise on the thresholds [cp]


def next_rating(need: float, ratings: tuple[float, ...]) -> float:
    """The smallest common rating at least `need`, or the largest there is."""
    for r in ratings:
        if r >= need:
            return r
    return ratings[-1]


def _pct(x: float) -> str:
    return f"{x * 100:.0f} %" if np.isfinite(x) else "-"


def bill_of_materials(study: Study, designs: pd.DataFrame, worst: dict[str, np.ndarray]) -> pd.DataFrame:
    """Every part of the top designs (study.top, in rank order), one row per part, with the
    columns PARTS_COLUMNS; worst: their worst figures over the conditions (sweep.pick)."""
    top = designs.head(study.top)
    if top.empty:
        return pd.DataFrame(columns=PARTS_COLUMNS)
    from .grades import study_for
    timer, load = study.timer, study.load
    vcc_axis = next((a for a in study.axes if a.key == "vcc"), None)
    vcc_max = float(np.max(vcc_axis.values)) if vcc_axis is not None else timer.typical_v
    forced_cv = any(a.key == "control_voltage" for a in study.axes)
    rows = []
    for i, (_, d) in enumerate(top.iterrows()):
        own = study_for(study, int(d["design"]))          # its part grade's parts, if graded
        p = own.parts
        tech = p.technology
        base = {"rank": int(d["rank"]), "design": int(d["design"]), "verdict": d.get("verdict", "")}

        def add(role, ref, value, unit, technology, rating, tolerance=np.nan, note=""):
            numeric = unit in ("ohm", "F")
            rows.append({**base, "ref": ref, "value": value if numeric else np.nan,
                         "unit": {"ohm": "Ω", "F": "F"}.get(unit, ""),
                         "value_text": qv.format_eng(value, unit) if numeric else value,
                         "rkm": qv.rkm_code(value, unit) if numeric else "",
                         "series": (qv.series_of(value) or "-") if numeric else "",
                         "tolerance": tolerance, "technology": technology, "rating": rating,
                         "note": note, "role": role, "quantity": 1})

        def resistor_rating(need_w):
            rated = p.resistor_power_w
            margin = need_w / rated if rated > 0 else np.nan
            ok = "" if need_w * DERATE <= rated else f"; rate it at least {next_rating(need_w * DERATE, POWER_RATINGS):g} W"
            return f"{rated:g} W (worst {qv.format_eng(need_w, 'W')}, {_pct(margin)} of rating{ok})"

        # timing parts [book: the circuit's topology]
        for a in study.design:
            if a.key not in TIMING_PARTS:
                continue
            v = float(d[a.column])
            if a.key == "c":
                rated = p.capacitor_voltage_v
                warn = "" if vcc_max * DERATE <= rated or not tech.polarised else \
                    "; a polarised capacitor leaks far less worked well below its rating [cp]"
                add("timing", "C", v, "F", tech.label,
                    f"{rated:g} V (supply up to {vcc_max:g} V, {_pct(vcc_max / rated)} of rating{warn})",
                    p.capacitor_tolerance, _note(own, a.key, v))
            else:
                # RA (or R) carries the worst dissipation the model reports; RB at most VCC^2/RB
                need = worst["ra_power_w"][i] if a.key in ("ra", "r") else vcc_max ** 2 / v
                add("timing", REFS[a.key], v, "ohm",
                    f"resistor, {p.resistor_tempco_per_k * 1e6:g} ppm/K", resistor_rating(need),
                    p.resistor_tolerance, _note(own, a.key, v))
        extras = REGISTRY[study.circuit].bom_extra
        if "diode" in extras:
            kind = ("fixed drop " + f"{p.diode_drop_v:g} V" if p.diode_drop_v is not None
                    else "Schottky" if p.diode == "schottky" else "small-signal silicon")
            v_rev = next_rating(vcc_max * DERATE, VOLTAGE_RATINGS)
            add("diode", "D1", f"{kind} diode", "", f"{kind} diode across RB (anode at the "
                "discharge pin)", f"reverse voltage at least {v_rev:g} V (supply up to {vcc_max:g} V)")
        if "discharge-transistor" in extras:
            # the transistor across C that each input pulse turns on to empty it [book]
            add("discharge", "Q1", "small-signal PNP transistor", "", "emitter to C, collector to "
                "ground, base driven by the input pulse (with the trigger pin)",
                f"collector-emitter voltage at least {next_rating(vcc_max * DERATE, VOLTAGE_RATINGS):g} V "
                f"(supply up to {vcc_max:g} V)")
        i_load = float(worst["output_current_a"][i])
        r_load = float(d["load_resistance_ohm"]) if "load_resistance_ohm" in d else load.resistance_ohm
        coil = load.kind in ("relay", "inductive", "mains-switching")
        if np.isfinite(r_load) and coil:
            add("load", "K1", f"coil of {qv.format_eng(r_load, 'ohm')}", "", "relay or coil (the load)",
                f"coil for a {vcc_max:g} V supply, carrying {qv.format_eng(i_load, 'A')}")
            add("protection", "D2", "flyback diode", "", "general-purpose silicon diode across "
                "the coil, cathode to the positive end [cp]",
                f"reverse voltage at least {next_rating(vcc_max * DERATE, VOLTAGE_RATINGS):g} V, "
                f"forward current at least {qv.format_eng(i_load, 'A')}")
        elif np.isfinite(r_load):
            need = i_load ** 2 * r_load
            rated = next_rating(max(need * DERATE, POWER_RATINGS[0]), POWER_RATINGS)
            tol = (qv.SERIES_TOLERANCE.get(_series_of_axis(study, "load_resistance") or "", 0.05))
            add("load", "RL", r_load, "ohm", "resistor" + (", in series with the LED" if load.kind == "led" else ""),
                f"{rated:g} W (worst {qv.format_eng(need, 'W')}, {_pct(need / rated)} of rating)", tol)
            if load.kind == "led":
                add("load", "LED1", f"LED, forward voltage {load.forward_voltage_v:g} V", "", "LED",
                    f"forward current at least {qv.format_eng(i_load * DERATE, 'A')} "
                    f"(worst {qv.format_eng(i_load, 'A')})")
        v_dec = next_rating(vcc_max * DERATE, VOLTAGE_RATINGS)
        add("decoupling", "CS", DECOUPLING_SUPPLY_F, "F", "X7R ceramic (class II), at the timer's "
            "supply pins [cp]", f"{v_dec:g} V (supply up to {vcc_max:g} V)", 0.10)
        if not forced_cv:
            add("decoupling", "CV", DECOUPLING_CONTROL_F, "F", "X7R ceramic (class II), control "
                "pin to ground [cp]", f"{v_dec:g} V (the pin sits at 2/3 of the supply)", 0.10)
        add("timer", "U1", timer.name, "", f"{timer.name}, 8 pins",
            f"supply {timer.min_v:g} V to {timer.max_v:g} V, absolute maximum {timer.abs_max_v:g} V "
            f"(supply up to {vcc_max:g} V)")
    return pd.DataFrame(rows, columns=PARTS_COLUMNS)


def _series_of_axis(study: Study, key: str) -> str | None:
    return next((a.series for a in study.design if a.key == key and a.series), None)


def _note(study: Study, key: str, value: float) -> str:
    """The uncommon-part note of one timing part, or ""."""
    from .analysis import uncommon_parts
    from .variables import AXES
    return str(uncommon_parts(study, pd.DataFrame({AXES[key][0]: [value]}))[0])


def bom_table(parts: pd.DataFrame) -> pd.DataFrame:
    """The bill of materials as bom.csv carries it: BOM_COLUMNS, tolerance as text."""
    tol = pd.to_numeric(parts["tolerance"], errors="coerce")
    return pd.DataFrame({
        "design": parts["design"].astype(int), "role": parts["role"], "reference": parts["ref"],
        "value": parts["value_text"], "rkm": parts["rkm"], "series": parts["series"],
        "tolerance": [f"{t * 100:g}%" if np.isfinite(t) else "" for t in tol],
        "technology": parts["technology"], "rating": parts["rating"],
        "quantity": parts["quantity"].astype(int)}, columns=BOM_COLUMNS)
