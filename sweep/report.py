"""What the writers receive: plain tables and text, computed by the library, never by a writer.

A writer (workbook, chart page) only lays out what is here. Column names of every DataFrame are
machine names from sweep.variables (or the per-design names `<output>_nom`, `_min`, `_max`,
`_wc_min`, `_wc_max`, `_mc_mean`, `_mc_std`, `yield`, `sn_db`, `sens_<part>`, `feasible`,
`rank`, `flags`, `verdict`, `yield_lo`, `yield_hi`, `stalls_at`, `uncommon`).
"""
from __future__ import annotations

from dataclasses import dataclass, field

import pandas as pd


@dataclass(frozen=True)
class SpecRow:
    key: str            # study key, e.g. "frequency"
    column: str         # machine column, e.g. "frequency_hz"
    lo: float           # -inf when open
    hi: float           # +inf when open
    target: float | None = None


@dataclass(frozen=True)
class CircuitText:
    """What the writers say about the study's circuit (from the circuit registry)."""
    title: str                       # "astable (free-running)"
    timed: bool                      # False for a latch
    free_running: bool               # has a period, a frequency and a duty cycle
    main_outputs: tuple[str, ...]    # the columns the Check sheet checks
    textbook: str = ""               # the textbook formulas in words [book]
    check: dict = field(default_factory=dict)   # Check-sheet formula templates (see
                                                # physics.circuits.base.Circuit.check)
    check_inputs: tuple[str, ...] = ()           # extra Check input columns, e.g. diode_drop_v
    check_hint: str = ""             # a bold line under the Check sheet's notes, or ""
    waveform_text: str = ""          # what the waveform chart shows, or "" (three cycles)


@dataclass
class Report:
    name: str                        # file-name stem, e.g. "bike-light"
    title: str                       # user text: escape it in HTML, never a formula in XLSX
    circuit: str                     # a name of sweep.physics.CIRCUITS
    circuit_text: CircuitText        # what to say about it
    timer_name: str                  # e.g. "generic bipolar 555"
    ideal: bool                      # --ideal run
    main_output: str | None          # "frequency_hz", "pulse_width_s", "timeout_s"; "supply_current_a" for a latch
    part_columns: list[str]          # design part columns, e.g. ["ra_ohm", "rb_ohm", "c_f"]
    summary: list[tuple[str, str]]   # (label, text) lines: the pick, margins, yield, verdict
    cautions: list[str]              # safety and model cautions, shown on Summary and Notes
    points: pd.DataFrame             # design x condition rows (capped), machine columns
    points_total: int                # rows in the full sweep
    points_note: str                 # what Points holds and where the rest is
    designs: pd.DataFrame            # one row per design, ranked (rank 1 first)
    parts: pd.DataFrame              # bill of materials of the top designs: rank, design, ref, value_text,
                                     # value (SI), unit, rkm, series, tolerance, technology, rating,
                                     # note, role, quantity (sweep.bom.PARTS_COLUMNS)
    check: pd.DataFrame              # top designs: rank, design, part columns, vcc_v, control_voltage_v,
                                     # diode_drop_v, ideal_<main>, real_<main> (see writers.workbook)
    spec: list[SpecRow]
    study_rows: list[tuple[str, str, str, str]]   # (section, key, value as TOML text, meaning)
    notes: list[tuple[str, str]]     # (topic, text) for the Notes sheet: model, assumptions, sources
    run_info: dict = field(default_factory=dict)  # version, seed, digest, timings
    mc_samples: pd.DataFrame | None = None        # the pick's Monte Carlo builds: main output per
                                                  # build and condition (column 'value')
    temperature_curves: pd.DataFrame | None = None  # top designs: rank, vcc_v, temperature_c, value
    verdicts: dict[str, str] = field(default_factory=dict)  # verdict word -> what it means
    waveform: object | None = None   # sweep.waveform.Trace of the pick, or None (a latch)
    grades: pd.DataFrame | None = None   # part grades as design axes: the best design of each
                                         # grade, cheapest first (reporting.grade_table), else None
