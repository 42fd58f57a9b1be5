"""Estimates of work, memory and time before a run, and the guard that refuses a huge sweep."""
from __future__ import annotations

import dataclasses
import math
import time
from dataclasses import dataclass

import numpy as np

from .analysis import Options, analyse_block, summary_outputs, varied_parts
from .spreads import extra_spreads
from .case import axis_values
from .engine import DEFAULT_CHUNK, evaluate_block
from .errors import InputError
from .physics import kernel
from .limits import MC_DESIGNS, PARQUET_POINTS, WORKBOOK_DESIGNS, WORKBOOK_POINTS
from .study import Study

LIMIT_POINTS = 200_000_000       # refused without --yes
LIMIT_EVALUATIONS = 20_000_000_000
LIMIT_SECONDS = 1800.0
LIMIT_BYTES = 8 * 2**30


@dataclass(frozen=True)
class Estimate:
    points: int
    evaluations: int          # sweep + worst-case corners + Monte Carlo (at most MC_DESIGNS designs)
    bytes: int                # peak memory, roughly
    seconds: float            # one process: the analysis and writing every output
    rate: float               # evaluations per second measured here
    write_seconds: float = 0.0   # of which writing the workbook, page and tables


def evaluations(study: Study) -> int:
    """Model evaluations of a run: the sweep, every worst-case corner, the elasticities and the
    Monte Carlo of at most MC_DESIGNS designs (exact integers: no overflow)."""
    nd, nc = study.n_designs, study.n_conditions
    corners = 2 ** (len(varied_parts(study)) + len(extra_spreads(study, False)))
    return (nd * nc * (1 + corners) + nd * (1 + len(varied_parts(study)))
            + min(nd, MC_DESIGNS) * nc * study.monte_carlo)


#: a study this small cannot reach any limit of the size guard, so `run` does not time it
#: (under 1e6 points and 2e8 evaluations: minutes at the slowest rate measured, 5e5 per second)
SMALL_POINTS, SMALL_EVALUATIONS = 1_000_000, 200_000_000


def clearly_small(study: Study) -> bool:
    """True when the study is far inside every limit of the size guard, without timing it."""
    return study.n_points <= SMALL_POINTS and evaluations(study) <= SMALL_EVALUATIONS


def estimate(study: Study, sample: int = 20_000) -> Estimate:
    nd, nc = study.n_designs, study.n_conditions
    evals = evaluations(study)
    # measure this machine on a slice of the study itself: one block of the first pass (sweep,
    # corners, elasticities) and one Monte Carlo evaluation of the same size. The slice has at
    # most `sample` conditions, so nothing here grows with the sweep before the guard speaks.
    full_nc, study = nc, _thinned(study.grade_plan[0].study if study.grade_plan else study, sample)
    nc = study.n_conditions
    k = max(1, min(nd, study.n_designs, sample // max(nc, 1)))
    analyse_block(study, 0, 1, Options(monte_carlo=0))         # warm up
    t0 = time.perf_counter()
    sample_rows, _ = analyse_block(study, 0, k, Options(monte_carlo=0))
    reach = float(sample_rows["reach"].mean()) if len(sample_rows) else 1.0
    per_point = max(time.perf_counter() - t0, 1e-6) / (k * nc)
    cond = axis_values(study.conditions, np.arange(min(nc, sample)))
    design = axis_values(study.design, np.arange(k))
    t0 = time.perf_counter()
    evaluate_block(study.case, design, cond)
    rate = k * len(next(iter(cond.values()))) / max(time.perf_counter() - t0, 1e-6)
    # the Monte Carlo runs only on designs whose worst case can still meet the spec: the share
    # of the sample that can
    write = write_seconds(study, k, full_nc)
    nc = full_nc
    seconds = nd * nc * per_point + min(nd * reach, MC_DESIGNS) * nc * study.monte_carlo / rate
    seconds += write
    # memory: the libraries, a few blocks of arrays, the ranking keys of every design, and the
    # best designs' full rows kept for the workbook [measured: 685 MiB at 1e8 points]
    ncol = 7 * len(summary_outputs(study)) + 20
    mem = (250 * 2**20 + max(DEFAULT_CHUNK, nc) * 16 * 80 * 8 + nd * 10 * 8 * 3
           + min(nd, WORKBOOK_DESIGNS) * ncol * 8 * 4)
    case = study.case
    if kernel.wanted(case.circuit, case.timer, case.parts, case.load, case.ideal, nd * nc):
        mem += KERNEL_BYTES
    return Estimate(nd * nc, evals, int(mem), seconds, rate, write)


#: numba and the kernel's cached stages, loaded where the kernel runs the sweep [measured: 61 MiB]
KERNEL_BYTES = 64 * 2**20
PAGE_SECONDS = 0.15     # the chart page: plotly's script and six charts [measured: 0.13-0.18 s
                        # for bike-light on a loaded 2-core machine]
PAGE_DESIGN_SECONDS = 20e-6   # per design drawn on the page (up to its cap) [measured]


def write_seconds(study: Study, k: int, n_conditions: int | None = None) -> float:
    """Time to write the outputs: the workbook's cells at the rate measured here on a sample of
    this study's own point rows, plus the chart page and the parquet tables. n_conditions: the
    full study's count when `study` is a thinned sample."""
    from .writers.page import MAX_DESIGNS
    from .writers.workbook import DESIGNS_ROWS, cell_seconds
    nd, nc = study.n_designs, n_conditions or study.n_conditions
    _, pts = analyse_block(study, 0, max(1, min(k, 2000 // max(study.n_conditions, 1))), Options(monte_carlo=0,
                                                                                keep_points=True))
    cell_s = cell_seconds(pts)
    if cell_s is None:
        # the sample could not be written (a full disk, say): estimate with a typical rate and
        # let the run itself report the disk against the output folder
        cell_s = FALLBACK_CELL_SECONDS
    n_cols = pts.shape[1]
    d_cols = 7 * len(summary_outputs(study)) + 25
    cells = (min(min(nd, max(1, study.top)) * nc, WORKBOOK_POINTS) * n_cols
             + min(nd, DESIGNS_ROWS) * d_cols)      # Points: the top designs only; Designs: capped
    parquet = (min(nd * nc, PARQUET_POINTS) * n_cols + nd * d_cols) * 0.05 * cell_s  # [measured:
    # parquet takes about a twentieth of a workbook cell's time per value]
    return cells * cell_s + parquet + PAGE_SECONDS + min(nd, MAX_DESIGNS) * PAGE_DESIGN_SECONDS


#: seconds per workbook cell when no sample can be written [measured: about 2 us on a current
#: laptop core]
FALLBACK_CELL_SECONDS = 2e-6


def _thinned(study: Study, most: int) -> Study:
    """The study with its condition axes thinned (every other value, ends kept) until it has at
    most `most` conditions: a sample to time, never a sweep to run."""
    axes = list(study.conditions)
    while math.prod(len(a.values) for a in axes) > most:
        i = max(range(len(axes)), key=lambda j: len(axes[j].values))
        v = axes[i].values
        keep = np.unique(np.r_[np.arange(0, len(v), 2), len(v) - 1])
        axes[i] = dataclasses.replace(axes[i], values=v[keep])
    return dataclasses.replace(study, conditions=tuple(axes))


def human_time(s: float) -> str:
    if s < 1:
        return "under a second"
    if s < 120:
        return f"about {s:.0f} s"
    if s < 7200:
        return f"about {s / 60:.0f} min"
    return f"about {s / 3600:.1f} h"


def guard(study: Study, est: Estimate) -> None:
    """Refuse a run whose estimate exceeds a limit, saying why and how to narrow it."""
    reasons = over_limits(est)
    if reasons:
        biggest = max(study.axes, key=lambda a: len(a.values))
        raise InputError(study.path, "", "sweep too large: " + "; ".join(reasons) +
                         f". Narrow it (the largest axis is '{biggest.key}' with {len(biggest.values):,} "
                         "values: use a coarser series or fewer steps, or lower [analysis] monte_carlo), "
                         "spread it with --workers or --scheduler, or pass --yes to run it anyway.")


def over_limits(est: Estimate) -> list[str]:
    """The limits of the size guard that this estimate exceeds, in words."""
    reasons = []
    if est.points > LIMIT_POINTS:
        reasons.append(f"{est.points:,} points (limit {LIMIT_POINTS:,})")
    if est.evaluations > LIMIT_EVALUATIONS:
        reasons.append(f"{est.evaluations:,} model evaluations (limit {LIMIT_EVALUATIONS:,})")
    if est.bytes > LIMIT_BYTES:
        reasons.append(f"about {est.bytes / 2**30:.1f} GiB of memory (limit {LIMIT_BYTES / 2**30:.0f} GiB)")
    if est.seconds > LIMIT_SECONDS:
        reasons.append(f"{human_time(est.seconds)} on this machine (limit {LIMIT_SECONDS / 60:.0f} min)")
    return reasons
