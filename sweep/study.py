"""Study files: TOML (or a workbook's Study sheet) -> one frozen, validated Study.

This is the only module that reads raw study text. Everything after it sees typed objects and
numpy arrays in SI units. Every problem raises InputError naming the file, the key and what is
wrong (and the line, where the file gives one).
"""
from __future__ import annotations

import difflib
import hashlib
import json
import math
import re
import tomllib
from dataclasses import dataclass, field, replace
from pathlib import Path

import numpy as np

from . import values as qv
from .errors import InputError
from .files import MAX_TEXT, read_bytes_limited
from .models import load_timer
from .physics import (CAPACITORS, CIRCUITS, REGISTRY, TIMING_PARTS, Load, Parts, TimerModel,
                      capacitor_named)
from .physics.parts import DIODES, CAPACITOR_ALIASES
from .case import Axis, Case, SpecLimit
from .tomltext import check_toml_text, toml_inline
from .variables import AXES, VARIABLES

#: [spec] keys and the output column each limits (its unit is the column's)
SPEC_COLUMNS = {"frequency": "frequency_hz", "duty": "duty", "pulse_width": "pulse_width_s",
                "supply_current": "supply_current_a", "idle_current": "idle_current_a",
                "output_current": "output_current_a", "power": "power_w",
                "load_current": "output_current_a", "battery_life": "battery_life_h",
                "timeout": "timeout_s"}
_SPEC_MEANING = {"load_current": "the current through the load (an LED's brightness)",
                 "battery_life": "hours, or days with d: { min = \"30d\" }",
                 "timeout": "missing-pulse detector: time from the last pulse to the alarm"}

# ---- the schema: section -> key -> (unit for parse_quantity, what it is) ----
SCHEMA: dict[str, dict[str, tuple[str, str]]] = {
    "study": {"title": ("text", "title shown on every output"),
              "circuit": ("text", " | ".join(CIRCUITS)),
              "timer": ("text", "bipolar | cmos | path to a timer-model TOML file"),
              "notes": ("text", "free text, copied to the workbook"),
              "supply": ("text", "regulated | battery | mains-derived: what powers the circuit "
                                 "(sets the cautions)"),
              "battery_capacity": ("Ah", "rated battery capacity, e.g. \"220mAh\": adds battery life"),
              "battery_usable": ("%", "share of the rated capacity the circuit can use, default 100 %")},
    "design": {**{k: (u, "a range of choices") for k, (_, u) in AXES.items()},
               "resistor_tolerance": ("%", "grades to compare, e.g. [\"1%\", \"5%\"]"),
               "resistor_series": ("text", "series of the timing resistors to compare, e.g. "
                                           "[\"E12\", \"E96\"]"),
               "capacitor": ("text", "capacitor technologies to compare, e.g. [\"C0G\", \"X7R\"]"),
               "capacitor_tolerance": ("%", "grades to compare, e.g. [\"5%\", \"10%\"]")},
    "conditions": {k: (u, "a range every design must survive") for k, (_, u) in AXES.items()},
    "parts": {"resistor_tolerance": ("%", "default: implied by the resistor series, else 5 %"),
              "resistor_tempco": ("ppm/K", "default 100 ppm/K"),
              "resistor_power": ("W", "rating of each timing resistor, default 0.25 W"),
              "capacitor": ("text", " | ".join(CAPACITORS)),
              "capacitor_tolerance": ("%", "default: implied by the capacitor series, else 10 %"),
              "capacitor_voltage": ("V", "rated voltage, default 50 V"),
              "stray_capacitance": ("F", "added to C, default 5 pF"),
              "diode": ("text", "silicon | schottky: the diode of astable-diode, a Shockley "
                                "device (default silicon)"),
              "diode_saturation_current": ("A", "the diode's saturation current at 25 °C"),
              "diode_ideality": ("", "the diode's ideality factor"),
              "diode_drop": ("V", "a fixed forward drop instead of the Shockley diode"),
              "dc_bias_loss": ("", "fractional capacitance loss at rated voltage (class II ceramics)"),
              "discharge_resistor": ("ohm", "monostable: a resistor between the discharge pin and "
                                            "C that limits the capacitor's dump, default none")},
    "load": {"resistance": ("ohm", "load on the output; absent: no load"),
             "to": ("text", "ground (output sources current) | supply (output sinks it)"),
             "forward_voltage": ("V", "drop of an LED or diode in series with the load"),
             "kind": ("text", "resistive | led | relay | inductive | mains-switching (sets the cautions)")},
    "spec": {**{k: (VARIABLES[col].unit, _SPEC_MEANING.get(k, "")) for k, col in SPEC_COLUMNS.items()},
             "yield": ("%", "{ min = 0.99 }: the pick is the lowest-current design whose yield "
                            "interval reaches it")},
    "analysis": {"monte_carlo": ("int", "builds per design, default 1000"),
                 "seed": ("int", "random seed, default 1"),
                 "distribution": ("text", "normal (tolerance = 3 sigma) | uniform"),
                 "typical_sigma": ("", "sigmas in a datasheet's typical spread, default 1"),
                 "top": ("int", "designs detailed in the parts list and checks, default 10")},
}
#: [spec] keys only some circuits have, and which (from the circuit registry)
SPEC_CIRCUITS = {k: tuple(n for n, c in REGISTRY.items() if k in c.spec_keys)
                 for k in dict.fromkeys(k for c in REGISTRY.values() for k in c.spec_keys)}
SUPPLIES = ("regulated", "battery", "mains-derived")
LOAD_KINDS = ("resistive", "led", "relay", "inductive", "mains-switching")
RANGE_KEYS = ("min", "max", "steps", "per_decade", "series", "values", "nominal", "from_spec")
MAX_STEPS = 100_000
MAX_POINTS_PER_AXIS = 100_000


@dataclass(frozen=True)
class Study:
    path: str
    name: str
    title: str
    notes: str
    circuit: str
    supply: str
    timer_spec: str
    timer: TimerModel
    design: tuple[Axis, ...]
    conditions: tuple[Axis, ...]
    parts: Parts
    load: Load
    spec: tuple[SpecLimit, ...]
    monte_carlo: int
    seed: int
    distribution: str
    top: int
    raw: dict = field(repr=False, compare=False)
    typical_sigma: float = 1.0           # a typical timer spread is this many sigma
    yield_min: float | None = None       # [spec] yield = { min = ... }
    battery_capacity_ah: float | None = None   # [study] battery_capacity [A h]
    battery_usable: float = 1.0          # [study] battery_usable, a fraction
    grade_plan: tuple = ()               # part grades as design axes (sweep.grades), else ()
    case: Case = field(init=False, repr=False, compare=False)

    def __post_init__(self):
        # the engine's view of the study, built once: no text, no axes
        nominal = {a.key: float(a.nominal) for a in self.conditions}
        case = Case(circuit=self.circuit, timer=self.timer, parts=self.parts, load=self.load,
                    spec=self.spec, nominal=nominal, battery_capacity_ah=self.battery_capacity_ah,
                    battery_usable=self.battery_usable,
                    grades=tuple(g.study.case for g in self.grade_plan), points=self.n_points)
        object.__setattr__(self, "case", case)

    @property
    def axes(self) -> tuple[Axis, ...]:
        return self.design + self.conditions

    @property
    def n_designs(self) -> int:
        if self.grade_plan:
            return sum(g.n_designs for g in self.grade_plan)
        return math.prod(len(a.values) for a in self.design)      # exact: no int64 overflow

    @property
    def n_conditions(self) -> int:
        return math.prod(len(a.values) for a in self.conditions)

    @property
    def n_points(self) -> int:
        return self.n_designs * self.n_conditions

    @property
    def digest(self) -> str:
        """sha256 of the study's meaning: the parsed keys and the timer model's figures."""
        blob = json.dumps({"study": self.raw, "timer": self.timer.__dict__}, sort_keys=True,
                          default=str)
        return hashlib.sha256(blob.encode()).hexdigest()


# ------------------------------------------------------------------ reading

def load_study(path: str | Path) -> Study:
    """Read a study from a TOML file or from the Study sheet of a timer-sweep workbook."""
    p = Path(path)
    fname = str(path)
    if p.suffix.lower() in (".xlsx", ".xlsm"):
        from .workbook_input import read_study_sheet
        text, sheet_rows = read_study_sheet(p)
        try:
            return parse_study(text, fname, base_dir=p.parent)
        except InputError as e:
            if e.file != fname:
                raise
            row = sheet_rows.get(e.line) if e.line else None
            where = f"{fname}, sheet Study" + (f", row {row}" if row else "")
            raise InputError(where, e.key, e.problem) from None
    else:
        raw_bytes = read_bytes_limited(p, MAX_TEXT, "a study file")
        if not raw_bytes.strip():
            raise InputError(fname, "", "the file is empty: a study needs at least [study] circuit")
        if b"\x00" in raw_bytes:
            raise InputError(fname, "", "a binary file, not a TOML study")
        try:
            text = raw_bytes.decode("utf-8")
        except UnicodeDecodeError as e:
            raise InputError(fname, "", f"not UTF-8 text (byte {e.start})") from None
    return parse_study(text, fname, base_dir=p.parent)


def parse_study(text: str, fname: str = "<study>", base_dir: Path | None = None) -> Study:
    check_toml_text(text, fname)
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as e:
        m = re.search(r"line (\d+)", str(e))
        raise InputError(fname, "", f"not valid TOML: {e}", int(m.group(1)) if m else None) from None
    return _Parser(data, text, fname, base_dir).study()


class _Parser:
    def __init__(self, data: dict, text: str, fname: str, base_dir: Path | None):
        self.data, self.text, self.fname, self.base_dir = data, text, fname, base_dir

    # -- errors with line numbers
    def line_of(self, section: str, key: str = "") -> int | None:
        lines = self.text.splitlines()
        start = None
        for i, ln in enumerate(lines):
            if re.match(rf"^\s*\[\s*{re.escape(section)}\s*\]", ln):
                start = i
                if not key:
                    return i + 1
                continue
            if start is not None and re.match(r"^\s*\[", ln):
                start = None
            if start is not None and re.match(rf"^\s*{re.escape(key)}\s*=", ln):
                return i + 1
        return None

    def fail(self, section: str, key: str, problem: str):
        dotted = f"{section}.{key}" if key else section
        raise InputError(self.fname, dotted, problem, self.line_of(section, key.split(".")[0]))

    def quantity(self, section, key, value, unit, allow_negative=False) -> float:
        if unit == "int":
            if isinstance(value, bool) or not isinstance(value, int):
                self.fail(section, key, f"must be a whole number, got {qv.clip(repr(value))}")
            return value
        if unit in ("Ah", "h"):
            return self.charge_or_hours(section, key, value, unit)
        try:
            x = qv.parse_quantity(value, unit, allow_negative=allow_negative)
        except ValueError as e:
            self.fail(section, key, str(e))
        if not math.isfinite(x):
            self.fail(section, key, "must be finite")
        return x

    def charge_or_hours(self, section, key, value, unit) -> float:
        """A battery capacity in A h ("220mAh", "2.4Ah", a plain number in A h) or a duration in
        hours ("720h", "30d", a plain number in hours)."""
        words = {"Ah": ("a capacity such as \"220mAh\" or \"2.4Ah\"", {"Ah": 1.0}),
                 "h": ("a time in hours or days such as \"720h\" or \"30d\"", {"h": 1.0, "d": 24.0})}
        what, units = words[unit]
        if isinstance(value, bool) or not isinstance(value, (int, float, str)):
            self.fail(section, key, f"must be {what}")
        if isinstance(value, (int, float)):
            x = float(value)
        else:
            m = re.fullmatch(r"\s*([0-9]*\.?[0-9]+(?:[eE][+-]?[0-9]+)?)\s*([munkµ]?)\s*(Ah|h|d)\s*",
                             value[:qv.MAX_TEXT + 1])
            if m is None or m.group(3) not in units or (unit == "h" and m.group(2)):
                self.fail(section, key, f"{qv.clip(repr(value))}: expected {what}")
            scale = {"": 1.0, "m": 1e-3, "µ": 1e-6, "u": 1e-6, "n": 1e-9, "k": 1e3}[m.group(2)]
            x = float(m.group(1)) * scale * units[m.group(3)]
        if not math.isfinite(x) or x <= 0:
            self.fail(section, key, f"must be {what}, greater than zero")
        return x

    # -- the whole study
    def study(self) -> Study:
        d = self.data
        for section in d:
            if section not in SCHEMA:
                hint = difflib.get_close_matches(section, SCHEMA, 1)
                self.fail(section, "", "unknown section" + (f"; did you mean [{hint[0]}]?" if hint else
                                                            f"; known: {', '.join(SCHEMA)}"))
            if not isinstance(d[section], dict):
                self.fail(section, "", "must be a table ([section] followed by keys)")
            for key in d[section]:
                if key not in SCHEMA[section]:
                    hint = difflib.get_close_matches(key, SCHEMA[section], 1)
                    self.fail(section, key, "unknown key" + (f"; did you mean '{hint[0]}'?" if hint
                                                             else f"; known: {', '.join(SCHEMA[section])}"))
        st = d.get("study", {})
        for key in ("title", "circuit", "timer", "notes", "supply"):
            if key in st and not isinstance(st[key], str):
                self.fail("study", key, "must be a string in quotes")
        circuit = st.get("circuit")
        if circuit is None:
            self.fail("study", "circuit", f"missing: say which circuit ({' | '.join(CIRCUITS)})")
        if circuit not in CIRCUITS:
            hint = difflib.get_close_matches(circuit, CIRCUITS, 1)
            self.fail("study", "circuit", f"unknown circuit {circuit!r}"
                      + (f"; did you mean '{hint[0]}'?" if hint else f"; known: {', '.join(CIRCUITS)}"))
        supply = st.get("supply", "battery" if "battery_capacity" in st else "regulated")
        if supply not in SUPPLIES:
            self.fail("study", "supply", f"unknown supply {supply!r}; known: {', '.join(SUPPLIES)}")
        timer_spec = st.get("timer", "bipolar")
        try:
            timer = load_timer(timer_spec, self.base_dir, self.fname)
        except InputError as e:
            if e.file == self.fname and e.line is None:
                e = InputError(e.file, e.key, e.problem, self.line_of("study", "timer"))
            raise e from None
        name = _slug(Path(self.fname).stem) if self.fname and not self.fname.startswith("<") else "study"
        title = st.get("title") or name

        design = self.axes("design", circuit, self.from_spec(circuit, timer))
        conditions = self.axes("conditions", circuit)
        both = set(a.key for a in design) & set(a.key for a in conditions)
        if both:
            k = sorted(both)[0]
            self.fail("conditions", k, f"'{k}' is in both [design] and [conditions]: it is either a "
                      "choice or something to survive, not both")
        given = {a.key for a in design + conditions}
        needed = REGISTRY[circuit].parts
        for k in needed:
            if k not in given:
                self.fail("design", k, f"missing: circuit {circuit} needs {', '.join(needed)}")
        self.circuit_conditions(circuit, design, given)
        for k in TIMING_PARTS:
            if k in given and k not in needed:
                sec = "design" if k in {a.key for a in design} else "conditions"
                self.fail(sec, k, f"not used by circuit {circuit} (it uses "
                          f"{', '.join(needed) or 'no timing parts'})")
        # defaults: the timer's typical supply and 25 °C, as single conditions [the study-file contract in README.md]
        if "vcc" not in given:
            conditions = conditions + (Axis("vcc", "vcc_v", np.array([timer.typical_v]), "condition",
                                            nominal=timer.typical_v),)
        if "temperature" not in given:
            conditions = conditions + (Axis("temperature", "temperature_c", np.array([25.0]),
                                            "condition", nominal=25.0),)
        parts = self.parts(design + conditions)
        load = self.load(swept="load_resistance" in given)
        spec = self.spec(circuit)
        an = d.get("analysis", {})
        mc = self.quantity("analysis", "monte_carlo", an.get("monte_carlo", 1000), "int")
        if not 0 <= mc <= 1_000_000:
            self.fail("analysis", "monte_carlo", "must be between 0 and 1 000 000 builds")
        seed = self.quantity("analysis", "seed", an.get("seed", 1), "int")
        if seed < 0:
            self.fail("analysis", "seed", "must not be negative")
        dist = an.get("distribution", "normal")
        if dist not in ("normal", "uniform"):
            self.fail("analysis", "distribution", f"must be 'normal' or 'uniform', got {dist!r}")
        top = self.quantity("analysis", "top", an.get("top", 10), "int")
        if not 1 <= top <= 1000:
            self.fail("analysis", "top", "must be between 1 and 1000")
        ts = self.quantity("analysis", "typical_sigma", an.get("typical_sigma", 1.0), "")
        if not 0.5 <= ts <= 6.0:
            self.fail("analysis", "typical_sigma", "must be between 0.5 and 6 (how many sigma a "
                      "datasheet's typical spread is; 1 reads it as one sigma)")
        base = Study(path=self.fname, name=name, title=title, notes=st.get("notes", ""),
                     circuit=circuit, supply=supply, timer_spec=timer_spec, timer=timer, design=design,
                     conditions=conditions, parts=parts, load=load, spec=spec, monte_carlo=mc,
                     seed=seed, distribution=dist, top=top, raw=d, typical_sigma=float(ts),
                     yield_min=self.yield_spec(), **self.battery(st))
        from .grades import build_plan, grade_axis, parse_grades
        grades = parse_grades(d.get("design", {}), lambda k, why: self.fail("design", k, why))
        if not grades:
            return base
        plan = build_plan(base, grades, d.get("parts", {}), lambda k, why: self.fail("design", k, why))
        return replace(base, design=plan[0].study.design + (grade_axis(plan),), grade_plan=plan)

    def battery(self, st: dict) -> dict:
        """[study] battery_capacity and battery_usable, and the spec key that needs them."""
        if "battery_usable" in st and "battery_capacity" not in st:
            self.fail("study", "battery_usable", "needs battery_capacity beside it")
        if "battery_capacity" not in st:
            if "battery_life" in self.data.get("spec", {}):
                self.fail("spec", "battery_life", "needs [study] battery_capacity, e.g. \"220mAh\"")
            return {}
        cap = self.quantity("study", "battery_capacity", st["battery_capacity"], "Ah")
        usable = self.quantity("study", "battery_usable", st.get("battery_usable", 1.0), "%")
        if not 0 < usable <= 1:
            self.fail("study", "battery_usable", "must lie above 0 and at most 100 %")
        return {"battery_capacity_ah": cap, "battery_usable": usable}

    # -- ranges
    def from_spec(self, circuit: str, timer: TimerModel) -> dict[str, tuple[np.ndarray, str]]:
        """[design] entries written { from_spec = true, series = "E6" }: the closed forms inverted
        for the [spec] target (sweep.design_ranges). The timing keys given that way, and those
        left out of [design] altogether, get the proposed values; explicit ranges stay."""
        from .design_ranges import Target, propose
        marked = {k: v for k, v in self.data.get("design", {}).items()
                  if isinstance(v, dict) and "from_spec" in v}
        if not marked:
            return {}
        for k, v in marked.items():
            if v["from_spec"] is not True:
                self.fail("design", f"{k}.from_spec", "must be true (or leave the key out)")
            if k not in ("ra", "rb", "r", "c"):
                self.fail("design", f"{k}.from_spec", "only the timing parts ra, rb, r and c are "
                          "worked out from the spec")
            extra = set(v) - {"from_spec", "series"}
            if extra:
                self.fail("design", f"{k}.{sorted(extra)[0]}", "from_spec takes only a series "
                          "beside it")
            if "series" in v and (not isinstance(v["series"], str)
                                  or v["series"].strip().upper() not in qv.SERIES):
                self.fail("design", f"{k}.series", f"unknown series; known: {', '.join(qv.SERIES)}")
        key0 = sorted(marked)[0]
        from .design_ranges import INVERTIBLE
        if circuit not in INVERTIBLE:
            self.fail("design", f"{key0}.from_spec", f"circuit {circuit} has no timing to aim at")
        spec = {s.key: s for s in self.spec(circuit)}
        main = REGISTRY[circuit].spec_keys[0]
        if main not in spec or not (math.isfinite(spec[main].lo) and math.isfinite(spec[main].hi)):
            self.fail("design", f"{key0}.from_spec", f"needs [spec] {main} with a target and "
                      "tolerance (or a min and a max) to aim at")
        lo, hi = spec[main].lo, spec[main].hi
        aim = spec[main].target or math.sqrt(lo * hi)
        tol = max(hi / aim - 1.0, 1.0 - lo / aim)
        duty = spec.get("duty")
        d_lo = duty.lo if duty is not None and duty.lo > 0 else None
        d_hi = duty.hi if duty is not None and duty.hi < 1 else None
        target = Target(aim if main == "frequency" else None, d_lo, d_hi,
                        aim if main == "pulse_width" else None, tol)
        cond = {a.key: a for a in self.axes("conditions", circuit)}
        vcc = cond["vcc"].values if "vcc" in cond else np.array([timer.typical_v])
        temp = cond["temperature"].values if "temperature" in cond else np.array([25.0])
        p = self.data.get("parts", {})
        try:
            tech = capacitor_named(p.get("capacitor", Parts.capacitor))
        except (KeyError, TypeError):
            tech = capacitor_named(Parts.capacitor)      # parts() words the error later
        v_rated = Parts.capacitor_voltage_v
        if "capacitor_voltage" in p:
            v_rated = self.quantity("parts", "capacitor_voltage", p["capacitor_voltage"], "V")
        diode = p.get("diode", "silicon") if isinstance(p.get("diode"), str) else "silicon"
        series = {k: str(v.get("series", "E6" if k == "c" else "E24")).strip().upper()
                  for k, v in marked.items()}
        r_series = next((series[k] for k in ("ra", "rb", "r") if k in series), "E24")
        try:
            prop = propose(circuit, target, timer, tech, vcc=(float(vcc.min()), float(vcc.max())),
                           temperature=(float(temp.min()), float(temp.max())), r_series=r_series,
                           c_series=series.get("c", "E6"), capacitor_voltage_v=v_rated,
                           diode=diode)
        except ValueError as e:
            self.fail("design", f"{key0}.from_spec", str(e))
        given = self.data.get("design", {})
        return {k: (prop.values[k], prop.series[k]) for k in prop.values
                if k in marked or k not in given}

    def circuit_conditions(self, circuit: str, design, given: set) -> None:
        """The [conditions] keys a circuit needs are given, and none that only other circuits
        have."""
        own = REGISTRY[circuit].conditions
        for k in own:
            if k not in given:
                self.fail("conditions", k, f"missing: circuit {circuit} needs {k} "
                          f"({VARIABLES[AXES[k][0]].description.lower()}), e.g. {k} = "
                          "{ min = \"0.8\", max = \"1.2\", steps = 3 }")
        for k in dict.fromkeys(k for c in REGISTRY.values() for k in c.conditions):
            if k in given and k not in own:
                users = [n for n, c in REGISTRY.items() if k in c.conditions]
                sec = "design" if k in {a.key for a in design} else "conditions"
                self.fail(sec, k, f"only the {', '.join(users)} circuit takes {k} "
                          f"({VARIABLES[AXES[k][0]].description.lower()})")

    def axes(self, section: str, circuit: str,
             proposed: dict[str, tuple[np.ndarray, str]] | None = None) -> tuple[Axis, ...]:
        out = []
        role = "design" if section == "design" else "condition"
        items = dict(self.data.get(section, {}))
        for k in (proposed or {}):
            items.setdefault(k, None)
        for key, value in items.items():
            if key not in AXES:          # a part grade (sweep.grades), not a value axis
                continue
            column, unit = AXES[key]
            if proposed and key in proposed:
                vals, series = proposed[key]
                out.append(Axis(key, column, vals, role, series, None))
                continue
            vals, series, nominal = self.range_values(section, key, value, unit)
            if key != "temperature" and np.any(vals <= 0):
                self.fail(section, key, "every value must be greater than zero")
            if key == "temperature" and np.any(vals < -273.15):
                self.fail(section, key, "below absolute zero")
            if key == "temperature" and np.any(np.abs(vals) > 1000):
                self.fail(section, key, "a temperature beyond +-1000 °C is not a timer's world")
            if key == "c" and np.any(vals >= 1.0):
                self.fail(section, key, f"{qv.format_eng(vals.max(), 'F')}: timer-sweep models timing "
                          "capacitors below 1 F (for microfarads write e.g. \"1u\")")
            if nominal is not None and role == "design":
                self.fail(section, f"{key}.nominal", "a nominal value belongs to [conditions]")
            if role == "condition":
                if nominal is None:
                    nominal = 25.0 if key == "temperature" else float(
                        0.5 * (vals.min() + vals.max()))
                elif not vals.min() <= nominal <= vals.max():
                    self.fail(section, f"{key}.nominal", "must lie within the range")
            out.append(Axis(key, column, vals, role, series, nominal))
        return tuple(out)

    def numbers(self, section, key, items: list, unit: str, neg: bool) -> np.ndarray:
        """A list's values in SI units: plain numbers checked as one array, text one by one."""
        if all(type(v) in (int, float) for v in items):
            vals = np.asarray(items, dtype=float)
            bad = ~np.isfinite(vals) | ((vals < 0) if not neg else False)
            if bad.any():                        # let the one parser word the message
                self.quantity(section, key, items[int(np.argmax(bad))], unit, neg)
            return vals + 0.0
        return np.array([self.quantity(section, key, v, unit, neg) for v in items])

    def range_values(self, section, key, value, unit):
        neg = key == "temperature"
        if isinstance(value, list):
            if not value:
                self.fail(section, key, "empty list")
            if len(value) > MAX_POINTS_PER_AXIS:
                self.fail(section, key, f"a list of {len(value):,} values: too many for one axis "
                          f"(limit {MAX_POINTS_PER_AXIS:,})")
            vals = self.numbers(section, key, value, unit, neg)
            if len(np.unique(vals)) != len(vals):
                self.fail(section, key, "the list repeats a value")
            return vals, None, None
        if not isinstance(value, dict):
            return np.array([self.quantity(section, key, value, unit, neg)]), None, None
        for k in value:
            if k not in RANGE_KEYS:
                hint = difflib.get_close_matches(k, RANGE_KEYS, 1)
                self.fail(section, f"{key}.{k}", "unknown range key" +
                          (f"; did you mean '{hint[0]}'?" if hint else
                           "; use min/max with steps, per_decade or series, or values"))
        nominal = (self.quantity(section, f"{key}.nominal", value["nominal"], unit, neg)
                   if "nominal" in value else None)
        kinds = [k for k in ("steps", "per_decade", "series", "values") if k in value]
        if len(kinds) > 1:
            self.fail(section, key, f"give only one of steps, per_decade, series, values (got {', '.join(kinds)})")
        if kinds == ["values"]:
            if "min" in value or "max" in value:
                self.fail(section, key, "'values' takes no min or max")
            v, _, _ = self.range_values(section, key, value["values"], unit)
            return v, None, nominal
        if not kinds:
            if set(value) <= {"nominal"}:
                self.fail(section, key, "a range needs min and max with steps, per_decade or series")
            self.fail(section, key, "a range needs steps (linear), per_decade (logarithmic) or "
                      "series (E3..E192) beside min and max")
        for b in ("min", "max"):
            if b not in value:
                self.fail(section, key, f"missing '{b}'")
        lo = self.quantity(section, f"{key}.min", value["min"], unit, neg)
        hi = self.quantity(section, f"{key}.max", value["max"], unit, neg)
        if lo > hi:
            self.fail(section, key, f"min ({value['min']}) is greater than max ({value['max']})")
        kind = kinds[0]
        if kind == "steps":
            n = value["steps"]
            if isinstance(n, bool) or not isinstance(n, int) or not 1 <= n <= MAX_STEPS:
                self.fail(section, f"{key}.steps", f"must be a whole number from 1 to {MAX_STEPS}")
            if n > 1 and lo == hi:
                self.fail(section, key, "min equals max: use a single value or steps = 1")
            if n == 1 and lo != hi:
                self.fail(section, f"{key}.steps", f"steps = 1 gives one value, but min ({value['min']}) "
                          f"and max ({value['max']}) differ: use steps = 2 or more, or a single value")
            vals = np.linspace(lo, hi, n) if n > 1 else np.array([lo])
            return vals, None, nominal
        if kind == "per_decade":
            n = value["per_decade"]
            if isinstance(n, bool) or not isinstance(n, int) or not 1 <= n <= 1000:
                self.fail(section, f"{key}.per_decade", "must be a whole number from 1 to 1000")
            if lo <= 0:
                self.fail(section, f"{key}.min", "a logarithmic range needs min > 0")
            count = int(math.floor(n * math.log10(hi / lo) + 1e-9)) + 1
            if count > MAX_POINTS_PER_AXIS:
                self.fail(section, key, f"{count} values: too many for one axis")
            vals = lo * 10.0 ** (np.arange(count) / n)
            vals = np.array([float(f"{v:.12g}") for v in vals])
            return vals, None, nominal
        name = value["series"]
        if not isinstance(name, str):
            self.fail(section, f"{key}.series", "must be a series name such as \"E24\"")
        if key not in ("ra", "rb", "r", "c", "load_resistance"):
            self.fail(section, f"{key}.series", "standard series apply to resistors and capacitors")
        try:
            vals = qv.series_values(name, lo, hi)
        except ValueError as e:
            self.fail(section, f"{key}.series", str(e))
        if len(vals) == 0:
            self.fail(section, key, f"no {name.upper()} value lies between {value['min']} and {value['max']}")
        if len(vals) > MAX_POINTS_PER_AXIS:
            self.fail(section, key, f"{len(vals)} values: too many for one axis")
        return vals, name.upper(), nominal

    # -- parts, load, spec
    def parts(self, axes) -> Parts:
        p = self.data.get("parts", {})
        kw: dict = {}
        units = SCHEMA["parts"]
        for key, attr in (("resistor_tolerance", "resistor_tolerance"),
                          ("resistor_tempco", "resistor_tempco_per_k"),
                          ("resistor_power", "resistor_power_w"),
                          ("capacitor_tolerance", "capacitor_tolerance"),
                          ("capacitor_voltage", "capacitor_voltage_v"),
                          ("stray_capacitance", "stray_capacitance_f"),
                          ("diode_drop", "diode_drop_v"),
                          ("diode_saturation_current", "diode_saturation_current_a"),
                          ("diode_ideality", "diode_ideality"),
                          ("dc_bias_loss", "dc_bias_loss"),
                          ("discharge_resistor", "discharge_resistor_ohm")):
            if key in p:
                kw[attr] = self.quantity("parts", key, p[key], units[key][0],
                                         allow_negative=key == "resistor_tempco")
        for key in ("resistor_tolerance", "capacitor_tolerance", "dc_bias_loss"):
            attr = key
            if attr in kw and not 0 <= kw[attr] < 1:
                self.fail("parts", key, "must be at least 0 and below 100 %")
        for key, attr in (("resistor_power", "resistor_power_w"), ("capacitor_voltage", "capacitor_voltage_v")):
            if attr in kw and kw[attr] <= 0:
                self.fail("parts", key, "must be greater than zero")
        self._diode(p, kw)
        if "discharge_resistor_ohm" in kw:
            circ = REGISTRY.get(self.data.get("study", {}).get("circuit"))
            if circ is None or not circ.discharge_resistor:
                self.fail("parts", "discharge_resistor", "applies to the monostable only (in an "
                          "astable RB already sits between the discharge pin and C)")
            if not 0 <= kw["discharge_resistor_ohm"] <= 10e3:
                self.fail("parts", "discharge_resistor", "must be from 0 to 10 kΩ")
        if "resistor_tempco_per_k" in kw and abs(kw["resistor_tempco_per_k"]) > 0.01:
            self.fail("parts", "resistor_tempco", "beyond +-10 000 ppm/K: check the unit (ppm)")
        if "capacitor" in p:
            if not isinstance(p["capacitor"], str):
                self.fail("parts", "capacitor", "must be a technology name in quotes")
            try:
                kw["capacitor"] = capacitor_named(p["capacitor"]).name
            except KeyError:
                hint = difflib.get_close_matches(p["capacitor"].lower(), CAPACITOR_ALIASES, 1)
                self.fail("parts", "capacitor", f"unknown capacitor technology {p['capacitor']!r}" +
                          (f"; did you mean '{CAPACITOR_ALIASES[hint[0]]}'?" if hint else
                           "; known: " + SCHEMA["parts"]["capacitor"][1]))
        # tolerance implied by the series when not given [std IEC 60063]
        def implied(keys, default):
            series = [a.series for a in axes if a.key in keys and a.series]
            if not series:
                return default
            return max(qv.SERIES_TOLERANCE[s] for s in series)
        kw.setdefault("resistor_tolerance", implied(("ra", "rb", "r"), 0.05))
        kw.setdefault("capacitor_tolerance", implied(("c",), 0.10))
        return Parts(**kw)

    def _diode(self, p: dict, kw: dict) -> None:
        """The diode keys: a named diode, its Shockley figures, or a fixed drop, not both."""
        if "diode" in p:
            name = p["diode"]
            if not isinstance(name, str) or name.strip().lower() not in DIODES:
                self.fail("parts", "diode", f"unknown diode {str(name)[:40]!r}; known: "
                          + ", ".join(DIODES))
            kw["diode"] = name.strip().lower()
        shockley = [k for k in ("diode", "diode_saturation_current", "diode_ideality") if k in p]
        if "diode_drop" in p and shockley:
            self.fail("parts", "diode_drop", f"give either diode_drop (a fixed drop) or "
                      f"{' and '.join(shockley)} (a Shockley diode), not both")
        if "diode_drop_v" in kw and not 0 <= kw["diode_drop_v"] < 3:
            self.fail("parts", "diode_drop", "must be from 0 V to below 3 V")
        i_s = kw.get("diode_saturation_current_a")
        if i_s is not None and not 1e-18 <= i_s <= 1e-3:
            self.fail("parts", "diode_saturation_current", "must be from 1e-18 A to 1 mA "
                      "(a small-signal diode: nanoamps, a Schottky tens of nanoamps)")
        n = kw.get("diode_ideality")
        if n is not None and not 0.8 <= n <= 3:
            self.fail("parts", "diode_ideality", "must be from 0.8 to 3")

    def load(self, swept: bool = False) -> Load:
        """The [load]; swept: load_resistance is a [design] or [conditions] axis, which then
        gives the resistance (the Load's own stays NaN)."""
        ld = self.data.get("load", {})
        if not ld and not swept:
            return Load()
        kind = ld.get("kind", "led" if "forward_voltage" in ld else "resistive")
        if kind not in LOAD_KINDS:
            self.fail("load", "kind", f"unknown load kind {kind!r}; known: {', '.join(LOAD_KINDS)}")
        if swept and "resistance" in ld:
            self.fail("load", "resistance", "load_resistance is swept in [design] or [conditions]; "
                      "give the resistance there only")
        if "resistance" not in ld and not swept:
            self.fail("load", "resistance", "missing: a [load] needs its resistance (or sweep "
                      "load_resistance in [design])")
        r = (math.nan if swept else self.quantity("load", "resistance", ld["resistance"], "ohm"))
        if r <= 0:
            self.fail("load", "resistance", "must be greater than zero")
        if kind == "led" and "forward_voltage" not in ld:
            self.fail("load", "forward_voltage", "missing: an LED load needs its forward voltage, "
                      "e.g. \"2.0V\" for a red LED [cp]")
        to = ld.get("to", "ground")
        if to not in ("ground", "supply"):
            self.fail("load", "to", f"must be 'ground' or 'supply', got {to!r}")
        vf = self.quantity("load", "forward_voltage", ld.get("forward_voltage", 0.0), "V")
        if vf < 0:
            self.fail("load", "forward_voltage", "must not be negative")
        return Load(resistance_ohm=r, to=to, forward_voltage_v=vf, kind=kind)

    def yield_spec(self) -> float | None:
        """[spec] yield = { min = ... }: the share of builds the pick must reach."""
        value = self.data.get("spec", {}).get("yield")
        if value is None:
            return None
        if not isinstance(value, dict) or set(value) != {"min"}:
            self.fail("spec", "yield", "must be { min = ... }, e.g. { min = 0.99 } or { min = \"99%\" }")
        y = self.quantity("spec", "yield.min", value["min"], "%")
        if not 0 < y < 1:
            self.fail("spec", "yield.min", "must lie between 0 and 1 (or 0 % and 100 %), exclusive")
        return float(y)

    def spec(self, circuit) -> tuple[SpecLimit, ...]:
        out = []
        for key, value in self.data.get("spec", {}).items():
            if key == "yield":
                continue
            unit = SCHEMA["spec"][key][0]
            if key in SPEC_CIRCUITS and circuit not in SPEC_CIRCUITS[key]:
                self.fail("spec", key, f"does not apply to circuit {circuit} (only to "
                          f"{', '.join(SPEC_CIRCUITS[key])})")
            if not isinstance(value, dict):
                self.fail("spec", key, "must be {target = ..., tolerance = ...} or {min = ..., max = ...}")
            extra = set(value) - {"target", "tolerance", "min", "max"}
            if extra:
                self.fail("spec", f"{key}.{sorted(extra)[0]}", "unknown; use target and tolerance, or min and max")
            target = None
            if "target" in value or "tolerance" in value:
                if "min" in value or "max" in value:
                    self.fail("spec", key, "give target and tolerance, or min and max, not both")
                if "target" not in value or "tolerance" not in value:
                    self.fail("spec", key, "a target needs a tolerance (e.g. \"10%\") and vice versa")
                target = self.quantity("spec", f"{key}.target", value["target"], unit)
                tol = value["tolerance"]
                if isinstance(tol, str) and tol.strip().endswith("%"):
                    rel = self.quantity("spec", f"{key}.tolerance", tol, "%")
                    lo, hi = target * (1 - rel), target * (1 + rel)
                else:
                    a = self.quantity("spec", f"{key}.tolerance", tol, unit)
                    lo, hi = target - a, target + a
                if target <= 0:
                    self.fail("spec", f"{key}.target", "must be greater than zero")
                if lo <= 0:
                    self.fail("spec", f"{key}.tolerance", f"{tol!r} is as large as the target, so the "
                              "lower limit is not positive; for a relative tolerance write it with % "
                              "(e.g. \"15%\")")
            else:
                if "min" not in value and "max" not in value:
                    self.fail("spec", key, "give min, max or both")
                lo = self.quantity("spec", f"{key}.min", value["min"], unit) if "min" in value else -math.inf
                hi = self.quantity("spec", f"{key}.max", value["max"], unit) if "max" in value else math.inf
                if lo > hi:
                    self.fail("spec", key, "min is greater than max")
            if key == "duty" and (hi <= 0 or lo >= 1):
                self.fail("spec", key, "a duty cycle lies between 0 and 1 (or 0 % and 100 %)")
            out.append(SpecLimit(key, SPEC_COLUMNS[key], lo, hi, target))
        return tuple(out)


def _slug(text: str) -> str:
    s = re.sub(r"[^A-Za-z0-9._-]+", "-", text).strip("-.")
    return s[:80] or "study"


# ------------------------------------------------------------------ writing back

def study_rows(study: Study) -> list[tuple[str, str, str, str]]:
    """The study as editable rows (section, key, value as TOML, meaning): the Study sheet."""
    rows = []
    for section, keys in study.raw.items():
        for key, value in keys.items():
            unit, meaning = SCHEMA[section][key]
            hint = "" if unit in ("text", "int", "") else qv.unit_symbol(unit)
            rows.append((section, key, toml_inline(value), (hint + " " + meaning).strip()))
    return rows
