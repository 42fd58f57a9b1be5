"""Per-design figures: nominal, range over conditions, worst case, Monte Carlo yield, Taguchi
signal-to-noise ratio, elasticities; then ranking.

`analyse_block` is pure: (study, design range, options) -> one DataFrame row per design and,
if asked, the block's points. Blocks are independent, so a serial run, local processes and a
Dask cluster give identical results; the Monte Carlo uses common random numbers drawn from the
study's seed (the same build deviations for every design), so no result depends on how the
designs were split into blocks.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import pandas as pd

from .case import axis_values
from .engine import (ANALYSIS_CHUNK, TIMING, Variation, can_fold, evaluate_block, flag_text, fold_block,
                     spec_fail)
from .folds import Extremes, Moments
from .physics import FLAG_BITS, REGISTRY
from .physics.compiled.steps import BAND_FREQUENCY, BAND_MARGIN, BAND_NONE, BAND_TIMING
from .sobol import sobol_points
from . import grades, values as qv
from .spreads import (build_spreads, draw_names, tolerance_of, varied_parts,
                      worst_case_corners)
from .study import Study
from .variables import AXES

SPEC_BIT = np.uint32(FLAG_BITS["spec-miss"])
LIMIT_BITS = np.uint32(sum(b for k, b in FLAG_BITS.items() if k != "spec-miss"))
STALL_BIT = np.uint32(FLAG_BITS["timing-stalls"])
#: relative step of the elasticities' forward difference from the nominal point: its error is
#: about half the step times the curvature of ln y in ln x (under 1e-6 for the astable), and the
#: rounding of ln y over it about 1e-10 [derived]
SENS_STEP = 1e-6
Z95 = 1.959963984540054       # two-sided 95 % normal quantile [book: normal tables]
YIELD_FLOOR = 0.95        # without [spec] yield, a yield interval below this is "low yield" [cp]


def main_outputs(circuit: str) -> list[str]:
    """The output columns that say what the circuit does; the first is the one ranked on."""
    return list(REGISTRY[circuit].main_outputs)


def chart_output(circuit: str) -> str:
    """The output the charts follow: the main timing, or the supply current of a latch."""
    main = main_outputs(circuit)
    return main[0] if main else "supply_current_a"


def summary_outputs(study: Study) -> list[str]:
    circ = REGISTRY[study.circuit]
    cols = (list(circ.main_outputs) + list(circ.after_main) + [s.column for s in study.spec]
            + ["supply_current_a"])
    if circ.has_idle:
        cols.append("idle_current_a")
    if study.battery_capacity_ah is not None:
        cols.append("battery_life_h")
    cols += ["output_current_a", "junction_temp_c"]
    return list(dict.fromkeys(cols))


def timer_bands(study: Study, which: str = "typ") -> tuple[float, float, float]:
    """(initial accuracy, drift per K, supply sensitivity per V) of the main timing, typical
    (which="typ") or maximum (which="max"), from the timer-model file [ds-bip], [ds-cmos]."""
    t = study.timer
    kind = REGISTRY[study.circuit].timer_band or "astable"
    m = "_max" if which == "max" else ""
    return (getattr(t, f"accuracy_{kind}{m}"), getattr(t, f"drift_{kind}{m}_ppm_per_k") * 1e-6,
            getattr(t, f"supply_sensitivity_{kind}{m}_per_v"))


TIMER_TERMS = ("accuracy", "drift", "supply")


def mc_draws(study: Study, n: int) -> dict[str, np.ndarray]:
    """Common deviations of n builds from scrambled Sobol points (`sobol.sobol_points`, seeded by
    the study: the same points as scipy.stats.qmc.Sobol without importing scipy.stats), one
    dimension per part and per timer error term, the same for every design and independent of
    how designs are split into blocks.

    Parts: normal with the tolerance as 3 sigma, clipped at the tolerance (returned in [-1, 1],
    the caller multiplies by the tolerance), or uniform over the tolerance. The timer's three
    terms: standard normal (the caller scales by its sigma and clips at the maximum)."""
    names = varied_parts(study) + list(TIMER_TERMS) + draw_names(study)
    if n <= 0:
        return {k: np.zeros(0) for k in names}
    u = sobol_points(n, len(names), study.seed).T    # a count not a power of two is fine here
    u = np.clip(u, 1e-12, 1 - 1e-12)
    from .normal import ndtri     # the standard normal's inverse distribution function
    z = ndtri(u)
    out = {}
    for i, k in enumerate(names):
        if k not in varied_parts(study):     # timer terms and the other spreads: the caller scales
            out[k] = z[i]
        elif study.distribution == "uniform":
            out[k] = 2.0 * u[i] - 1.0
        else:
            out[k] = np.clip(z[i] / 3.0, -1.0, 1.0)
    return out


def timer_sigma(study: Study) -> tuple[float, float, float]:
    """Sigma of each timer error term: the typical figure divided by [analysis] typical_sigma."""
    return tuple(x / study.typical_sigma for x in timer_bands(study, "typ"))


def spread_reading(study: Study) -> str:
    """One line saying how the Monte Carlo and the worst case read the timer's spreads."""
    k = study.typical_sigma
    sig = "one sigma" if k == 1 else f"{k:g} sigma"
    dist = ("normal with the tolerance as 3 sigma, clipped at the tolerance"
            if study.distribution == "normal" else "uniform over the tolerance")
    return (f"a typical datasheet figure of the timer is read as {sig} ([analysis] typical_sigma "
            f"= {k:g}); Monte Carlo builds draw them normal and clip at the maximum, the worst case "
            f"uses the maximum (3 x typical where none is published). Part tolerances: {dist}.")


@dataclass(frozen=True)
class Options:
    ideal: bool = False
    monte_carlo: int | None = None       # None: the study's figure
    keep_points: bool = False            # return the block's points table
    mc_chunk: int = 1 << 15              # evaluations per Monte Carlo block (cache-sized: fastest)


def analyse_block(study: Study, start: int, stop: int, opt: Options = Options()
                  ) -> tuple[pd.DataFrame, pd.DataFrame | None]:
    """Figures for designs [start, stop): one row each, and the points if opt.keep_points."""
    ideal = opt.ideal
    d_idx = np.arange(start, stop)
    design = axis_values(study.design, d_idx)
    c_idx = np.arange(study.n_conditions)
    cond = axis_values(study.conditions, c_idx)
    outs = summary_outputs(study)
    nd = len(d_idx)
    row: dict[str, np.ndarray] = {"design": d_idx + 1}
    for a in study.design:
        row[a.column] = design[a.key]

    # 1. nominal parts over every condition
    sweep = evaluate_block(study.case, design, cond, ideal=ideal)
    mask = np.bitwise_or.reduce(sweep["flag_mask"][:, 0, :], axis=1)
    # 2. nominal parts at the nominal condition
    at_nominal = {k: np.array([v]) for k, v in study.case.nominal.items()}
    nom = evaluate_block(study.case, design, at_nominal, ideal=ideal)
    for o in outs:
        v = sweep[o][:, 0, :]
        row[f"{o}_nom"] = nom[o][:, 0, 0]
        with np.errstate(all="ignore"):
            row[f"{o}_min"] = np.where(np.isnan(v).any(1), np.nan, np.nanmin(np.where(np.isnan(v), np.inf, v), 1))
            row[f"{o}_max"] = np.where(np.isnan(v).any(1), np.nan, np.nanmax(np.where(np.isnan(v), -np.inf, v), 1))
    # 3. worst case: every corner of every spread (spreads.py) x every condition, plus the
    # timer's drift band
    parts = varied_parts(study)
    corners = worst_case_corners(study, cond, ideal)
    if folds_corners(study, ideal) and can_fold(study.case, design, ideal):
        wc_min, wc_max, first_stall = _folded_worst_case(study, design, cond, corners, outs,
                                                         ideal)
    else:
        wc_min, wc_max, first_stall = _worst_case(study, design, cond, corners, outs, ideal)
    for o in outs:
        row[f"{o}_wc_min"], row[f"{o}_wc_max"] = wc_min[o], wc_max[o]
    # 4. elasticities of the main output at the nominal condition: a forward difference from
    # the nominal point already evaluated (step 2), one step per part [derived]
    main = main_outputs(study.circuit)[:1]
    if main and parts:
        m = main[0]
        var = Variation({p: np.array([1 + SENS_STEP if q == p else 1.0 for q in parts])[None, :, None]
                         for p in parts})
        ev = evaluate_block(study.case, design, at_nominal, ideal=ideal, variation=var,
                            with_spec=False)[m][:, :, 0]
        with np.errstate(all="ignore"):
            base = np.log(nom[m][:, 0, 0])
            for i, p in enumerate(parts):
                row[f"sens_{p}"] = (np.log(ev[:, i]) - base) / math.log1p(SENS_STEP)
    # 5. screening for the Monte Carlo: a design whose worst case lies wholly outside a spec
    # limit cannot yield a build that meets it [derived]
    reach = np.ones(nd, dtype=bool)
    for s in study.spec:
        reach &= ~((row[f"{s.column}_wc_max"] < s.lo) | (row[f"{s.column}_wc_min"] > s.hi))
    row["reach"] = reach
    row["screened"] = np.where(reach, "", "worst case entirely outside the spec")
    row["yield"] = np.where(reach, np.nan, 0.0)
    nom_fail = spec_fail(study.case, nom)[:, 0, 0] if study.spec else np.zeros(nd, dtype=bool)
    limits = (mask & LIMIT_BITS) != 0
    row["feasible"] = ~limits & ~nom_fail
    row["flag_mask"] = mask
    row["wc_margin"] = _wc_margin(study, row)
    row["stalls_at"] = stall_text(study, cond, corners, sweep["flag_mask"][:, 0, :], first_stall)
    df = pd.DataFrame(row)
    df["series_need"], df["distinct_values"] = plainness(study, df)
    df["uncommon"] = uncommon_parts(study, df)
    df["flags"] = flag_text(mask)
    points = points_frame(study, d_idx, c_idx, design, cond, sweep) if opt.keep_points else None
    return df, points


#: circuits whose worst case the compiled kernel folds (every corner evaluated in full, each
#: design's extremes taken tile by tile) where it runs the sweep; the others keep the factored
#: corners on the numpy model, which evaluate each step once per combination of the spreads it
#: depends on (measured with tests/benchmarks/corners.py)
FOLDED_CORNERS = ("astable", "monostable", "missing-pulse")


#: points per analysis block (each with its corners counted) where the kernel folds the
#: corners: the grid of corners is never written, so a block may be big enough to spread the
#: kernel's cost per call (measured with tests/benchmarks/corners.py: on the astable, 616
#: designs per call ran 2.5x the factored corners' speed, 77 designs 0.6x)
FOLDED_CHUNK = 16 * ANALYSIS_CHUNK


def folds_corners(study: Study, ideal: bool) -> bool:
    """Whether analyse_block folds this study's worst case inside the compiled kernel (with part
    grades: every grade's sub-study, each of which counts only its own points)."""
    if study.grade_plan:
        return all(folds_corners(g.study, ideal) for g in study.grade_plan)
    return study.circuit in FOLDED_CORNERS and can_fold(study.case, {}, ideal)


def block_points(study: Study, ideal: bool) -> int:
    """Points per analysis block (each point with its worst-case corners counted)."""
    return FOLDED_CHUNK if folds_corners(study, ideal) else ANALYSIS_CHUNK


def _widening(o: str) -> int:
    """How the worst case widens output o by the timer's band (physics.compiled.steps)."""
    if o in TIMING:
        return BAND_TIMING
    if o == "frequency_hz":
        return BAND_FREQUENCY
    return BAND_MARGIN if o == "timeout_margin_s" else BAND_NONE


def _worst_case(study, design, cond, corners, outs, ideal):
    """Each output's minimum and maximum over every corner and condition, widened by the timer's
    band (a timing x (1 -/+ band), a frequency / (1 +/- band), a timeout's margin -/+ the timeout
    x band), NaN where any is NaN; and each design's first stalling corner x condition (corner
    * conditions + condition, -1 for none). The corners factored on the numpy model."""
    wc = evaluate_block(study.case, design, cond, ideal=ideal, variation=corners.variation,
                        with_spec=False)
    band = _band(study, cond, ideal)
    band = np.reshape(band, (1,) * (wc["flag_mask"].ndim - 1) + (-1,))
    lo_of, hi_of = {}, {}
    for o in outs:
        v = _unrepeated(wc[o])
        lo, hi = v, v
        w = _widening(o)
        if w == BAND_TIMING:
            lo, hi = v * (1 - band), v * (1 + band)
        elif w == BAND_FREQUENCY:
            lo, hi = v / (1 + band), v / (1 - band)
        elif w == BAND_MARGIN:        # the timeout's band, less the input period
            lo, hi = v - _unrepeated(wc["timeout_s"]) * band, v + _unrepeated(wc["timeout_s"]) * band
        lo_of[o], hi_of[o] = _reduce(lo, np.min), _reduce(hi, np.max)
    nd = len(lo_of[outs[0]])
    mask = wc["flag_mask"]          # every corner written out: corner k is its C-order index
    full = (nd,) + corners.axes + mask.shape[-1:]
    cor = ((np.broadcast_to(mask, full) & STALL_BIT) != 0).reshape(nd, -1)
    return lo_of, hi_of, np.where(cor.any(1), np.argmax(cor, 1), -1)


def _folded_worst_case(study, design, cond, corners, outs, ideal):
    """_worst_case's figures, every corner evaluated in full by the compiled kernel and each
    design's extremes folded in tile by tile (engine.fold_block)."""
    names = list(outs)
    if "timeout_margin_s" in names and "timeout_s" not in names:
        names.append("timeout_s")
    nd = len(next(iter(design.values()))) if design else 1     # no timing parts: one design
    fold = Extremes(names, nd, band=np.atleast_1d(_band(study, cond, ideal)).ravel(),
                    widen=[_widening(o) for o in names],
                    partner=[names.index("timeout_s") if o == "timeout_margin_s" else 0
                             for o in names])
    fold_block(study.case, design, cond, fold, ideal=ideal, variation=corners.variation)
    return ({o: fold.minimum(i) for i, o in enumerate(outs)},
            {o: fold.maximum(i) for i, o in enumerate(outs)}, fold.stall)


def mc_columns(study: Study) -> list[str]:
    cols = ["design", "yield"]
    for o in summary_outputs(study):
        cols += [f"{o}_mc_mean", f"{o}_mc_std"]
    return cols + ["sn_db"]


def monte_carlo_block(study: Study, designs: np.ndarray, opt: Options = Options()) -> pd.DataFrame:
    """Monte Carlo figures of the given designs (1-based numbers): yield, mean and standard
    deviation of each summary output over builds x conditions, Taguchi S/N of the main output."""
    n_mc = study.monte_carlo if opt.monte_carlo is None else opt.monte_carlo
    outs = summary_outputs(study)
    design = axis_values(study.design, np.asarray(designs) - 1)
    cond = axis_values(study.conditions, np.arange(study.n_conditions))
    y, mean, std = _monte_carlo(study, design, cond, outs, n_mc, opt.ideal, opt.mc_chunk)
    row: dict[str, np.ndarray] = {"design": np.asarray(designs), "yield": y}
    for o in outs:
        row[f"{o}_mc_mean"], row[f"{o}_mc_std"] = mean[o], std[o]
    main = main_outputs(study.circuit)
    with np.errstate(all="ignore"):     # Taguchi nominal-the-best [book: Taguchi methods]
        row["sn_db"] = (10 * np.log10(mean[main[0]] ** 2 / std[main[0]] ** 2) if main
                        else np.full(len(designs), np.nan))
    return pd.DataFrame(row)


def _reduce(v: np.ndarray, fn) -> np.ndarray:
    """Reduce (designs, builds or spread axes..., conditions) over every axis but the first; NaN
    anywhere gives NaN."""
    return fn(_unrepeated(v), axis=tuple(range(1, v.ndim)))


def _unrepeated(v: np.ndarray) -> np.ndarray:
    """v without the repeats broadcasting made: length 1 on every axis after the first (the
    designs) where v only repeats one value (a stride of 0), so a minimum or maximum over it
    reads each value once."""
    v = np.asarray(v)
    return v[(slice(None),) + tuple(slice(0, 1) if (n > 1 and st == 0) else slice(None)
                                    for n, st in zip(v.shape[1:], v.strides[1:]))]


def _band(study: Study, cond: dict[str, np.ndarray], ideal: bool) -> np.ndarray | float:
    """Relative timing band at each condition: accuracy + drift |dT| + sensitivity |dV|, each at
    its maximum [ds-bip]."""
    if ideal:
        return 0.0
    acc, drift, sens = timer_bands(study, "max")
    vnom = next((a.nominal for a in study.conditions if a.key == "vcc"), study.timer.typical_v)
    t = cond.get("temperature", np.array([25.0]))
    v = cond.get("vcc", np.array([vnom]))
    return (acc + drift * np.abs(t - 25.0) + sens * np.abs(v - vnom))[None, None, :]


def mc_variation(study: Study, z: dict[str, np.ndarray], builds: slice,
                 cond: dict[str, np.ndarray] | None = None, ideal: bool = False) -> Variation:
    """The part multipliers, timer error terms and other spreads (spreads.py) of a slice of
    Monte Carlo builds at the conditions `cond`, shaped to broadcast against (designs, builds,
    conditions)."""
    sig = timer_sigma(study)
    top = timer_bands(study, "max")
    b = {k: v[builds][None, :, None] for k, v in z.items()}
    t = {k: np.clip(s * b[k], -m, m) for k, s, m in zip(TIMER_TERMS, sig, top)}
    part = {p: 1.0 + tolerance_of(study, p) * b[p] for p in varied_parts(study)}
    kw = {}
    if not ideal and cond is not None:
        extra, kw = build_spreads(study, z, builds, cond)
        for p, m in extra.items():
            part[p] = part[p] * m
    return Variation(part, accuracy=t["accuracy"], drift_per_k=t["drift"], supply_per_v=t["supply"],
                     **kw)


def _monte_carlo(study, design, cond, outs, n_mc, ideal, chunk):
    """Yield, mean and standard deviation over builds x conditions for each design."""
    z = mc_draws(study, n_mc)
    nd = len(next(iter(design.values()))) if design else 1   # no timing parts: one design
    nc = len(next(iter(cond.values())))
    if can_fold(study.case, design, ideal):
        ok, s1, s2, shift = _folded_monte_carlo(study, design, cond, outs, z, n_mc, ideal, nd, nc)
    else:
        ok, s1, s2, shift = _summed_monte_carlo(study, design, cond, outs, z, n_mc, ideal, nd, nc,
                                                chunk)
    n = n_mc * nc
    mean = {o: s1[o] / n + shift[o] for o in outs}
    std = {o: np.sqrt(np.maximum(s2[o] / n - (s1[o] / n) ** 2, 0.0) * n / max(n - 1, 1)) for o in outs}
    return ok / n_mc, mean, std


#: Monte Carlo evaluations per kernel call when the kernel folds the sums in (engine.fold_block):
#: only the inputs and the condition-level arrays scale with it, never the grid of outputs
#: [measured on tests/benchmarks/suite.py's Monte Carlo study: 14.3-15.7 M evaluations/s at
#: 2^20, 13.6-14.5 M at 2^18, 12.8-14.2 M at 2^22]
FOLD_CHUNK = 1 << 20


def _folded_monte_carlo(study, design, cond, outs, z, n_mc, ideal, nd, nc):
    """_summed_monte_carlo's counts and sums, folded inside the compiled kernel."""
    fold = Moments(list(outs), nd, spec=[(outs.index(s.column), s.lo, s.hi) for s in study.spec],
                   main=outs.index(main_outputs(study.circuit)[0]) if main_outputs(study.circuit)
                   else -1)
    b_step = max(1, FOLD_CHUNK // max(1, nd * nc))
    for b0 in range(0, n_mc, b_step):
        sl = slice(b0, min(n_mc, b0 + b_step))
        fold_block(study.case, design, cond, fold, ideal=ideal,
                   variation=mc_variation(study, z, sl, cond, ideal))
    return (fold.ok, dict(zip(outs, fold.s1)), dict(zip(outs, fold.s2)),
            dict(zip(outs, fold.shift)))


def _summed_monte_carlo(study, design, cond, outs, z, n_mc, ideal, nd, nc, chunk):
    """Good builds, and each output's sum and sum of squares less its first value (the shift,
    which keeps the variance accurate [derived]), over builds x conditions, per design."""
    b_step = max(1, chunk // max(1, nd * nc))
    ok = np.zeros(nd)
    s1 = {o: np.zeros(nd) for o in outs}
    s2 = {o: np.zeros(nd) for o in outs}
    shift = {o: None for o in outs}
    for b0 in range(0, n_mc, b_step):
        sl = slice(b0, min(n_mc, b0 + b_step))
        out = evaluate_block(study.case, design, cond, ideal=ideal,
                             variation=mc_variation(study, z, sl, cond, ideal), with_spec=False)
        full = (nd, sl.stop - sl.start, nc)       # an output may not vary along every axis
        out = {k: np.broadcast_to(v, full) for k, v in out.items()}
        if study.spec:
            good = ~spec_fail(study.case, out).any(axis=2)
        else:
            main = main_outputs(study.circuit)
            good = np.isfinite(out[main[0]]).all(axis=2) if main else np.ones(out["flag_mask"].shape[:2], bool)
        ok += good.sum(axis=1)
        for o in outs:
            v = out[o]
            if shift[o] is None:
                shift[o] = v[:, :1, :1].copy()
            d = v - shift[o]
            s1[o] += d.sum(axis=(1, 2))
            s2[o] += (d * d).sum(axis=(1, 2))
    return ok, s1, s2, {o: shift[o][:, 0, 0] for o in outs}


def _wc_margin(study: Study, row: dict) -> np.ndarray:
    """Smallest relative distance from the worst case to a spec limit (negative: outside)."""
    nd = len(row["design"])
    margin = np.full(nd, np.inf)
    for s in study.spec:
        with np.errstate(all="ignore"):
            if np.isfinite(s.lo):
                margin = np.minimum(margin, (row[f"{s.column}_wc_min"] - s.lo) / max(abs(s.lo), 1e-300))
            if np.isfinite(s.hi):
                margin = np.minimum(margin, (s.hi - row[f"{s.column}_wc_max"]) / max(abs(s.hi), 1e-300))
    return np.where(np.isnan(margin), -np.inf, margin)


def points_frame(study: Study, d_idx, c_idx, design, cond, out) -> pd.DataFrame:
    """Rows of design x condition points (machine columns) from a block's arrays."""
    nd, nc = len(d_idx), len(c_idx)
    cols: dict[str, np.ndarray] = {"design": np.repeat(d_idx + 1, nc), "condition": np.tile(c_idx + 1, nd)}
    for a in study.design:
        cols[a.column] = np.repeat(design[a.key], nc)
    for a in study.conditions:
        cols[a.column] = np.tile(cond[a.key], nd)
    from .variables import OUTPUTS
    for o in OUTPUTS:
        cols[o] = np.broadcast_to(out[o][:, 0, :], (nd, nc)).ravel()
    mask = np.broadcast_to(out["flag_mask"][:, 0, :], (nd, nc)).ravel()
    cols["flags"] = flag_text(mask)
    cols["ok"] = mask == 0
    return pd.DataFrame(cols)


def _condition_words(study: Study, cond: dict[str, np.ndarray], i: int) -> str:
    words = []
    for a in study.conditions:
        v = float(cond[a.key][i])
        words.append({"temperature": f"{v:g} °C", "vcc": f"{v:g} V"}.get(a.key, f"control pin {v:g} V"))
    return ", ".join(words) or "the nominal condition"


def stall_text(study: Study, cond: dict[str, np.ndarray], corners, nominal_mask: np.ndarray,
               first_stall: np.ndarray) -> np.ndarray:
    """Where each design first stalls (its capacitor never reaches the threshold): with its
    nominal parts at a condition, else at a worst-case corner (spreads.Corners); "" where it
    never stalls. nominal_mask is (designs, conditions); first_stall the first stalling corner
    x condition of each design (corner * conditions + condition), -1 for none."""
    nd, nc = nominal_mask.shape
    nom = (nominal_mask & STALL_BIT) != 0
    first = np.asarray(first_stall)
    code = np.where(nom.any(1), np.argmax(nom, 1), np.where(first >= 0, nc + first, -1))
    uniq, inv = np.unique(code, return_inverse=True)
    labels = []
    for u in uniq.tolist():
        if u < 0:
            labels.append("")
        elif u < nc:
            labels.append(f"stalls at {_condition_words(study, cond, u)} with nominal parts")
        else:
            k, c = divmod(u - nc, nc)
            labels.append(f"stalls at {_condition_words(study, cond, c)} with {corners.words(study, k)}")
    return np.array(labels, dtype=object)[inv.ravel()]


#: uncommon or costly parts [cp: distributors' ranges]: technology -> (below, above) in farads
UNCOMMON_C = {"C0G": (None, 100e-9), "polypropylene": (1e-9, 10e-6), "polyester": (1e-9, 10e-6),
              "electrolytic": (1e-6, None), "tantalum": (1e-6, None), "X7R": (None, 100e-6),
              "X5R": (None, 100e-6), "Y5V": (None, 100e-6)}
UNCOMMON_R = (1.0, 10e6)      # timing resistors outside 1 ohm .. 10 Mohm are hard to buy [cp]


def uncommon_parts(study: Study, designs: pd.DataFrame) -> np.ndarray:
    """A note per design naming a part that is uncommon or costly in its technology, or ""."""
    nd = len(designs)
    note = np.full(nd, "", dtype=object)
    tech = study.parts.technology
    if "c_f" in designs:
        lo, hi = UNCOMMON_C.get(tech.name, (None, None))
        c = designs["c_f"].to_numpy(float)
        if lo is not None:
            note[c < lo] = f"{tech.label} below {qv.format_eng(lo, 'F')} is uncommon"
        if hi is not None:
            note[c > hi] = f"{tech.label} above {qv.format_eng(hi, 'F')} is uncommon and costly"
    for col in ("ra_ohm", "rb_ohm", "r_ohm"):
        if col in designs:
            r = designs[col].to_numpy(float)
            bad = ((r < UNCOMMON_R[0]) | (r > UNCOMMON_R[1])) & (note == "")
            note[bad] = "a timing resistor outside 1 Ω to 10 MΩ is uncommon"
    return note


# ------------------------------------------------------------------ yield interval, verdict

def wilson_interval(k: np.ndarray, n: int, z: float = Z95) -> tuple[np.ndarray, np.ndarray]:
    """95 % Wilson score interval of k successes in n trials, vectorised
    [book: E. B. Wilson (1927), "Probable inference, the law of succession, and statistical
    inference"]. NaN where k is NaN or n is 0."""
    k = np.asarray(k, dtype=float)
    if n <= 0:
        return np.full(k.shape, np.nan), np.full(k.shape, np.nan)
    p = k / n
    denom = 1 + z * z / n
    centre = (p + z * z / (2 * n)) / denom
    half = z * np.sqrt(np.maximum(p * (1 - p) / n + z * z / (4 * n * n), 0.0)) / denom
    return np.clip(centre - half, 0.0, 1.0), np.clip(centre + half, 0.0, 1.0)


def yield_bounds(yld: np.ndarray, n: int, reach: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Wilson interval of each yield over n builds; a design screened out (its worst case lies
    wholly outside the spec, no build can meet it) has the exact interval [0, 0]."""
    lo, hi = wilson_interval(np.round(np.asarray(yld, float) * n), n)
    out = ~np.asarray(reach, dtype=bool)
    return np.where(out, 0.0, lo), np.where(out, 0.0, hi)


#: the verdict of a design, one word or two, and what it means (one legend for every output)
VERDICTS = {
    "pass": "within every limit and in spec at every condition with nominal parts, and the "
            "yield's 95 % interval reaches the yield target",
    "low yield": "within every limit and in spec with nominal parts, but the yield's 95 % "
                 "interval stays below the yield target",
    "not sampled": "within every limit and in spec with nominal parts; no Monte Carlo ran for it",
    "spec miss": "with nominal parts it misses a spec limit at some condition",
    "limit": "breaks a part or timer limit at some condition (see Flags)",
    "stalls": "with nominal parts the timer stalls (its capacitor never reaches the threshold) "
              "at some condition (see Stalls at); a stall only at a worst-case corner shows in "
              "Stalls at and counts against the yield",
}


def yield_target(study: Study) -> float:
    """The yield a pass needs: [spec] yield, else YIELD_FLOOR."""
    return study.yield_min if study.yield_min is not None else YIELD_FLOOR


def verdicts(study: Study, d: pd.DataFrame, n_mc: int) -> np.ndarray:
    """The verdict word of each design (keys of VERDICTS), from its flags, stall text and yield
    interval: stalls, then limit, then spec miss, then the yield."""
    mask = d["flag_mask"].to_numpy().astype(np.uint32)
    stalls = (mask & STALL_BIT) != 0            # with nominal parts at some condition
    hi = d["yield_hi"].to_numpy(float)
    out = np.full(len(d), "pass", dtype=object)
    if study.spec and n_mc > 0:
        out[np.isnan(hi)] = "not sampled"
        out[hi < yield_target(study)] = "low yield"
    out[((mask & SPEC_BIT) != 0) | ~d["feasible"].to_numpy(bool)] = "spec miss"
    out[(mask & LIMIT_BITS & ~STALL_BIT) != 0] = "limit"
    out[stalls] = "stalls"
    return out


# ------------------------------------------------------------------ ranking

def plainness(study: Study, designs: pd.DataFrame) -> tuple[np.ndarray, np.ndarray]:
    """(coarsest series index needed, distinct resistor values) per design: lower is plainer."""
    nd = len(designs)
    worst = np.zeros(nd, dtype=int)
    r_cols = [AXES[k][0] for k in ("ra", "rb", "r") if AXES[k][0] in designs]
    for a in study.design:
        if a.key not in ("ra", "rb", "r", "c"):
            continue
        order = np.argsort(a.values, kind="stable")
        pos = order[np.clip(np.searchsorted(a.values[order], designs[a.column].to_numpy()),
                            0, len(a.values) - 1)]
        worst = np.maximum(worst, a.series_rank[pos])
    if len(r_cols) > 1:
        vals = designs[r_cols].to_numpy()
        distinct = 1 + (np.diff(np.sort(vals, axis=1), axis=1) != 0).sum(axis=1)
    else:
        distinct = np.full(nd, len(r_cols))
    return worst, distinct


RANK_KEYS = ["design", "feasible", "yield", "wc_margin", "supply_current_a_max", "series_need",
             "distinct_values", "uncommon", "flag_mask", "stalls_at"]


def ranks_by_current(study: Study) -> bool:
    """Ties are broken by supply current in a battery study or one with a supply-current spec."""
    return study.supply == "battery" or any(s.key == "supply_current" for s in study.spec)


def rank_designs(designs: pd.DataFrame, by_current: bool = False,
                 yield_min: float | None = None, eligible: np.ndarray | None = None,
                 cost: np.ndarray | None = None) -> np.ndarray:
    """Rank of each row (1 = the pick).

    Feasible designs first. Among them, the leaders: with a yield target (yield_min), every
    design whose yield interval reaches it; without one, every design whose yield interval
    overlaps the best yield's (a tie within Monte Carlo noise). Leaders go by lower supply
    current (by_current) or wider worst-case margin, then plainer parts (no uncommon part,
    coarser series, fewer distinct values). The rest go by yield, worst-case margin, supply
    current, plainer parts. Needs yield_lo/yield_hi columns for the ties (else: no ties).
    `eligible` narrows the leaders (the pipeline passes the designs whose verdict is pass, when
    any is), so a tie never hands the pick to a design with a worse verdict."""
    n = len(designs)
    feas = designs["feasible"].to_numpy(dtype=bool)
    elig = feas if eligible is None else feas & np.asarray(eligible, dtype=bool)
    y = designs["yield"].to_numpy(float)
    lo = designs["yield_lo"].to_numpy(float) if "yield_lo" in designs else np.full(n, np.nan)
    hi = designs["yield_hi"].to_numpy(float) if "yield_hi" in designs else np.full(n, np.nan)
    current = designs["supply_current_a_max"].fillna(np.inf).to_numpy(float)
    margin = designs["wc_margin"].to_numpy(float)
    odd = (designs["uncommon"].fillna("").astype(str).to_numpy() != "").astype(float) \
        if "uncommon" in designs else np.zeros(n)
    series = designs["series_need"].to_numpy(float)
    distinct = designs["distinct_values"].to_numpy(float)
    if yield_min is not None:
        lead = elig & (hi >= yield_min)
        key = current
    else:
        ok = elig & np.isfinite(y) & np.isfinite(lo)
        lead = np.zeros(n, dtype=bool)
        if ok.any():
            best_lo = lo[ok][np.argmax(y[ok])]
            lead = ok & (hi >= best_lo)
        key = current if by_current else -margin
    tier = np.where(lead, 0, np.where(feas, 1, 2))
    yy = -np.nan_to_num(y, nan=-1.0)
    order = np.lexsort((designs["design"].to_numpy(),
                        np.where(lead, 0.0, distinct), np.where(lead, 0.0, series),
                        np.where(lead, distinct, odd), np.where(lead, series, current),
                        np.where(lead, odd, -margin), np.where(lead, key, yy),
                        np.where(lead, 0.0 if cost is None else np.asarray(cost, float), 0.0), tier))
    rank = np.empty(n, dtype=np.int64)
    rank[order] = np.arange(1, n + 1)
    return rank


def finish_keys(study: Study, keys: pd.DataFrame, n_mc: int) -> pd.DataFrame:
    """Add the yield interval, the verdict and the rank to the per-design keys (in place)."""
    keys["yield_lo"], keys["yield_hi"] = yield_bounds(keys["yield"].to_numpy(float), n_mc,
                                                      keys["reach"].to_numpy(bool))
    keys["verdict"] = verdicts(study, keys, n_mc)
    good = keys["verdict"].to_numpy() == "pass"
    keys["rank"] = rank_designs(keys, ranks_by_current(study), study.yield_min,
                                good if good.any() else None,
                                keys["cost_index"].to_numpy(float) if "cost_index" in keys else None)
    return keys


def analyse_designs(study: Study, start: int, stop: int, opt: Options = Options()) -> pd.DataFrame:
    """Every figure of designs [start, stop) in one table, Monte Carlo included for the designs
    the screening keeps (for small sweeps and tests; the pipeline runs the two passes apart)."""
    df, _ = analyse_block(study, start, stop, opt)
    n_mc = study.monte_carlo if opt.monte_carlo is None else opt.monte_carlo
    keep = df.loc[df["reach"], "design"].to_numpy()
    if n_mc > 0 and len(keep):
        mc = monte_carlo_block(study, keep, opt)
        df = df.drop(columns=["yield"]).merge(mc, on="design", how="left")
        df["yield"] = df["yield"].where(df["reach"], 0.0)
    else:
        for c in mc_columns(study)[2:]:
            df[c] = np.nan
    tail = mc_columns(study)[1:]
    df = df[[c for c in df.columns if c not in tail] + tail]
    df["yield_lo"], df["yield_hi"] = yield_bounds(df["yield"].to_numpy(float), n_mc,
                                                  df["reach"].to_numpy(bool))
    df["verdict"] = verdicts(study, df, n_mc)
    return df


# ------------------------------------------------------------------ part grades as design axes

def graded_analyse_block(study, start: int, stop: int, opt=None):
    """analyse_block over a study with part grades: each grade's piece runs on its own sub-study,
    renumbered into the study's numbering, with the grade columns added."""
    plain = analyse_block
    opt = opt or Options()
    if not study.grade_plan:
        return plain(study, start, stop, opt)
    frames, points = [], []
    for g, a, b in grades.split(study, start, stop):
        df, pts = plain(g.study, a, b, opt)
        df["design"] = df["design"] + g.offset
        for k, v in grades.grade_columns(study, df["design"].to_numpy()).items():
            df[k] = v
        frames.append(df)
        if pts is not None:
            pts["design"] = pts["design"] + g.offset
            pts.insert(2, "grade", g.index + 1)
            points.append(pts)
    return (pd.concat(frames, ignore_index=True),
            pd.concat(points, ignore_index=True) if points else None)


def graded_monte_carlo_block(study, designs: np.ndarray, opt=None) -> pd.DataFrame:
    """monte_carlo_block over a study with part grades, grade by grade, in the order given."""
    plain = monte_carlo_block
    opt = opt or Options()
    designs = np.asarray(designs)
    if not study.grade_plan:
        return plain(study, designs, opt)
    g = grades.grade_of(study, designs)
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
