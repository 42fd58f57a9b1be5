"""Commented starter studies for `timer-sweep new`."""
from __future__ import annotations

import json

from .errors import InputError
from .physics import CAPACITORS, CIRCUITS, REGISTRY

_HEAD = '''# timer-sweep study: {what}
# Quantities take SI prefixes ("4.7k", "100n", "2.2u") or IEC 60062 RKM codes ("4k7", "4n7");
# a unit, if written, must match the key ("100nF" is a capacitance). Ranges are a value, a list,
# {{ min, max, steps }} (linear), {{ min, max, per_decade }} (logarithmic) or
# {{ series = "E12", min, max }} (IEC 60063 standard values, bounds included).

[study]
title = "{title}"
circuit = "{circuit}"
timer = "cmos"              # bipolar | cmos | path to your own timer-model TOML file
supply = "regulated"        # regulated | battery | mains-derived (sets the cautions)
'''

_TAIL = '''
[conditions]                # what every design must survive; nominal defaults to the middle
vcc = {{ min = 4.5, max = 5.5, steps = 3 }}
temperature = {{ min = -10, max = 50, steps = 3, nominal = 25 }}

[parts]
# resistor_tolerance = "1%"     # default: implied by the series (E12 10 %, E24 5 %, E96 1 %)
resistor_tempco = "100ppm"      # per kelvin
capacitor = "X7R"               # {capacitors}
capacitor_tolerance = "10%"
capacitor_voltage = "16V"       # rating, for DC-bias loss and leakage

[load]
resistance = "1k"
to = "ground"                   # ground: the output sources current; supply: it sinks it
kind = "resistive"              # resistive | led | relay | inductive | mains-switching

[spec]                          # what "good" means: {{ target, tolerance }} or {{ min, max }}
{spec}

[analysis]
monte_carlo = 1000              # builds per design
seed = 1
'''


def starter_text(circuit: str) -> str:
    if circuit not in CIRCUITS:
        raise InputError("", "circuit", f"unknown circuit {circuit!r}; known: {', '.join(CIRCUITS)}")
    own = REGISTRY[circuit].starter
    return (_HEAD.format(what=f"{'an' if circuit[0] in 'aeiou' else 'a'} {circuit} starter (edit every value)", title=f"My {circuit} timer",
                         circuit=circuit)
            + own.design.format() + _TAIL.format(spec=own.spec.format(), capacitors=" | ".join(CAPACITORS)).replace(
                "nominal defaults to the middle\n", "nominal defaults to the middle\n"
                + own.conditions.format(), 1))


# ---------------------------------------------------------------- a study from the spec

def _range_option(text: str | None, key: str, unit: str, default: tuple[float, float]
                  ) -> tuple[float, float]:
    """'6..8.4' (or one value) as (lo, hi) in SI units; InputError naming the option."""
    from . import values as qv
    if text is None:
        return default
    parts = [p for p in str(text).split("..")]
    if len(parts) not in (1, 2) or not all(p.strip() for p in parts):
        raise InputError("", key, f"{text!r}: give one value or a range such as 6..8.4")
    try:
        vals = [qv.parse_quantity(p.strip(), unit, allow_negative=unit == "C") for p in parts]
    except ValueError as e:
        raise InputError("", key, str(e)) from None
    lo, hi = min(vals), max(vals)
    return lo, hi


def _quantity_option(text: str | None, key: str, unit: str) -> float | None:
    from . import values as qv
    if text is None:
        return None
    try:
        x = qv.parse_quantity(text, unit)
    except ValueError as e:
        raise InputError("", key, str(e)) from None
    if not x > 0:
        raise InputError("", key, "must be greater than zero")
    return x


def spec_study_text(circuit: str, *, frequency: str | None = None, tolerance: str = "10%",
                    duty_min: str | None = None, duty_max: str | None = None,
                    pulse_width: str | None = None, vcc: str | None = None,
                    temperature: str | None = None, series: str = "E24",
                    capacitor_series: str = "E6", capacitor: str = "X7R", timer: str = "cmos",
                    supply: str = "regulated", capacitors: int | None = None) -> str:
    """A commented study whose [design] ranges bracket the exact solutions of the spec
    (sweep.design_ranges), with the spec filled in from the options. Raises InputError naming
    the option on anything wrong."""
    from . import values as qv
    from .design_ranges import Target, propose
    from .models import load_timer
    from .physics import capacitor_named
    from .study import SUPPLIES

    f, pw, tol, d_lo, d_hi = _target_options(circuit, frequency, pulse_width, tolerance,
                                             duty_min, duty_max)
    for name, s in (("--series", series), ("--capacitor-series", capacitor_series)):
        if str(s).upper() not in qv.SERIES:
            raise InputError("", name, f"unknown series {s!r}; known: {', '.join(qv.SERIES)}")
    series, capacitor_series = series.upper(), capacitor_series.upper()
    try:
        tech = capacitor_named(capacitor)
    except KeyError:
        raise InputError("", "--capacitor", f"unknown capacitor technology {capacitor!r}") from None
    if supply not in SUPPLIES:
        raise InputError("", "--supply", f"unknown supply {supply!r}; known: {', '.join(SUPPLIES)}")
    if capacitors is not None and not 1 <= capacitors <= 12:
        raise InputError("", "--capacitors", "must be from 1 to 12")
    tm = load_timer(timer, None, "--timer")
    v_lo, v_hi = _range_option(vcc, "--vcc", "V", (tm.typical_v * 0.9, tm.typical_v * 1.1))
    if v_lo <= 0:
        raise InputError("", "--vcc", "must be greater than zero")
    t_lo, t_hi = _range_option(temperature, "--temperature", "C", (0.0, 50.0))
    v_rated = 16.0 if v_hi <= 10 else (25.0 if v_hi <= 16 else 50.0)   # about 2x the supply [cp]
    try:
        p = propose(circuit, Target(f, d_lo, d_hi, pw, tol), tm, tech, vcc=(v_lo, v_hi),
                    temperature=(t_lo, t_hi), r_series=series, c_series=capacitor_series,
                    capacitor_voltage_v=v_rated, capacitors=capacitors)
    except ValueError as e:
        raise InputError("", "--frequency" if f else "--pulse-width", str(e)) from None

    return _spec_study_lines(circuit, p, timer, supply, tech, (f, pw, tol, d_lo, d_hi),
                             (v_lo, v_hi, v_rated), (t_lo, t_hi))


def _target_options(circuit: str, frequency: str | None, pulse_width: str | None,
                    tolerance: str, duty_min: str | None, duty_max: str | None) -> tuple:
    """(frequency, pulse width, tolerance, duty min, duty max) of `timer-sweep new`'s spec
    options, checked against the circuit; InputError naming the option on anything wrong."""
    from . import values as qv

    if circuit not in CIRCUITS:
        raise InputError("", "circuit", f"unknown circuit {circuit!r}; known: {', '.join(CIRCUITS)}")
    if circuit == "bistable":
        raise InputError("", "circuit", "a bistable latch has no timing to aim at; use "
                         "'timer-sweep new bistable' without a spec")
    f = _quantity_option(frequency, "--frequency", "Hz")
    pw = _quantity_option(pulse_width, "--pulse-width", "s")
    if circuit == "missing-pulse":
        raise InputError("", "circuit", "the missing-pulse detector has no ranges worked out from "
                         "the spec; 'timer-sweep new missing-pulse' (without --frequency or "
                         "--pulse-width) writes a starter to edit, with a [spec] timeout")
    if circuit == "monostable":
        if pw is None:
            raise InputError("", "--pulse-width", "missing: a monostable aims at a pulse width "
                             "(e.g. --pulse-width 30s)")
        if f is not None or duty_min is not None or duty_max is not None:
            raise InputError("", "--frequency", "a monostable has a pulse width, not a frequency "
                             "or duty")
    else:
        if f is None:
            raise InputError("", "--frequency", f"missing: {circuit} aims at a frequency (e.g. "
                             "--frequency 2Hz)")
        if pw is not None:
            raise InputError("", "--pulse-width", f"does not apply to {circuit} (monostable only)")
    try:
        tol = qv.parse_quantity(tolerance, "%")
    except ValueError as e:
        raise InputError("", "--tolerance", str(e)) from None
    if not 0 < tol < 1:
        raise InputError("", "--tolerance", "must lie between 0 % and 100 %, exclusive")
    d_lo = d_hi = None
    for name, text in (("--duty-min", duty_min), ("--duty-max", duty_max)):
        if text is None:
            continue
        try:
            d = qv.parse_quantity(text, "%")
        except ValueError as e:
            raise InputError("", name, str(e)) from None
        if not 0 < d < 1:
            raise InputError("", name, "a duty cycle lies between 0 and 1 (or 0 % and 100 %)")
        if name == "--duty-min":
            d_lo = d
        else:
            d_hi = d
    if d_lo is not None and d_hi is not None and d_lo >= d_hi:
        raise InputError("", "--duty-min", "must be below --duty-max")
    if circuit == "astable" and d_hi is not None and d_hi <= 0.5:
        raise InputError("", "--duty-max", "the plain astable's duty is always above 50 %; "
                         "for less use astable-diode")
    if circuit == "astable-symmetric" and (d_lo is not None or d_hi is not None):
        raise InputError("", "--duty-max", "astable-symmetric runs near 50 %; its duty is not a choice")
    return f, pw, tol, d_lo, d_hi


def _spec_study_lines(circuit: str, p, timer: str, supply: str, tech, target: tuple,
                      supply_v: tuple, temperature: tuple) -> str:
    """The study text of spec_study_text: the proposal ``p`` (design_ranges.propose) with its
    notes, the conditions, parts and the spec."""
    import textwrap

    from . import values as qv
    f, pw, tol, d_lo, d_hi = target
    v_lo, v_hi, v_rated = supply_v
    t_lo, t_hi = temperature

    def q(v, unit):
        return json.dumps(qv.format_eng(v, unit).replace(" ", "").replace("Ω", "").replace("F", "")
                          .replace("µ", "u"))
    lines = [f"# timer-sweep study written from the spec by 'timer-sweep new {circuit}'.",
             "# The [design] ranges bracket the exact solutions of the timing formulas; how each",
             "# range was chosen:"]
    for n in p.notes:
        lines += textwrap.wrap(n, 96, initial_indent="#   ", subsequent_indent="#     ")
    what = (f"{qv.format_eng(f, 'Hz')}" if f else f"{qv.format_eng(pw, 's')} pulse")
    lines += ["", "[study]", f'title = "{circuit} aimed at {what}"', f'circuit = "{circuit}"',
              f"timer = {json.dumps(timer)}", f'supply = "{supply}"', "",
              "[design]                    # every combination is a candidate design"]
    for k in ("ra", "rb", "r", "c"):
        if k in p.values:
            lo, hi = p.bounds[k]
            unit = "F" if k == "c" else "Ω"
            lines.append(f'{k} = {{ series = "{p.series[k]}", min = {q(lo, unit)}, '
                         f'max = {q(hi, unit)} }}   # {len(p.values[k])} values')
    lines += ["# part grades to compare: every grade is a candidate, and with [spec] yield the pick",
              "# is the cheapest grade that reaches it (costs: sweep/models/grades.toml, rough [cp])",
              '# resistor_tolerance = ["1%", "5%"]',
              '# capacitor_tolerance = ["5%", "10%"]']
    lines += ["", "[conditions]                # what every design must survive",
              f"vcc = {{ min = {v_lo:g}, max = {v_hi:g}, steps = {3 if v_hi > v_lo else 1} }}",
              f"temperature = {{ min = {t_lo:g}, max = {t_hi:g}, steps = {3 if t_hi > t_lo else 1}"
              + (", nominal = 25 }" if t_lo <= 25 <= t_hi else " }"),
              "", "[parts]", f'capacitor = "{tech.name}"',
              f'capacitor_voltage = "{v_rated:g}V"        # about twice the supply [cp]',
              'capacitor_tolerance = "10%"     # the everyday grade of X7R and film [cp]'
              if tech.name not in ("electrolytic",) else
              'capacitor_tolerance = "20%"     # the usual grade of electrolytics [cp]',
              "# resistor_tolerance: implied by the resistor series (IEC 60063) unless given", "",
              "[spec]                      # filled in from the options"]
    if f:
        lines.append(f'frequency = {{ target = {json.dumps(qv.format_eng(f, "Hz").replace(" ", ""))}, '
                     f'tolerance = "{tol * 100:g}%" }}')
        if d_lo is not None or d_hi is not None:
            bounds = ([f"min = {d_lo:g}"] if d_lo is not None else []) + \
                ([f"max = {d_hi:g}"] if d_hi is not None else [])
            lines.append("duty = { " + ", ".join(bounds) + " }")
    else:
        lines.append(f'pulse_width = {{ target = {json.dumps(qv.format_eng(pw, "s").replace(" ", ""))}, '
                     f'tolerance = "{tol * 100:g}%" }}')
    lines += ["# yield = { min = 0.99 }    # the pick must reach this share of builds", "",
              "[analysis]", "monte_carlo = 500", "seed = 1", ""]
    return "\n".join(lines)
