"""What a circuit is to timer-sweep: one record that every layer reads.

A circuit module (one per circuit in this package) defines its physics, a function of a
`network.Node` returning the timing node's phases and currents, and one `Circuit` record that
says everything the rest of the program needs to know about it: its timing parts, its main
outputs, the spec keys it accepts, the textbook formulas of the Check sheet, its starter study.
The registry in `__init__.py` lists the modules; nothing else names a circuit.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Callable


@dataclass(frozen=True)
class Starter:
    """The circuit's part of a starter study (`timer-sweep new`): TOML text with `{{`/`}}`
    for literal braces (it is passed through str.format)."""
    design: str                  # the [design] table, its header line included
    spec: str                    # the [spec] lines
    conditions: str = ""         # extra [conditions] lines


@dataclass(frozen=True)
class Circuit:
    """One circuit: its physics and everything the study, analysis, reports and writers need.

    phases(node) -> (outputs dict, stalls, chip power [W], (surge energy [J], surge duration [s]),
    steady discharge current [A] or None): the circuit's timing cycle at every point of the
    broadcast grid `node` (a `sweep.physics.network.Node`).
    """
    name: str                          # the study's [study] circuit value
    title: str                         # one line for people: "astable (free-running)"
    parts: tuple[str, ...]             # timing parts, study keys ("ra", "rb", "c")
    main_outputs: tuple[str, ...]      # output columns that say what it does, ranked on the first
    spec_keys: tuple[str, ...]         # [spec] keys only this kind of circuit has
    phases: Callable                   # the physics
    timed: bool = True                 # False: a latch, nothing times
    textbook: str = ""                 # the textbook formulas in words [book]
    check: dict[str, str] = field(default_factory=dict)
    """Check-sheet formula templates (spreadsheet syntax, no '='), by output column; names in
    braces are cells: RA, RB, R, VCC, VD, C (farads), VC (the upper threshold), TH, TL (the
    high- and low-time helper cells)."""
    check_inputs: tuple[str, ...] = ()  # input cells beyond the parts, supply and control pin
    starter: Starter | None = None
    after_main: tuple[str, ...] = ()    # summary outputs shown right after the main ones
    conditions: tuple[str, ...] = ()    # [conditions] keys the circuit needs
    timer_band: str | None = None       # which of the timer's spreads apply: astable | monostable
    free_running: bool = False          # has a period, a frequency and a duty cycle
    ramps_from_ground: bool = False     # the timing ramp starts near 0 V (fit C(v) from there)
    trigger_on_node: bool = False       # the trigger input sits on the timing node
    has_idle: bool = False              # reports a current at rest (idle_current_a)
    waits: bool = False                 # a battery sees its idle current (waits for triggers)
    discharge_resistor: bool = False    # takes [parts] discharge_resistor (pin to C) in the model
    input_resistor: str | None = None   # part fed from VCC: too small overloads the discharge
    charging: tuple[str, ...] = ()      # parts the threshold bias current flows through
    extra_flags: Callable | None = None  # (outputs, env) -> {flag: condition}
    waveform_text: str = ""             # what the chart page's waveform shows
    trace: Callable | None = None       # (traces.Probe, point, input period [s]) -> None
    cycle_output: str | None = None     # the output column one whole cycle lasts
    bom_extra: tuple[str, ...] = ()     # parts beyond R and C: "diode", "discharge-transistor"

