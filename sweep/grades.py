"""Part grades as design axes: resistor tolerance and series, capacitor technology and tolerance.

A study may list grades in [design] (`resistor_tolerance = ["1%", "5%"]`, `capacitor =
["C0G", "X7R"]`...). Each combination of grades is evaluated as its own sub-sweep: a Study with
that grade's Parts (and, for a resistor series, its own resistor values), and the sub-sweeps are
concatenated, grade after grade, so design numbers are fixed by the study alone and blocks,
local processes and a cluster give identical results. The top-level Study carries the plan and a
"grade" design axis (the combination's number) so the engine can route any design to its parts.

The relative cost of each grade comes from the user-editable table models/grades.toml (rough
common-practice figures [cp]).
"""
from __future__ import annotations

import itertools
import math
import tomllib
from dataclasses import dataclass, replace
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

from . import values as qv
from .errors import InputError

if TYPE_CHECKING:
    import pandas as pd

GRADE_KEYS = ("resistor_tolerance", "resistor_series", "capacitor", "capacitor_tolerance")
#: most grade combinations one study may compare: each is a sub-sweep of its own [cp: a
#: handful of grades answers the question; hundreds only multiply the run]
MAX_GRADES = 64
TABLE = Path(__file__).parent / "models" / "grades.toml"
R_KEYS = ("ra", "rb", "r")
#: the grade columns every design of a graded study carries
GRADE_COLUMNS = ["grade", "grade_label", "resistor_tolerance", "resistor_series", "capacitor",
                 "capacitor_tolerance", "cost_index"]


@dataclass(frozen=True)
class GradeCost:
    cost: float
    notes: str


def _grade_name(kind: str, name: str) -> str:
    """A table key in the form the table uses: '1%' for tolerances, 'E24' for series, the
    technology's own name for capacitors."""
    if kind in ("resistor_tolerance", "capacitor_tolerance"):
        frac = qv.parse_quantity(name, "%")
        return f"{frac * 100:g}%"
    if kind == "resistor_series":
        return str(name).strip().upper()
    from .physics import capacitor_named
    return capacitor_named(name).name


def load_table(path: Path = TABLE) -> dict[str, dict[str, GradeCost]]:
    """The grade table: kind -> grade name -> (relative cost, notes). InputError on bad data."""
    fname = str(path)
    try:
        data = tomllib.loads(path.read_text(encoding="utf-8"))
    except (OSError, UnicodeDecodeError, tomllib.TOMLDecodeError) as e:
        raise InputError(fname, "", f"cannot read the grade table: {e}") from None
    out: dict[str, dict[str, GradeCost]] = {}
    for kind in GRADE_KEYS:
        table = data.get(kind)
        if not isinstance(table, dict):
            raise InputError(fname, kind, "missing section")
        out[kind] = {}
        for name, row in table.items():
            if not isinstance(row, dict) or not isinstance(row.get("cost"), (int, float)) \
                    or isinstance(row.get("cost"), bool) or not math.isfinite(row["cost"]) \
                    or row["cost"] <= 0:
                raise InputError(fname, f"{kind}.{name}", "must be { cost = <positive number>, "
                                 "notes = \"...\" }")
            try:
                key = _grade_name(kind, name)
            except (ValueError, KeyError):
                raise InputError(fname, f"{kind}.{name}", "not a grade timer-sweep knows") from None
            out[kind][key] = GradeCost(float(row["cost"]), str(row.get("notes", "")))
    return out


@dataclass(frozen=True)
class Grade:
    """One combination of grades: its number, its values, its sub-study and where its designs
    start in the study's numbering (0-based)."""
    index: int
    values: tuple[tuple[str, object], ...]     # (key, value) for every grade key of the study
    label: str
    cost: float
    notes: str
    study: object                              # the sub-Study
    offset: int

    @property
    def n_designs(self) -> int:
        return self.study.n_designs


def cost_index(table, circuit_parts: tuple[str, ...], parts, r_series: str | None) -> tuple[float, str]:
    """The relative cost index of a design's timing parts and the notes of its grades [cp]."""
    def row(kind, name):
        return table[kind].get(name)
    n_r = sum(1 for k in circuit_parts if k in R_KEYS)
    notes = []
    r_tol = row("resistor_tolerance", f"{parts.resistor_tolerance * 100:g}%")
    r_ser = row("resistor_series", r_series) if r_series else None
    r_cost = max([g.cost for g in (r_tol, r_ser) if g is not None] or [1.0])
    c_tech = row("capacitor", parts.capacitor)
    c_tol = row("capacitor_tolerance", f"{parts.capacitor_tolerance * 100:g}%")
    c_cost = (c_tech.cost if c_tech else 1.0) * (c_tol.cost if c_tol else 1.0)
    for g in (r_tol, r_ser, c_tech, c_tol):
        if g is not None and g.notes:
            notes.append(g.notes)
    has_c = "c" in circuit_parts
    return n_r * r_cost + (c_cost if has_c else 0.0), "; ".join(dict.fromkeys(notes))


def grade_of(study, design_numbers) -> np.ndarray:
    """The grade index of each design (1-based numbers) of a graded study."""
    starts = np.array([g.offset for g in study.grade_plan])
    return np.searchsorted(starts, np.asarray(design_numbers) - 1, side="right") - 1


def study_for(study, design_number: int):
    """The sub-study holding a design (the study itself when it has no grades)."""
    if not study.grade_plan:
        return study
    return study.grade_plan[int(grade_of(study, [design_number])[0])].study


def grade_values(study, design_number: int) -> tuple:
    """The (key, value) grade choices of a design; () when the study has no grades."""
    if not study.grade_plan:
        return ()
    return study.grade_plan[int(grade_of(study, [design_number])[0])].values


def grade_columns(study, design_numbers) -> dict[str, np.ndarray]:
    """The grade columns (GRADE_COLUMNS) of designs given by 1-based numbers."""
    g = grade_of(study, design_numbers)
    plan = study.grade_plan
    out: dict[str, np.ndarray] = {"grade": g + 1}
    out["grade_label"] = np.array([plan[i].label for i in g], dtype=object)
    for key in GRADE_KEYS[0], GRADE_KEYS[1], GRADE_KEYS[2], GRADE_KEYS[3]:
        vals = [_shown(plan[i].study, key) for i in range(len(plan))]
        out[key] = np.array([vals[i] for i in g], dtype=object)
    out["cost_index"] = np.array([plan[i].cost for i in g], dtype=float)
    return out


def _shown(sub, key: str) -> str:
    p = sub.parts
    if key == "resistor_tolerance":
        return f"{p.resistor_tolerance * 100:g} %"
    if key == "capacitor_tolerance":
        return f"{p.capacitor_tolerance * 100:g} %"
    if key == "capacitor":
        return p.capacitor
    series = sorted({a.series for a in sub.design if a.key in R_KEYS and a.series})
    return ", ".join(series) or "-"


def design_values(study, index: np.ndarray) -> dict[str, np.ndarray]:
    """Values of each design axis (and "grade", 0-based) for 0-based design indexes."""
    from .engine import axis_values
    if not study.grade_plan:
        return axis_values(study.design, index)
    index = np.asarray(index)
    g = grade_of(study, index + 1)
    keys = [a.key for a in study.design]
    out = {k: np.zeros(len(index)) for k in keys}
    for gi in np.unique(g):
        sel = g == gi
        sub = study.grade_plan[gi]
        vals = axis_values(sub.study.design, index[sel] - sub.offset)
        for k, v in vals.items():
            out[k][sel] = v
        out["grade"][sel] = gi + 1
    return out


def split(study, start: int, stop: int):
    """(grade, local start, local stop) pieces of the 0-based design range [start, stop)."""
    for g in study.grade_plan:
        a, b = max(start, g.offset), min(stop, g.offset + g.n_designs)
        if a < b:
            yield g, a - g.offset, b - g.offset


def analyse_block(study, start: int, stop: int, opt=None):
    """analysis.analyse_block over a graded study: each grade's piece runs on its own sub-study,
    renumbered into the study's numbering, with the grade columns added."""
    import pandas as pd            # here: a study's parse (check, point) needs no pandas
    from .analysis import Options, analyse_block as plain
    opt = opt or Options()
    if not study.grade_plan:
        return plain(study, start, stop, opt)
    frames, points = [], []
    for g, a, b in split(study, start, stop):
        df, pts = plain(g.study, a, b, opt)
        df["design"] = df["design"] + g.offset
        for k, v in grade_columns(study, df["design"].to_numpy()).items():
            df[k] = v
        frames.append(df)
        if pts is not None:
            pts["design"] = pts["design"] + g.offset
            pts.insert(2, "grade", g.index + 1)
            points.append(pts)
    return (pd.concat(frames, ignore_index=True),
            pd.concat(points, ignore_index=True) if points else None)


def monte_carlo_block(study, designs: np.ndarray, opt=None) -> pd.DataFrame:
    """analysis.monte_carlo_block over a graded study, grade by grade, in the order given."""
    import pandas as pd
    from .analysis import Options, monte_carlo_block as plain
    opt = opt or Options()
    designs = np.asarray(designs)
    if not study.grade_plan:
        return plain(study, designs, opt)
    g = grade_of(study, designs)
    frames = []
    for gi in np.unique(g):
        sub = study.grade_plan[gi]
        df = plain(sub.study, designs[g == gi] - sub.offset, opt)
        df["design"] = df["design"] + sub.offset
        frames.append(df)
    out = pd.concat(frames, ignore_index=True)
    order = pd.Series(np.arange(len(designs)), index=designs)
    return out.iloc[np.argsort(order[out["design"].to_numpy()].to_numpy(), kind="stable")] \
        .reset_index(drop=True)


def evaluate_graded(study, design: dict, conditions: dict, **kw) -> dict[str, np.ndarray]:
    """engine.evaluate_block for designs of several grades: each grade evaluated with its own
    sub-study (its Parts), the results put back in the designs' order."""
    from .engine import evaluate_block
    g = np.asarray(design["grade"]).astype(int) - 1       # the axis counts grades from 1
    nd = len(g)
    out: dict[str, np.ndarray] = {}
    for gi in np.unique(g):
        sel = g == gi
        part = {k: np.asarray(v)[sel] for k, v in design.items() if k != "grade"}
        res = evaluate_block(study.grade_plan[gi].study, part, conditions, **kw)
        for k, v in res.items():
            v = np.asarray(v)
            if k not in out:
                shape = (nd,) + v.shape[1:]
                out[k] = np.zeros(shape, dtype=v.dtype)
            if v.shape[1:] != out[k].shape[1:]:          # a figure not varying along an axis
                full = np.broadcast_shapes(v.shape[1:], out[k].shape[1:])
                out[k] = np.broadcast_to(out[k], (nd,) + full).copy()
                v = np.broadcast_to(v, (v.shape[0],) + full)
            out[k][sel] = np.broadcast_to(v, (int(sel.sum()),) + out[k].shape[1:])
    return out


# ------------------------------------------------------------------ the plan, at parse time

def parse_grades(raw_design: dict, fail) -> list[tuple[str, list]]:
    """The grade keys of [design] as (key, [values]) in the file's order; fail(key, problem)."""
    out = []
    for key, value in raw_design.items():
        if key not in GRADE_KEYS:
            continue
        vals = value if isinstance(value, list) else [value]
        if len(vals) > MAX_GRADES:
            fail(key, f"a list of {len(vals):,} grades; the limit is {MAX_GRADES}")
        if not vals:
            fail(key, "empty list")
        parsed = []
        for v in vals:
            if key in ("resistor_tolerance", "capacitor_tolerance"):
                try:
                    x = qv.parse_quantity(v, "%")
                except ValueError as e:
                    fail(key, str(e))
                if not 0 <= x < 1:
                    fail(key, "a tolerance must be at least 0 and below 100 %")
                parsed.append(float(x))
            elif key == "resistor_series":
                if not isinstance(v, str) or v.strip().upper() not in qv.SERIES:
                    fail(key, f"unknown series {str(v)[:40]!r}; known: {', '.join(qv.SERIES)}")
                parsed.append(v.strip().upper())
            else:
                from .physics import capacitor_named
                try:
                    parsed.append(capacitor_named(v).name)
                except KeyError:
                    fail(key, f"unknown capacitor technology {str(v)[:40]!r}")
        if len(set(parsed)) != len(parsed):
            fail(key, "the list repeats a grade")
        out.append((key, parsed))
        if math.prod(len(v) for _, v in out) > MAX_GRADES:
            fail(key, f"{math.prod(len(v) for _, v in out):,} combinations of part grades; the "
                 f"limit is {MAX_GRADES}: compare fewer grades at once")
    return out


def build_plan(base, grades: list[tuple[str, list]], given_parts: dict, fail) -> tuple:
    """The grade plan of a study: one Grade per combination, each with its sub-study."""
    from .physics import CIRCUIT_PARTS
    from .study import Axis
    table = load_table()
    plan = []
    offset = 0
    for key, _ in grades:
        if key in given_parts:
            fail(key, f"'{key}' is both a [design] grade axis and a [parts] value; keep one")
    for i, combo in enumerate(itertools.product(*[v for _, v in grades])):
        chosen = dict(zip([k for k, _ in grades], combo))
        parts, axes = base.parts, base.design
        if "resistor_series" in chosen:
            s = chosen["resistor_series"]
            new = []
            for a in axes:
                if a.key in R_KEYS:
                    vals = qv.series_values(s, float(a.values.min()), float(a.values.max()))
                    if len(vals) == 0:
                        fail("resistor_series", f"no {s} value lies within the range of {a.key}")
                    a = Axis(a.key, a.column, vals, a.role, s, a.nominal)
                new.append(a)
            axes = tuple(new)
            if "resistor_tolerance" not in given_parts and "resistor_tolerance" not in chosen:
                parts = replace(parts, resistor_tolerance=qv.SERIES_TOLERANCE[s])
        if "resistor_tolerance" in chosen:
            parts = replace(parts, resistor_tolerance=chosen["resistor_tolerance"])
        if "capacitor" in chosen:
            parts = replace(parts, capacitor=chosen["capacitor"])
        if "capacitor_tolerance" in chosen:
            parts = replace(parts, capacitor_tolerance=chosen["capacitor_tolerance"])
        for kind, name in (("resistor_tolerance", f"{parts.resistor_tolerance * 100:g}%"),
                           ("capacitor_tolerance", f"{parts.capacitor_tolerance * 100:g}%"),
                           ("capacitor", parts.capacitor)):
            if kind in chosen and name not in table[kind]:
                fail(kind, f"grade {name} is not in the grade table {TABLE.name} (known: "
                     f"{', '.join(table[kind])}); add it there with its cost")
        sub = replace(base, design=axes, parts=parts, grade_plan=())
        r_series = chosen.get("resistor_series") or next(
            (a.series for a in axes if a.key in R_KEYS and a.series), None)
        cost, notes = cost_index(table, CIRCUIT_PARTS[base.circuit], parts, r_series)
        label = ", ".join(_label(k, v) for k, v in chosen.items())
        plan.append(Grade(i, tuple(chosen.items()), label, cost, notes, sub, offset))
        offset += sub.n_designs
    return tuple(plan)


def _label(key: str, value) -> str:
    if key == "resistor_tolerance":
        return f"R {value * 100:g} %"
    if key == "capacitor_tolerance":
        return f"C {value * 100:g} %"
    return str(value)


def grade_axis(plan) -> "object":
    from .study import Axis
    return Axis("grade", "grade", np.arange(1, len(plan) + 1, dtype=float), "design")
