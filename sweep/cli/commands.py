"""The commands: run, point, check, new. Thin: parse, call the library, print."""
from __future__ import annotations

import json
import math
import sys
from pathlib import Path
from typing import Annotated, Optional

import typer

from .app import app
from ..errors import InputError

StudyArg = Annotated[Path, typer.Argument(help="Study file (.toml) or a timer-sweep workbook (.xlsx) "
                                               "whose Study sheet is read back.",
                                          show_default=False)]
Ideal = Annotated[bool, typer.Option("--ideal", help="Drop every non-ideality: figures equal the "
                                                     "textbook formulas.")]
Quiet = Annotated[bool, typer.Option("--quiet", "-q", help="No progress bar or table.")]


def _no_type_on_flags() -> None:
    """Help lists a flag (--ideal, --quiet, --help...) without a value type: it takes no value,
    so the framework's "<bool>" beside it misleads. Options with a value keep their type.
    (A typer without this hook is left as it is.)"""
    from typer.core import TyperOption
    shown = getattr(TyperOption, "display_type_rich", None)
    if shown is None or getattr(shown, "_flags_plain", False):
        return

    def display_type_rich(self, ctx):
        return None if getattr(self, "is_flag", False) else shown(self, ctx)
    display_type_rich._flags_plain = True
    TyperOption.display_type_rich = display_type_rich


_no_type_on_flags()


def _err(console_text: str) -> None:
    print(console_text, file=sys.stderr)


@app.command()
def run(study: StudyArg,
        out: Annotated[Optional[str], typer.Option("--out", "-o", help="Output folder "
                                                   "(default: outputs/<study name>/)")] = None,
        ideal: Ideal = False,
        all_points: Annotated[bool, typer.Option("--all-points", help="Stream every point to "
                                                 "points.parquet, however many.")] = False,
        workers: Annotated[int, typer.Option("--workers", "-w", min=1, max=256,
                                             help="Local worker processes.")] = 1,
        scheduler: Annotated[Optional[str], typer.Option("--scheduler", help="Address of a running "
                                                         "Dask scheduler, e.g. tcp://scheduler-host:8786.")] = None,
        yes: Annotated[bool, typer.Option("--yes", "-y", help="Run even when the estimate exceeds "
                                          "the size guard.")] = False,
        quiet: Quiet = False):
    """Sweep a study and write the workbook, chart page, parquet tables and run record."""
    from ..study import load_study
    from ..estimate import clearly_small, estimate, guard
    from ..pipeline import run_study
    from .show import progress_bar, top_table

    from .app import STOPPED

    if out is not None and not out.strip():
        raise InputError("", "--out", "is empty; give a folder (--out . for the current one)")
    if scheduler:
        from ..parallel import check_address
        check_address(scheduler)
    st = load_study(study)
    out_dir = Path(out) if out is not None else Path("outputs") / st.name
    if not yes and not clearly_small(st):
        guard(st, estimate(st))
    mapper = None
    if scheduler:
        from ..parallel import dask_mapper
        mapper = dask_mapper(scheduler)      # connects now: a refusal writes nothing
    elif workers > 1:
        from ..parallel import process_mapper
        mapper = process_mapper(workers)
    try:
        with progress_bar(st.n_points, quiet or not sys.stderr.isatty()) as advance:
            res = run_study(st, out_dir, ideal=ideal, all_points=all_points, progress=advance,
                            mapper=mapper, on_commit=lambda: STOPPED.update(written=True),
                            stop_requested=lambda: STOPPED["signal"] is not None)
    finally:
        if hasattr(mapper, "close"):
            mapper.close()
    top_table(res, table=not quiet)


@app.command()
def check(study: StudyArg):
    """Validate a study; print how many points it has and an estimate of memory and time."""
    from ..study import load_study
    from ..estimate import estimate
    from .show import print_estimate

    st = load_study(study)
    print_estimate(st, estimate(st))


@app.command()
def new(circuit: Annotated[str, typer.Argument(help="astable | astable-diode | astable-symmetric | "
                                                    "monostable | missing-pulse | bistable")],
        out: Annotated[Optional[Path], typer.Option("--out", "-o", help="File to write "
                                                    "(default: <circuit>.toml)")] = None,
        force: Annotated[bool, typer.Option("--force", help="Overwrite an existing file.")] = False,
        frequency: Annotated[Optional[str], typer.Option(help="Target frequency, e.g. 2Hz: the "
                             "[design] ranges are worked out from the spec")] = None,
        pulse_width: Annotated[Optional[str], typer.Option(help="Target pulse (monostable), "
                               "e.g. 30s")] = None,
        tolerance: Annotated[str, typer.Option(help="Tolerance of the target, e.g. 5%")] = "10%",
        duty_min: Annotated[Optional[str], typer.Option(help="Lowest duty, e.g. 0.15")] = None,
        duty_max: Annotated[Optional[str], typer.Option(help="Highest duty, e.g. 0.35")] = None,
        vcc: Annotated[Optional[str], typer.Option(help="Supply range, e.g. 6..8.4 (default: "
                       "the timer's typical supply +-10 %)")] = None,
        temperature: Annotated[Optional[str], typer.Option(help="Ambient range, e.g. -10..40 "
                               "(default 0..50)")] = None,
        series: Annotated[str, typer.Option(help="IEC 60063 series of the timing resistors")] = "E24",
        capacitor_series: Annotated[str, typer.Option(help="IEC 60063 series of the capacitor")] = "E6",
        capacitor: Annotated[str, typer.Option(help="Capacitor technology: C0G | X7R | X5R | Y5V | "
                             "polypropylene | polyester | electrolytic | tantalum")] = "X7R",
        timer: Annotated[str, typer.Option(help="bipolar | cmos | path to a timer-model TOML "
                         "file")] = "cmos",
        supply: Annotated[str, typer.Option(help="regulated | battery | mains-derived")] = "regulated",
        capacitors: Annotated[Optional[int], typer.Option(help="Capacitor values to keep (those "
                              "whose resistors sit nearest the middle of the usable range; default "
                              "2 for astable and astable-diode, else 1)")] = None):
    """Write a commented study for a circuit: a starter to edit, or, with --frequency or
    --pulse-width, [design] ranges worked out from the spec."""
    from ..starters import spec_study_text, starter_text
    from ..writers.atomic import write_text_atomic

    path = out or Path(f"{circuit}.toml")
    if path.exists() and not force:
        raise InputError(str(path), "--out", "already exists; use --force to overwrite it")
    if frequency is None and pulse_width is None:
        text = starter_text(circuit)
    else:
        text = spec_study_text(circuit, frequency=frequency, pulse_width=pulse_width,
                               tolerance=tolerance, duty_min=duty_min, duty_max=duty_max, vcc=vcc,
                               temperature=temperature, series=series,
                               capacitor_series=capacitor_series, capacitor=capacitor, timer=timer,
                               supply=supply, capacitors=capacitors)
    write_text_atomic(path, text)
    typer.echo(f"wrote {path}; edit it, then: timer-sweep check {path} && timer-sweep run {path}")


@app.command()
def point(
    circuit: Annotated[str, typer.Option(help="astable | astable-diode | astable-symmetric | monostable | missing-pulse | bistable")] = "astable",
    timer: Annotated[str, typer.Option(help="bipolar | cmos | path to a timer-model TOML file")] = "bipolar",
    ra: Annotated[Optional[str], typer.Option(help="RA, e.g. 10k or 4K7")] = None,
    rb: Annotated[Optional[str], typer.Option(help="RB")] = None,
    r: Annotated[Optional[str], typer.Option(help="R (monostable, symmetric astable)")] = None,
    c: Annotated[Optional[str], typer.Option(help="C, e.g. 100n or 4n7")] = None,
    vcc: Annotated[Optional[str], typer.Option(help="Supply (default: the timer's typical supply)")] = None,
    temperature: Annotated[Optional[str], typer.Option(help="Ambient °C (default: 25)")] = None,
    control_voltage: Annotated[Optional[str], typer.Option(help="Control-pin voltage (default: divider)")] = None,
    input_period: Annotated[Optional[str], typer.Option(help="Input pulse period (missing-pulse)")] = None,
    resistor_tolerance: Annotated[Optional[str], typer.Option()] = None,
    resistor_tempco: Annotated[Optional[str], typer.Option(help="e.g. 100ppm")] = None,
    resistor_power: Annotated[Optional[str], typer.Option(help="e.g. 0.25W")] = None,
    capacitor: Annotated[Optional[str], typer.Option(help="C0G | X7R | X5R | Y5V | polypropylene | polyester | electrolytic | tantalum")] = None,
    capacitor_tolerance: Annotated[Optional[str], typer.Option()] = None,
    capacitor_voltage: Annotated[Optional[str], typer.Option(help="Rated voltage, e.g. 16V")] = None,
    stray_capacitance: Annotated[Optional[str], typer.Option(help="(default: 5p)")] = None,
    diode: Annotated[Optional[str], typer.Option(help="silicon | schottky: the Shockley diode of astable-diode (default: silicon)")] = None,
    diode_saturation_current: Annotated[Optional[str], typer.Option(help="Saturation current at 25 °C, e.g. 2.5n")] = None,
    diode_ideality: Annotated[Optional[str], typer.Option(help="Ideality factor, e.g. 1.75")] = None,
    diode_drop: Annotated[Optional[str], typer.Option(help="A fixed drop instead of the Shockley diode, e.g. 0.7V")] = None,
    dc_bias_loss: Annotated[Optional[str], typer.Option()] = None,
    discharge_resistor: Annotated[Optional[str], typer.Option(help="Monostable: resistor between the discharge pin and C (default: none)")] = None,
    load: Annotated[Optional[str], typer.Option(help="Load resistance, e.g. 1k (default: none)")] = None,
    load_to: Annotated[Optional[str], typer.Option(help="ground | supply")] = None,
    load_forward_voltage: Annotated[Optional[str], typer.Option(help="LED drop in series with the load")] = None,
    load_kind: Annotated[Optional[str], typer.Option(help="resistive | led | relay | inductive | mains-switching")] = None,
    ideal: Ideal = False,
    as_json: Annotated[bool, typer.Option("--json", help="Print one JSON object.")] = False,
):
    """Evaluate one design at one condition with the realistic (or --ideal) model."""
    from ..single import evaluate_point
    from .show import print_point

    opts = {k: v for k, v in locals().items()
            if k not in ("ideal", "as_json", "evaluate_point", "print_point") and v is not None}
    row = evaluate_point(opts, ideal=ideal)
    if as_json:
        typer.echo(json.dumps({k: (None if isinstance(v, float) and not math.isfinite(v) else v)
                               for k, v in row.items()}))
    else:
        print_point(row)
