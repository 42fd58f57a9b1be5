"""One registry of every variable timer-sweep reads or writes.

The same entry feeds study validation (unit of a key), table headers (label and unit), number
formats in the workbook and chart axes. Machine names carry the SI unit as a suffix.
"""
from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class Variable:
    name: str          # machine column name, e.g. "ra_ohm"
    label: str         # what a person reads, e.g. "RA"
    unit: str          # SI unit as shown in headers ("" for a plain ratio)
    fmt: str           # "eng" (engineering prefixes), "pct", "fixed2", "int", "text"
    description: str
    log: bool = False  # a chart axis reads better on a log scale
    key: str | None = None         # the study key that sweeps it ([design] or [conditions])
    parse: str | None = None       # the unit study text parses to (sweep.values.parse_quantity)
    ref: str | None = None         # reference designator on a schematic, e.g. "RA"

    @property
    def header(self) -> str:
        """Header text with the unit in brackets, e.g. 'RA [Ω]'."""
        return f"{self.label} [{self.unit}]" if self.unit else self.label


_V = Variable
VARIABLES: dict[str, Variable] = {v.name: v for v in [
    # inputs: parts and conditions
    _V("ra_ohm", "RA", "Ω", "eng", "Timing resistor from the supply to the discharge pin", True, key="ra", parse="ohm", ref="RA"),
    _V("rb_ohm", "RB", "Ω", "eng", "Timing resistor from the discharge pin to the capacitor", True, key="rb", parse="ohm", ref="RB"),
    _V("r_ohm", "R", "Ω", "eng", "Timing resistor (monostable; output-to-capacitor in the symmetric astable)", True, key="r", parse="ohm", ref="R"),
    _V("c_f", "C", "F", "eng", "Timing capacitor, nominal value", True, key="c", parse="F", ref="C"),
    _V("vcc_v", "Supply", "V", "fixed2", "Supply voltage", key="vcc", parse="V"),
    _V("temperature_c", "Ambient", "°C", "fixed1", "Ambient temperature", key="temperature", parse="C"),
    _V("control_voltage_v", "Control pin", "V", "fixed2", "Voltage forced on the control pin (blank: internal divider)", key="control_voltage", parse="V"),
    _V("load_resistance_ohm", "Load resistor", "Ω", "eng", "Resistor of the load (an LED's series resistor), when swept", True, key="load_resistance", parse="ohm", ref="RL"),
    _V("input_period_s", "Input period", "s", "eng", "Period of the input pulse train (missing-pulse detector)", True, key="input_period", parse="s"),
    # outputs
    _V("high_time_s", "High time", "s", "eng", "Time the output is high per cycle (the pulse, for a monostable)", True),
    _V("low_time_s", "Low time", "s", "eng", "Time the output is low per cycle", True),
    _V("period_s", "Period", "s", "eng", "High time plus low time", True),
    _V("frequency_hz", "Frequency", "Hz", "eng", "1 / period", True),
    _V("duty", "Duty", "", "pct", "High time / period"),
    _V("pulse_width_s", "Pulse width", "s", "eng", "Monostable output pulse", True),
    _V("supply_current_a", "Supply current", "A", "eng", "Average current drawn from the supply while running", True),
    _V("idle_current_a", "Idle current", "A", "eng", "Current drawn while waiting for a trigger (monostable) or holding (bistable)", True),
    _V("power_w", "Power", "W", "eng", "Supply voltage x average supply current", True),
    _V("output_high_v", "Output high", "V", "fixed2", "Output voltage in the high state, under the load"),
    _V("output_low_v", "Output low", "V", "fixed2", "Output voltage in the low state, under the load"),
    _V("output_current_a", "Output current", "A", "eng", "Current through the load in the state that drives it"),
    _V("discharge_peak_a", "Discharge peak", "A", "eng", "Peak current into the discharge pin, the capacitor's turn-on dump included"),
    _V("discharge_dump_s", "Dump time", "s", "eng", "How long the discharge transistor's turn-on surge lasts (to a tenth of its peak)", True),
    _V("ra_power_w", "Resistor power", "W", "eng", "Largest dissipation in the resistor from the supply (RA, or R)"),
    _V("timeout_s", "Timeout", "s", "eng", "Missing-pulse detector: time from the last input pulse to the alarm", True),
    _V("timeout_margin_s", "Timeout margin", "s", "eng", "Timeout less the input period: how late a pulse may come before a false alarm (negative: false alarm)"),
    _V("battery_life_h", "Battery life", "h", "fixed1", "Usable battery capacity / mean current (the idle current for a monostable waiting for triggers)"),
    _V("junction_temp_c", "Junction", "°C", "fixed1", "Chip junction temperature, worst phase"),
    # the timing node's phases, for the waveform (not table columns)
    _V("wave_v_start_v", "Node start", "V", "fixed2", "Capacitor voltage where the timing cycle starts (after the low phase's run-on)"),
    _V("wave_v_top_v", "Node top", "V", "fixed2", "Capacitor voltage where the high phase ends (after its run-on)"),
    _V("wave_vinf_high_v", "High-phase aim", "V", "fixed2", "Voltage the capacitor heads for while the output is high (Thevenin source)"),
    _V("wave_vinf_low_v", "Low-phase aim", "V", "fixed2", "Voltage the capacitor heads for while the output is low (Thevenin source)"),
    _V("flags", "Flags", "", "text", "Limits broken at this point (space-separated codes)"),
    _V("ok", "OK", "", "bool", "No flag at this point"),
    _V("design", "Design", "", "int", "Design number (row of the Designs table)"),
    # per-design figures
    _V("rank", "Rank", "", "int", "Place in the ranking (1 = the pick)"),
    _V("feasible", "Feasible", "", "bool", "No limit flag at any condition and nominal figures in spec"),
    _V("yield", "Yield", "", "pct", "Share of Monte Carlo builds meeting every spec limit at every condition"),
    _V("wc_margin", "Worst-case margin", "", "pct", "Smallest relative distance from the worst case to a spec limit (negative: outside)"),
    _V("sn_db", "S/N", "dB", "fixed2", "Taguchi nominal-the-best signal-to-noise ratio of the main output"),
    _V("series_need", "Series needed", "", "int", "Coarsest IEC 60063 series holding every part (0 = E3 ... 6 = E192, 7 = none)"),
    _V("distinct_values", "Distinct resistors", "", "int", "Different resistor values in the design"),
    _V("screened", "Screened out", "", "text", "Why the Monte Carlo was skipped (yield 0)"),
    _V("yield_lo", "Yield 95 % low", "", "pct", "Lower end of the yield's 95 % Wilson score interval"),
    _V("yield_hi", "Yield 95 % high", "", "pct", "Upper end of the yield's 95 % Wilson score interval"),
    _V("verdict", "Verdict", "", "text", "One word per design: pass, low yield, not sampled, spec miss, limit, stalls"),
    _V("stalls_at", "Stalls at", "", "text", "Where the timer first stalls: condition and tolerance corner"),
    _V("uncommon", "Uncommon part", "", "text", "A part that is uncommon or costly in its technology"),
    _V("condition", "Condition", "", "int", "Condition number within the design"),
    # part grades as design axes
    _V("grade", "Grade", "", "int", "Number of the part-grade combination (Grades table)"),
    _V("grade_label", "Grade name", "", "text", "The part grades of the design, in words"),
    _V("resistor_tolerance", "R tolerance", "", "text", "Tolerance of the timing resistors"),
    _V("resistor_series", "R series", "", "text", "IEC 60063 series of the timing resistors"),
    _V("capacitor", "C technology", "", "text", "Technology of the timing capacitor"),
    _V("capacitor_tolerance", "C tolerance", "", "text", "Tolerance of the timing capacitor"),
    _V("cost_index", "Cost index", "", "fixed2", "Relative cost of the timing parts' grades: rough common-practice figures [cp] from the grade table, not quotes"),
]}

#: study keys that can be swept, with the column that carries them and the SI unit they parse to
AXES: dict[str, tuple[str, str]] = {v.key: (v.name, v.parse) for v in VARIABLES.values() if v.key}
#: reference designators of the parts a study can sweep, by study key
REFS: dict[str, str] = {v.key: v.ref for v in VARIABLES.values() if v.key and v.ref}

#: output columns in the order tables show them
OUTPUTS = ["high_time_s", "low_time_s", "period_s", "frequency_hz", "duty", "pulse_width_s",
           "supply_current_a", "idle_current_a", "power_w", "output_high_v", "output_low_v",
           "output_current_a", "discharge_peak_a", "discharge_dump_s", "ra_power_w", "junction_temp_c",
           "timeout_s", "timeout_margin_s", "battery_life_h"]

#: what each flag code (sweep.physics.FLAGS) means, for the Notes sheet and the help
FLAG_TEXT = {
    "supply-below-min": "Supply below the timer's recommended minimum",
    "supply-above-max": "Supply above the timer's recommended maximum",
    "supply-above-abs-max": "Supply above the timer's absolute maximum rating: the chip may be destroyed",
    "temperature-out-of-range": "Ambient outside the timer's operating range",
    "resistor-too-small": "Timing resistor below the timer's minimum (discharge transistor overloaded)",
    "resistance-too-large": "Timing resistance so large that input bias current upsets the timing",
    "capacitor-too-small": "Timing capacitor so small that stray capacitance and delays dominate",
    "frequency-too-high": "Frequency above what the timer can follow",
    "output-current-over-limit": "Load current above the output stage's limit",
    "discharge-current-over-limit": "Peak discharge current above the discharge transistor's limit",
    "resistor-overpowered": "Timing resistor dissipates more than its power rating",
    "junction-too-hot": "Chip junction above its maximum temperature",
    "timing-stalls": "The capacitor never reaches the threshold (leakage or bias current): no timing",
    "spec-miss": "Fails a [spec] limit",
    "false-alarm": "Missing-pulse detector: the timeout is shorter than the input period, so it alarms on every pulse",
}


#: the per-design figures of an output column, by suffix, in the order tables show them
STATS: tuple[tuple[str, str], ...] = (
    ("_nom", "nominal"), ("_min", "min"), ("_max", "max"), ("_wc_min", "worst-case min"),
    ("_wc_max", "worst-case max"), ("_mc_mean", "Monte Carlo mean"), ("_mc_std", "Monte Carlo std. dev."))


def eng(value: float, column: str) -> str:
    """A value of a machine column as a person reads it: engineering notation with the
    column's unit, or a percentage for the duty; "-" where it is not a number."""
    import math

    from .values import format_eng
    v = VARIABLES.get(column)
    unit = v.unit if v else ""
    finite = value is not None and math.isfinite(value)
    if column == "duty":
        return f"{value * 100:.1f} %" if finite else "-"
    return format_eng(value, unit) if finite else "-"
