"""Terminal output: progress bar, tables, the estimate. Presentation only."""
from __future__ import annotations

import contextlib
import sys

from rich.console import Console
from rich.markup import escape as _markup_escape
from rich.table import Table

from ..errors import printable
from ..variables import REFS, eng


def escape(text: str) -> str:
    """User text for the terminal: control characters and escape sequences shown as escapes,
    rich markup taken literally."""
    return _markup_escape(printable(text))

err = Console(stderr=True)
out = Console() if sys.stdout.isatty() else Console(width=120)   # pipes and logs get room


@contextlib.contextmanager
def progress_bar(total: int, quiet: bool, est=None):
    """A progress bar with rate and time left on stderr; silent when quiet or not a terminal."""
    if quiet:
        yield None
        return
    from rich.progress import (BarColumn, MofNCompleteColumn, Progress, ProgressColumn, TextColumn,
                               TimeRemainingColumn)

    class Rate(ProgressColumn):
        def render(self, task):
            return f"{task.speed:,.0f} {task.fields['unit']}/s" if task.speed else ""

    with Progress(TextColumn("{task.description:<11}"), BarColumn(), MofNCompleteColumn(),
                  TextColumn("{task.fields[unit]}"), Rate(), TextColumn("left"),
                  TimeRemainingColumn(), console=err, transient=True) as p:
        tasks = {"sweep": p.add_task("sweep", total=total, unit="points")}

        def advance(n: int, stage: str = "sweep", total: int | None = None):
            if stage not in tasks:
                tasks[stage] = p.add_task(stage, total=total, unit="designs")
            p.advance(tasks[stage], n)
        yield advance


def top_table(res, n: int = 5, table: bool = True) -> None:
    st, d = res.study, res.designs
    main = res.main_outputs
    t = Table(title=escape(f"{st.title}: best {min(n, len(d))} of {len(d):,} designs"), title_justify="left")
    t.add_column("rank", justify="right")
    for a in st.design:
        t.add_column(REFS.get(a.key, a.key), justify="right")
    for m in main:
        t.add_column(f"{m.split('_')[0]} nom", justify="right")
    t.add_column("verdict")
    t.add_column("yield (95 % interval)", justify="right")
    t.add_column("I supply max", justify="right")
    t.add_column("flags")
    for _, r in d.head(n if table else 0).iterrows():
        cells = [str(r["rank"])] + [str(r.get("grade_label", "")) if a.key == "grade"
                                    else eng(r[a.column], a.column) for a in st.design]
        stalls = "stalls" if r.get("stalls_at") else "-"
        cells += [eng(r[f"{m}_nom"], m) if r[f"{m}_nom"] == r[f"{m}_nom"] else stalls for m in main]
        cells.append(str(r["verdict"]))
        cells.append(f"{r['yield'] * 100:.1f} % ({r['yield_lo'] * 100:.1f}-{r['yield_hi'] * 100:.1f})"
                     if r["yield"] == r["yield"] else "not sampled")
        cells.append(eng(r["supply_current_a_max"], "supply_current_a")
                     if r["supply_current_a_max"] == r["supply_current_a_max"] else stalls)
        cells.append(r["flags"] or "ok")
        t.add_row(*(escape(c) for c in cells))
    if table:
        out.print(t)
    verdicts = res.verdicts
    shown = sorted(set(d.head(n if table else 1)["verdict"]) | {res.info.get("verdict", "pass")},
                   key=list(verdicts).index)
    out.print(escape("verdicts: " + "; ".join(f"{k} = {verdicts[k]}" for k in shown)))
    if not (d["verdict"] == "pass").any():
        out.print("[bold]No design meets the spec.[/bold] The table shows the best candidates; widen "
                  "the ranges or relax the spec.")
    elif not res.info.get("meets_spec", True):
        out.print(escape(f"The pick's verdict is '{res.info.get('verdict')}', not a pass. "
                         "See the Summary sheet."))
    out.print(escape("Timer spreads: " + res.info.get("spreads", "")))
    out.print(escape(f"wrote {res.files['workbook']}, {res.files['page']}, {res.files['points'].name}, "
              f"{res.files['designs'].name}, {res.files['bom'].name}, {res.files['waveform'].name}, "
              f"{res.files['record'].name} in {res.out_dir}"))


def print_estimate(st, est) -> None:
    from ..estimate import human_time
    out.print(escape(f"{st.path}: valid. circuit {st.circuit}, timer {st.timer.name}"))
    if st.grade_plan:       # part grades: each combination has its own sweep of values
        each = " + ".join(f"{g.n_designs:,}" for g in st.grade_plan[:8]) + \
            (" + ..." if len(st.grade_plan) > 8 else "")
        out.print(f"  designs     {st.n_designs:,}  ({len(st.grade_plan)} part grades: {each})")
    else:
        out.print(f"  designs     {st.n_designs:,}  ({' x '.join(f'{a.key} {len(a.values)}' for a in st.design) or 'one'})")
    out.print(f"  conditions  {st.n_conditions:,}  ({' x '.join(f'{a.key} {len(a.values)}' for a in st.conditions)})")
    out.print(f"  points      {est.points:,}")
    out.print(f"  evaluations {est.evaluations:,} (sweep, worst-case corners, {st.monte_carlo:,} Monte Carlo builds)")
    out.print(f"  memory      about {est.bytes / 2**20:,.0f} MiB")
    out.print(f"  time        {human_time(est.seconds)} on one process, writing the outputs included "
              f"({human_time(est.write_seconds)}; measured {est.rate:,.0f} evaluations/s here)")
    from ..estimate import over_limits
    reasons = over_limits(est)
    if reasons:
        out.print(escape("  run refuses this without --yes: " + "; ".join(reasons)))


def print_point(row: dict) -> None:
    t = Table(show_header=False)
    t.add_column("quantity")
    t.add_column("value", justify="right")
    from ..variables import VARIABLES
    for k, v in row.items():
        label = VARIABLES[k].header if k in VARIABLES else k
        if isinstance(v, float):
            text = eng(v, k)
        else:
            text = str(v) if v != "" else "none"
        t.add_row(escape(label), escape(text))
    out.print(t)
